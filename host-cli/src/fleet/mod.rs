//! One home for a device's replay on the host: which logs a command names
//! ([`logs`]), the settings each log is replayed with ([`settings`]), and
//! how the totals are shown ([`report`]). `headroom replay` and
//! `headroom tune` both go through here, with the engine's replay
//! semantics (`headroom::control::Replay`) and window
//! ([`REPLAY_WINDOW`]), the same as the firmware's replay on target.

pub mod baselines;
pub mod logs;
pub mod report;
pub mod settings;

use std::path::Path;

use headroom::control::settings::Layer;
use headroom::control::Replay;
pub use headroom::control::REPLAY_WINDOW;

use crate::error::CliResult;
use crate::logio::{self, HeaderStatus, LogReader, ReadOptions};
use settings::{LogSettings, Resolver};

/// The replay every host command runs.
pub type HostReplay = Replay<REPLAY_WINDOW>;

/// A log opened for replay, with its settings resolved.
pub struct OpenLog {
    /// The records.
    pub reader: LogReader,
    /// The settings in force and the warnings about them.
    pub settings: LogSettings,
}

/// Open `path` with `opts` and resolve its settings (with `extra` on top of
/// the flags); a lost or damaged header is said in the warnings.
pub fn open(
    path: &Path,
    opts: &ReadOptions,
    resolver: &Resolver,
    extra: Option<&Layer>,
) -> CliResult<OpenLog> {
    open_reader(path, logio::open_with(path, opts)?, resolver, extra)
}

/// As [`open`], with the log already opened as `reader` (a log given as
/// columns, [`logio::columns`]); `path` names it.
pub fn open_reader(
    path: &Path,
    reader: LogReader,
    resolver: &Resolver,
    extra: Option<&Layer>,
) -> CliResult<OpenLog> {
    let damaged = matches!(reader.header_status(), HeaderStatus::Damaged { .. });
    let settings = resolver.resolve(path, reader.header(), damaged, extra)?;
    Ok(OpenLog { reader, settings })
}
