//! Output that never leaves a half-written file under its final name and
//! never replaces an input.
//!
//! - The bytes go to a temporary file in the destination's directory, which
//!   [`AtomicFile::commit`] flushes, syncs and moves into place. A file
//!   dropped without `commit` (an error, a panic) removes its temporary
//!   file; so does an interrupt (Ctrl-C, SIGTERM, SIGHUP: the handler that
//!   [`install_cleanup`] sets removes every temporary file, then exits with
//!   130).
//! - An existing destination is refused unless `force`.
//! - An input is never an output: every reader of a file (logs, link,
//!   controller and scenario files) registers it with [`note_input`] (or
//!   reads it with [`read_text`]), and a destination that is the same file
//!   as any input, by identity (device and inode, so a hard link or another
//!   spelling of the path is seen through), is refused with or without
//!   `force`, both when the output is created and when it is moved into
//!   place. Inputs are registered once [`track_inputs`] has been called (a
//!   command run by [`crate::run`]).
//!
//! The one implementation behind every file headroom writes: streamed
//! (field logs, through [`AtomicFile`] as a [`Write`]) or whole
//! (plots, through [`write`]).

use std::collections::HashMap;
use std::ffi::OsString;
use std::fs::{self, File};
use std::io::{self, BufWriter, Read, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Mutex, MutexGuard, PoisonError};

use crate::error::{CliError, CliResult};

/// Size of the write buffer in front of the temporary file.
const BUFFER: usize = 64 * 1024;
/// Temporary names tried before giving up.
const TEMP_TRIES: u32 = 100;
/// Longest part of the destination's name kept in the temporary name, in
/// bytes: with the dot and the `.tmp-PID-N` suffix the temporary name stays
/// under the 255 bytes most file systems allow for a name.
const TEMP_NAME_KEEP: usize = 200;
/// Exit code after an interrupt (128 + SIGINT, the shell's convention).
pub const INTERRUPTED: i32 = 130;

/// What identifies a file whatever the path used to reach it.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
struct FileId(#[cfg(unix)] (u64, u64), #[cfg(not(unix))] PathBuf);

impl FileId {
    #[cfg(unix)]
    fn of(_path: &Path, meta: &fs::Metadata) -> Option<FileId> {
        use std::os::unix::fs::MetadataExt;
        Some(FileId((meta.dev(), meta.ino())))
    }

    #[cfg(not(unix))]
    fn of(path: &Path, _meta: &fs::Metadata) -> Option<FileId> {
        fs::canonicalize(path).ok().map(FileId)
    }
}

/// The inputs of this process, with the path each was named by.
static INPUTS: Mutex<Option<HashMap<FileId, PathBuf>>> = Mutex::new(None);
/// Inputs are registered: set by [`track_inputs`] when a command runs.
static TRACKING: AtomicBool = AtomicBool::new(false);
/// The temporary files being written, removed by an interrupt.
static TEMPS: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

/// A lock that a panic elsewhere does not make unusable: the lists stay
/// valid between any two of their operations.
fn lock<T>(m: &Mutex<T>) -> MutexGuard<'_, T> {
    m.lock().unwrap_or_else(PoisonError::into_inner)
}

/// Register `path` as an input of this command: no output may replace it.
/// A path that cannot be examined is not registered (its reader reports
/// why it cannot be read); an existing output cannot be that file then.
pub fn note_input(path: &Path) {
    if let Ok(meta) = fs::metadata(path) {
        note_id(path, &meta);
    }
}

/// Register every path of `paths` as [`note_input`] does: what a command
/// does first, so that its early refusal of an output already knows them.
pub fn note_inputs(paths: impl IntoIterator<Item = impl AsRef<Path>>) {
    for p in paths {
        note_input(p.as_ref());
    }
}

/// Register the file `file`, opened from `path`, as an input: the identity
/// is that of the file actually opened.
pub fn note_input_file(path: &Path, file: &File) {
    match file.metadata() {
        Ok(meta) => note_id(path, &meta),
        Err(_) => note_input(path),
    }
}

/// Register the inputs of this process from now on: [`crate::run`] calls
/// it, since one process runs one command. Until then (the library used by
/// the fuzz targets and unit tests, which read and write many files in one
/// process) nothing is registered and no output is refused as an input.
pub fn track_inputs() {
    TRACKING.store(true, Ordering::Relaxed);
}

