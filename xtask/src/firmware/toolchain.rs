//! Which Rust toolchain builds the firmware.
//!
//! Where rustup has the bare-metal target installed, the ordinary cargo
//! builds it. Otherwise Debian's packaged toolchain (`rustc-web`,
//! `cargo-web`, `rust-web-src`) builds `core` from source with
//! `-Zbuild-std`, which that stable compiler accepts with
//! `RUSTC_BOOTSTRAP=1`.

use std::env;
use std::path::Path;
use std::process::Command;

use super::Ctx;
use std::time::Duration;

use crate::proc::{run_capture, run_inherit, Output};

/// How to build for one target.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Toolchain {
    /// rustup's toolchain with the target's prebuilt `core`.
    Rustup,
    /// Debian's `/usr/bin/cargo` and `/usr/bin/rustc` with `-Zbuild-std`.
    Debian,
}

const DEBIAN_CARGO: &str = "/usr/bin/cargo";
const DEBIAN_RUSTC: &str = "/usr/bin/rustc";
const DEBIAN_LIBRARY_SOURCE: &str = "/usr/lib/rustlib/src/rust/library/core";

impl Toolchain {
    /// Pick the toolchain for `target`.
    pub fn detect(target: &str) -> Result<Toolchain, String> {
        let installed = Command::new("rustup")
            .args(["target", "list", "--installed"])
            .output()
            .ok()
            .filter(|o| o.status.success())
            .map(|o| {
                String::from_utf8_lossy(&o.stdout)
                    .lines()
                    .any(|l| l.trim() == target)
            })
            .unwrap_or(false);
        if installed {
            return Ok(Toolchain::Rustup);
        }
        if Path::new(DEBIAN_CARGO).exists()
            && Path::new(DEBIAN_RUSTC).exists()
            && Path::new(DEBIAN_LIBRARY_SOURCE).exists()
        {
            return Ok(Toolchain::Debian);
        }
        Err(format!(
            "no toolchain can build {target}: either `rustup target add {target}`, or install \
             Debian's packaged Rust: `apt-get install rustc-web cargo-web rust-web-src \
             rust-web-llvm lld-22` (see DEVELOPERS.md)"
        ))
    }

    /// One line for the log.
    pub fn describe(self) -> &'static str {
        match self {
            Toolchain::Rustup => "rustup toolchain, installed target",
            Toolchain::Debian => "Debian's packaged toolchain, -Zbuild-std",
        }
    }

    /// `cargo build --release --target TARGET EXTRA...` in `firmware-demo/`.
    pub fn cargo_build(self, ctx: &Ctx, target: &str, extra: &[&str]) -> Result<(), String> {
        run_inherit(&mut self.cargo(ctx, target, extra)?)
    }

    /// The same build with its output captured.
    pub fn cargo_build_captured(
        self,
        ctx: &Ctx,
        target: &str,
        extra: &[&str],
    ) -> Result<Output, String> {
        run_capture(
            &mut self.cargo(ctx, target, extra)?,
            Duration::from_secs(1800),
        )
    }

    fn cargo(self, ctx: &Ctx, target: &str, extra: &[&str]) -> Result<Command, String> {
        let mut c = match self {
            Toolchain::Rustup => {
                Command::new(env::var_os("CARGO").unwrap_or_else(|| "cargo".into()))
            }
            Toolchain::Debian => {
                let mut c = Command::new(DEBIAN_CARGO);
                let path = env::var_os("PATH").unwrap_or_default();
                let mut dirs = vec![Path::new("/usr/bin").to_path_buf()];
                dirs.extend(env::split_paths(&path));
                let joined = env::join_paths(dirs).map_err(|e| format!("PATH: {e}"))?;
                c.env("PATH", joined)
                    .env("RUSTC", DEBIAN_RUSTC)
                    .env("RUSTC_BOOTSTRAP", "1")
                    // rustup's proxies would otherwise pick its own toolchain.
                    .env_remove("RUSTUP_TOOLCHAIN")
                    .env_remove("RUSTDOC")
                    .env_remove("CARGO");
                c
            }
        };
        c.current_dir(&ctx.fw)
            .env("CARGO_TARGET_DIR", &ctx.target_dir)
            // RUSTFLAGS would replace the linker-script flags of
            // firmware-demo/.cargo/config.toml.
            .env_remove("RUSTFLAGS")
            .env_remove("CARGO_ENCODED_RUSTFLAGS")
            .args(["build", "--release", "--target", target]);
        if self == Toolchain::Debian {
            c.args([
                "-Zbuild-std=core,compiler_builtins",
                "-Zbuild-std-features=compiler-builtins-mem",
            ]);
        }
        c.args(extra);
        Ok(c)
    }
}
