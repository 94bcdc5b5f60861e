//! The logs a command names: files as given, a directory as the `.csv` and
//! `.hrlog` files directly inside it (any case of the extension), sorted by
//! name; subdirectories are not entered.

use std::fs;
use std::path::{Path, PathBuf};

use crate::error::{CliError, CliResult};
use crate::logio;

/// The expanded list of logs, and what a directory held that could not be
/// taken as a log.
#[derive(Debug, Default)]
pub struct LogList {
    /// The logs, in order.
    pub logs: Vec<PathBuf>,
    /// Entries named like logs that were skipped (a dangling link, not a
    /// regular file), with why.
    pub skipped: Vec<(PathBuf, String)>,
}

fn is_log_name(p: &Path) -> bool {
    p.extension()
        .and_then(|x| x.to_str())
        .is_some_and(|x| x.eq_ignore_ascii_case("csv") || x.eq_ignore_ascii_case(logio::BINARY_EXT))
}

/// Expand the LOG arguments. A directory without any log is an error; an
/// entry named like a log that is not a readable regular file is skipped
/// and reported (an error with `strict`).
pub fn expand(args: &[PathBuf], strict: bool) -> CliResult<LogList> {
    let mut list = LogList::default();
    for a in args {
        if !a.is_dir() {
            list.logs.push(a.clone());
            continue;
        }
        let listing_error = |e: std::io::Error| {
            CliError::Io(format!("{}: cannot list the directory: {e}", a.display()))
        };
        let mut found = Vec::new();
        for e in fs::read_dir(a).map_err(listing_error)? {
            let p = e.map_err(listing_error)?.path();
            if !is_log_name(&p) {
                continue;
            }
            match fs::metadata(&p) {
                Ok(m) if m.is_file() => found.push(p),
                Ok(_) => list.skipped.push((p, "not a regular file".into())),
                Err(e) => list.skipped.push((p, format!("cannot be opened: {e}"))),
            }
        }
        if found.is_empty() && list.skipped.is_empty() {
            return Err(CliError::arg(
                "LOG",
                format!("{}: a directory without .csv or .hrlog logs", a.display()),
            ));
        }
        found.sort();
        list.logs.extend(found);
    }
    list.skipped.sort();
    if strict {
        if let Some((p, why)) = list.skipped.first() {
            return Err(CliError::Input(format!(
                "{}: {why} (--strict: every log of a directory must be readable)",
                p.display()
            )));
        }
    }
    if list.logs.is_empty() {
        return Err(CliError::arg("LOG", "no readable log among those named"));
    }
    Ok(list)
}