/// Forget the inputs registered so far: a process that runs one command
/// after another (the Python binding) calls it before each, so that a file
/// read by one command may be the output of a later one. Registration
/// stays on.
pub fn forget_inputs() {
    *lock(&INPUTS) = None;
}

fn note_id(path: &Path, meta: &fs::Metadata) {
    if !TRACKING.load(Ordering::Relaxed) {
        return;
    }
    if let Some(id) = FileId::of(path, meta) {
        lock(&INPUTS)
            .get_or_insert_with(HashMap::new)
            .entry(id)
            .or_insert_with(|| path.to_path_buf());
    }
}

/// Largest text file read whole (link, controller and scenario files):
/// far above any real one, it bounds the memory of reading one (and ends the
/// reading of `/dev/zero` or an endless pipe).
pub const MAX_TEXT_BYTES: u64 = 16 * 1024 * 1024;

/// Read the text file `path` whole, registered as an input (link,
/// controller and scenario files); at most [`MAX_TEXT_BYTES`]. Errors as
/// [`CliError::input_file`].
pub fn read_text(path: &Path) -> CliResult<String> {
    let file = File::open(path).map_err(|e| CliError::input_file(path, "cannot read", &e))?;
    note_input_file(path, &file);
    let mut text = String::new();
    file.take(MAX_TEXT_BYTES + 1)
        .read_to_string(&mut text)
        .map_err(|e| CliError::input_file(path, "cannot read", &e))?;
    if text.len() as u64 > MAX_TEXT_BYTES {
        return Err(CliError::Input(format!(
            "{}: longer than {} MiB: not a settings file",
            path.display(),
            MAX_TEXT_BYTES >> 20
        )));
    }
    Ok(text)
}

/// The input that `dest` is the same file as, if any.
fn input_at(dest: &Path) -> Option<PathBuf> {
    let meta = fs::metadata(dest).ok()?;
    let id = FileId::of(dest, &meta)?;
    lock(&INPUTS).as_ref()?.get(&id).cloned()
}

fn input_error(dest: &Path, input: &Path) -> CliError {
    let same = if input == dest {
        "is an input of this command".to_string()
    } else {
        format!("is the same file as the input {}", input.display())
    };
    CliError::Input(format!(
        "{}: {same}; an output never replaces an input: give the output another name",
        dest.display()
    ))
}

fn exists_error(dest: &Path) -> CliError {
    CliError::Input(format!(
        "{}: already exists (use --force to overwrite)",
        dest.display()
    ))
}

/// Refuse `dest` early if it is an input, or exists and `force` is not
/// set, so that a command fails before doing its work rather than after.
pub fn check_new(dest: &Path, force: bool) -> CliResult {
    if dest.file_name().is_none() {
        return Err(CliError::Input(format!(
            "{}: not a file name",
            dest.display()
        )));
    }
    if let Some(input) = input_at(dest) {
        return Err(input_error(dest, &input));
    }
    if let Ok(meta) = fs::symlink_metadata(dest) {
        // Renaming over a device, a directory or a link would replace it
        // (`--force` onto /dev/null must not delete the device): refuse.
        if !meta.file_type().is_file() {
            return Err(CliError::Input(format!(
                "{}: exists and is not a regular file; give a file name for the output",
                dest.display()
            )));
        }
        if !force {
            return Err(exists_error(dest));
        }
    }
    Ok(())
}

/// Remove every temporary output being written (the interrupt handler's
/// work; also the panic hook's).
pub fn remove_temporaries() {
    let mut temps = lock(&TEMPS);
    for t in temps.drain(..) {
        let _ = fs::remove_file(t);
    }
}

/// Install, once per process, the handler of Ctrl-C, SIGTERM and SIGHUP
/// (remove the temporary outputs, exit with [`INTERRUPTED`]) and a panic
/// hook that removes them too before the usual panic message. A handler
/// that cannot be installed leaves the default behaviour (the process ends;
/// a temporary file may stay behind, nothing appears under a final name).
pub fn install_cleanup() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| {
        let _ = ctrlc::set_handler(|| {
            remove_temporaries();
            std::process::exit(INTERRUPTED);
        });
        let default = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            // Never block in a panic: the panicking thread may hold the lock.
            if let Ok(mut temps) = TEMPS.try_lock() {
                for t in temps.drain(..) {
                    let _ = fs::remove_file(t);
                }
            }
            default(info);
        }));
    });
}

