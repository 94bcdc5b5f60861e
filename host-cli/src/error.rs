//! Errors of the command line: one line, naming what was wrong.

use std::fmt;

/// A failure of a command, printed as one line on stderr.
#[derive(Debug, Clone)]
pub enum CliError {
    /// Bad input: an argument, a file's content, a setting. Exit code 2.
    Input(String),
    /// The environment failed: a file could not be read or written. Exit code 1.
    Io(String),
}

impl CliError {
    /// An input error about argument `arg`.
    pub fn arg(arg: &str, why: impl fmt::Display) -> Self {
        CliError::Input(format!("{arg}: {why}"))
    }

    /// A named input file that could not be opened or read (`what`: "cannot
    /// open", "cannot read"): bad input (exit 2) when it does not exist, is a
    /// directory or is not text where text is read, since the argument names
    /// no usable file; an environment failure (exit 1) otherwise
    /// (permissions, a read error of a file that is there).
    pub fn input_file(path: &std::path::Path, what: &str, e: &std::io::Error) -> Self {
        let msg = format!("{}: {what}: {e}", path.display());
        use std::io::ErrorKind;
        if matches!(
            e.kind(),
            ErrorKind::NotFound | ErrorKind::IsADirectory | ErrorKind::InvalidData
        ) {
            CliError::Input(msg)
        } else {
            CliError::Io(msg)
        }
    }

    /// Exit code for this error.
    pub fn exit_code(&self) -> u8 {
        match self {
            CliError::Input(_) => 2,
            CliError::Io(_) => 1,
        }
    }
}

impl fmt::Display for CliError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CliError::Input(m) | CliError::Io(m) => f.write_str(m),
        }
    }
}

impl From<headroom::Error> for CliError {
    fn from(e: headroom::Error) -> Self {
        CliError::Input(e.to_string())
    }
}

/// An engine error about one of a command's options, naming the option
/// (`--frequency: must be greater than zero`) instead of the engine's
/// parameter (`frequency_hz`). `options` maps engine parameters to option
/// names; an error about any other parameter is kept as the engine says it.
pub fn engine_error(e: &headroom::Error, options: &[(&str, &str)]) -> CliError {
    let msg = e.to_string();
    let param = e.param();
    match options.iter().find(|(p, _)| *p == param) {
        Some((_, option)) => {
            let rest = msg
                .strip_prefix(param)
                .and_then(|r| r.strip_prefix(": "))
                .unwrap_or(&msg);
            CliError::arg(option, rest)
        }
        None => CliError::Input(msg),
    }
}

/// Shorthand result type of commands.
pub type CliResult<T = ()> = Result<T, CliError>;

/// `msg` with control characters escaped (`\r`, `\u{0}`), so that bytes
/// quoted from a hostile file cannot break the one-line error or the terminal.
pub fn printable(msg: &str) -> String {
    msg.chars()
        .map(|c| {
            if c.is_control() {
                c.escape_default().to_string()
            } else {
                c.to_string()
            }
        })
        .collect()
}
