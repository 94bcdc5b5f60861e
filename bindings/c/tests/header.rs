//! The committed `include/headroom.h` is the header cbindgen generates from
//! the crate's source now: regenerated in memory and compared byte for
//! byte (no cbindgen binary needed).
#![allow(clippy::panic, clippy::indexing_slicing)] // a test fails by panicking

use std::path::PathBuf;

#[test]
fn committed_header_is_current() {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    let config = match cbindgen::Config::from_file(dir.join("cbindgen.toml")) {
        Ok(c) => c,
        Err(e) => panic!("bindings/c/cbindgen.toml: {e}"),
    };
    let bindings = match cbindgen::Builder::new()
        .with_crate(&dir)
        .with_config(config)
        .generate()
    {
        Ok(b) => b,
        Err(e) => panic!("cbindgen: {e}"),
    };
    let mut fresh = Vec::new();
    bindings.write(&mut fresh);
    let path = dir.join("include").join("headroom.h");
    if std::env::var_os("HEADROOM_BLESS").is_some() {
        if let Err(e) = std::fs::write(&path, &fresh) {
            panic!("cannot write {}: {e}", path.display());
        }
        return;
    }
    let committed = std::fs::read(&path).unwrap_or_default();
    assert!(
        committed == fresh,
        "{} is not the header the source generates; refresh it with\n  \
         HEADROOM_BLESS=1 cargo test -p headroom-c --test header\nand commit it",
        path.display()
    );
}