/// Forget `tmp` as a temporary output (moved into place or removed).
fn unregister(tmp: &Path) {
    lock(&TEMPS).retain(|t| t != tmp);
}

/// The temporary name of an output named `name`: hidden, unique to this
/// process and try `n`, and short enough for the file system.
fn temp_name(name: &std::ffi::OsStr, n: u32) -> OsString {
    let mut tmp = OsString::from(".");
    if name.len() <= TEMP_NAME_KEEP {
        tmp.push(name);
    } else {
        let lossy = name.to_string_lossy();
        let mut end = 0;
        for (i, c) in lossy.char_indices() {
            if i + c.len_utf8() > TEMP_NAME_KEEP {
                break;
            }
            end = i + c.len_utf8();
        }
        tmp.push(lossy.get(..end).unwrap_or_default());
    }
    tmp.push(format!(".tmp-{}-{n}", std::process::id()));
    tmp
}

/// The directory `dest` goes into (`.` for a bare file name).
fn parent_dir(dest: &Path) -> &Path {
    match dest.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// An output file being written under a temporary name; a buffered
/// [`Write`]. [`AtomicFile::commit`] keeps it, dropping it discards it.
pub struct AtomicFile {
    dest: PathBuf,
    /// The temporary file; `None` once it has been moved or removed.
    tmp: Option<PathBuf>,
    /// `None` once closed by `commit` or `drop`.
    file: Option<BufWriter<File>>,
    force: bool,
}

impl AtomicFile {
    /// Start writing `dest`: checks it as [`check_new`] does, then creates
    /// a new temporary file beside it (`.NAME.tmp-PID-N`).
    pub fn create(dest: &Path, force: bool) -> CliResult<AtomicFile> {
        check_new(dest, force)?;
        let name = dest
            .file_name()
            .ok_or_else(|| CliError::Input(format!("{}: not a file name", dest.display())))?;
        let dir = parent_dir(dest);
        let temp_error = |e: Option<io::Error>| {
            let why = e.map(|e| format!(": {e}")).unwrap_or_default();
            CliError::Io(format!(
                "{}: cannot create a temporary file in {}{why}",
                dest.display(),
                dir.display()
            ))
        };
        for n in 0..TEMP_TRIES {
            let tmp = dir.join(temp_name(name, n));
            // Created and registered under the lock, so that an interrupt
            // cannot come between the two.
            let mut temps = lock(&TEMPS);
            match fs::OpenOptions::new()
                .write(true)
                .create_new(true)
                .open(&tmp)
            {
                Ok(f) => {
                    temps.push(tmp.clone());
                    return Ok(AtomicFile {
                        dest: dest.to_path_buf(),
                        tmp: Some(tmp),
                        file: Some(BufWriter::with_capacity(BUFFER, f)),
                        force,
                    });
                }
                Err(e) if e.kind() == io::ErrorKind::AlreadyExists => continue,
                Err(e) => return Err(temp_error(Some(e))),
            }
        }
        Err(temp_error(None))
    }

    /// A write failure as the command's error, naming the final file.
    pub fn io_error(&self, e: io::Error) -> CliError {
        CliError::Io(format!("{}: cannot write: {e}", self.dest.display()))
    }

    /// Flush, fsync and move the file into place. Without `force` the move
    /// is a hard link, which refuses to replace a file that appeared since
    /// [`AtomicFile::create`] (an error; that file is left as it is).
    pub fn commit(mut self) -> CliResult {
        let Some(buf) = self.file.take() else {
            return Err(self.io_error(closed()));
        };
        let file = buf
            .into_inner()
            .map_err(|e| self.io_error(e.into_error()))?;
        file.sync_all().map_err(|e| self.io_error(e))?;
        drop(file);
        let Some(tmp) = self.tmp.clone() else {
            return Err(self.io_error(closed()));
        };
        // An input may have been opened since `create`: look again.
        if let Some(input) = input_at(&self.dest) {
            return Err(input_error(&self.dest, &input));
        }
        let placed = if self.force {
            fs::rename(&tmp, &self.dest).map(|()| self.moved(&tmp))
        } else {
            match fs::hard_link(&tmp, &self.dest) {
                // The output is in place; a temporary name that cannot be
                // removed now is retried on drop.
                Ok(()) => {
                    if fs::remove_file(&tmp).is_ok() {
                        self.moved(&tmp);
                    }
                    Ok(())
                }
                Err(e) if e.kind() == io::ErrorKind::AlreadyExists => {
                    return Err(exists_error(&self.dest))
                }
                // File systems without hard links: plain rename.
                Err(_) => fs::rename(&tmp, &self.dest).map(|()| self.moved(&tmp)),
            }
        };
        placed.map_err(|e| {
            CliError::Io(format!(
                "{}: cannot move the output into place: {e}",
                self.dest.display()
            ))
        })?;
        // Persist the rename; not every platform can open a directory.
        if let Ok(d) = File::open(parent_dir(&self.dest)) {
            let _ = d.sync_all();
        }
        Ok(())
    }

    /// The temporary file is gone (moved into place or removed).
    fn moved(&mut self, tmp: &Path) {
        self.tmp = None;
        unregister(tmp);
    }

    fn file(&mut self) -> io::Result<&mut BufWriter<File>> {
        self.file.as_mut().ok_or_else(closed)
    }
}

fn closed() -> io::Error {
    io::Error::other("output already closed")
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.file()?.write(buf)
    }

    fn write_all(&mut self, buf: &[u8]) -> io::Result<()> {
        self.file()?.write_all(buf)
    }

    /// Writes the buffer to the temporary file (no fsync: that is
    /// [`AtomicFile::commit`]'s).
    fn flush(&mut self) -> io::Result<()> {
        self.file()?.flush()
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        // Close without flushing: the buffered bytes are being discarded.
        if let Some(buf) = self.file.take() {
            drop(buf.into_parts());
        }
        if let Some(tmp) = self.tmp.take() {
            let _ = fs::remove_file(&tmp);
            unregister(&tmp);
        }
    }
}

/// Write `bytes` to `dest` through a temporary file and a move into place.
pub fn write(dest: &Path, force: bool, bytes: &[u8]) -> CliResult {
    let mut out = AtomicFile::create(dest, force)?;
    out.write_all(bytes).map_err(|e| out.io_error(e))?;
    out.commit()
}

#[cfg(test)]
mod tests {
    #[test]
    fn a_device_is_never_replaced_even_with_force() {
        for force in [false, true] {
            let e = super::check_new(std::path::Path::new("/dev/null"), force);
            assert!(e.is_err(), "force={force}");
        }
        assert!(std::path::Path::new("/dev/null").exists());
    }

    use super::*;

    fn names(dir: &Path) -> Vec<OsString> {
        let mut v: Vec<_> = fs::read_dir(dir)
            .expect("list")
            .map(|e| e.expect("entry").file_name())
            .collect();
        v.sort();
        v
    }

    #[test]
    fn writes_refuses_and_overwrites_with_force() {
        let dir = tempfile::tempdir().expect("temp dir");
        let p = dir.path().join("out.bin");
        write(&p, false, b"one").expect("first write");
        assert_eq!(fs::read(&p).expect("read"), b"one");
        let e = write(&p, false, b"two").expect_err("refused");
        assert_eq!(e.exit_code(), 2);
        assert!(e.to_string().contains("--force"), "{e}");
        assert_eq!(fs::read(&p).expect("read"), b"one");
        write(&p, true, b"two").expect("forced write");
        assert_eq!(fs::read(&p).expect("read"), b"two");
        // No temporary file is left behind.
        assert_eq!(names(dir.path()), vec![OsString::from("out.bin")]);
    }

    #[test]
    fn a_missing_directory_is_an_io_error() {
        let dir = tempfile::tempdir().expect("temp dir");
        let p = dir.path().join("no-such-dir").join("out.bin");
        let e = write(&p, false, b"x").expect_err("fails");
        assert_eq!(e.exit_code(), 1);
        assert!(e.to_string().contains("temporary file"), "{e}");
    }

    #[test]
    fn dropped_without_commit_leaves_no_file_and_no_temp() {
        let dir = tempfile::tempdir().expect("temp dir");
        let p = dir.path().join("out.csv");
        {
            let mut f = AtomicFile::create(&p, false).expect("create");
            // More than the buffer, so some bytes reach the temporary file.
            f.write_all(&vec![b'x'; BUFFER * 3 + 7]).expect("write");
            f.flush().expect("flush");
            assert_eq!(
                names(dir.path()).len(),
                1,
                "the temporary file exists while writing"
            );
            assert!(!p.exists(), "nothing under the final name before commit");
        }
        assert!(names(dir.path()).is_empty(), "{:?}", names(dir.path()));
    }

    #[test]
    fn dropped_without_commit_leaves_an_existing_file_alone() {
        let dir = tempfile::tempdir().expect("temp dir");
        let p = dir.path().join("out.csv");
        fs::write(&p, b"old").expect("seed");
        {
            let mut f = AtomicFile::create(&p, true).expect("create");
            f.write_all(b"new, never kept").expect("write");
        }
        assert_eq!(fs::read(&p).expect("read"), b"old");
        assert_eq!(names(dir.path()), vec![OsString::from("out.csv")]);
    }

    #[test]
    fn streamed_output_appears_whole_on_commit() {
        let dir = tempfile::tempdir().expect("temp dir");
        let p = dir.path().join("out.log");
        let mut f = AtomicFile::create(&p, false).expect("create");
        let mut want = Vec::new();
        for k in 0..20_000u32 {
            let line = format!("{k},{}\n", k * 7);
            f.write_all(line.as_bytes()).expect("write");
            want.extend_from_slice(line.as_bytes());
        }
        assert!(!p.exists(), "nothing under the final name before commit");
        f.commit().expect("commit");
        assert_eq!(fs::read(&p).expect("read"), want);
        assert_eq!(names(dir.path()), vec![OsString::from("out.log")]);
    }

    #[test]
    fn a_file_that_appears_meanwhile_is_kept_unless_force() {
        for force in [false, true] {
            let dir = tempfile::tempdir().expect("temp dir");
            let p = dir.path().join("out.bin");
            let mut f = AtomicFile::create(&p, force).expect("create");
            f.write_all(b"ours").expect("write");
            fs::write(&p, b"theirs").expect("someone else writes");
            let got = f.commit();
            if force {
                got.expect("commit");
                assert_eq!(fs::read(&p).expect("read"), b"ours");
            } else {
                let e = got.expect_err("refused");
                assert_eq!(e.exit_code(), 2);
                assert!(e.to_string().contains("already exists"), "{e}");
                assert_eq!(fs::read(&p).expect("read"), b"theirs");
            }
            assert_eq!(
                names(dir.path()),
                vec![OsString::from("out.bin")],
                "force {force}"
            );
        }
    }

    #[test]
    fn temporary_names_stay_within_255_bytes() {
        use std::ffi::OsStr;
        let short = temp_name(OsStr::new("out.csv"), 3);
        assert_eq!(
            short,
            OsString::from(format!(".out.csv.tmp-{}-3", std::process::id()))
        );
        for name in [
            "d".repeat(255),
            format!("{}.csv", "\u{1f4e1}".repeat(62)),
            format!("{}é.csv", "e".repeat(199)),
        ] {
            let t = temp_name(OsStr::new(&name), 99);
            assert!(t.len() <= 255, "{} bytes", t.len());
            let t = t.to_str().expect("UTF-8 kept");
            assert!(t.starts_with('.') && t.contains(".tmp-"), "{t}");
        }
    }

    #[test]
    fn not_a_file_name_and_an_existing_directory() {
        let dir = tempfile::tempdir().expect("temp dir");
        let e = AtomicFile::create(Path::new(".."), true)
            .err()
            .expect("refused");
        assert_eq!(e.exit_code(), 2);
        assert!(e.to_string().contains("not a file name"), "{e}");
        // A directory that exists is refused, with or without --force.
        for force in [false, true] {
            let e = AtomicFile::create(dir.path(), force)
                .err()
                .expect("refused");
            assert!(e.to_string().contains("not a regular file"), "{e}");
        }
    }
}
