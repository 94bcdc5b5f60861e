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

/// Characters never printed raw: the C0 and C1 controls (ESC, CR, LF, NUL,
/// CSI...), DEL, and the bidirectional embeddings, overrides and isolates
/// (U+202A..U+202E, U+2066..U+2069), which can make a line read otherwise
/// than it is.
pub fn is_unprintable(c: char) -> bool {
    c.is_control() || matches!(c, '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}')
}

/// `msg` with every [`is_unprintable`] character escaped (`\r`, `\u{1b}`),
/// so that bytes quoted from a hostile file cannot break a one-line message,
/// forge a table row or drive the terminal. The one escape of every table,
/// warning, error and plot text.
pub fn printable(msg: &str) -> String {
    let mut out = String::with_capacity(msg.len());
    for c in msg.chars() {
        if is_unprintable(c) {
            out.extend(c.escape_default());
        } else {
            out.push(c);
        }
    }
    out
}

/// JSON text with the [`is_unprintable`] characters that the encoder leaves
/// raw (DEL, C1, bidirectional controls) written as `\uXXXX` escapes: the
/// same JSON value, without a raw control character. These characters can
/// only occur inside strings, where the escape is exact; the C0 controls are
/// already escaped there by the encoder, and outside strings they are the
/// layout (newlines of pretty printing), kept.
pub fn printable_json(json: &str) -> String {
    let mut out = String::with_capacity(json.len());
    for c in json.chars() {
        if is_unprintable(c) && c > '\u{1f}' {
            // All of them are in the Basic Multilingual Plane.
            out.push_str(&format!("\\u{:04x}", u32::from(c)));
        } else {
            out.push(c);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn printable_escapes_every_control_and_bidi_character() {
        let s = printable("a\u{1b}[31mb\rc\nd\u{7f}e\u{9b}f\u{202e}g\u{0}h\ti");
        assert!(!s.chars().any(is_unprintable), "{s}");
        assert_eq!(
            s,
            "a\\u{1b}[31mb\\rc\\nd\\u{7f}e\\u{9b}f\\u{202e}g\\u{0}h\\ti"
        );
        assert_eq!(printable("plain <&> text µ"), "plain <&> text µ");
    }

    #[test]
    fn printable_json_keeps_the_value() {
        let v = serde_json::Value::String("a\u{1b}b\u{7f}c\u{85}d\u{2066}e\"".into());
        let text = printable_json(&serde_json::to_string_pretty(&[&v]).expect("encode"));
        assert!(
            !text.chars().any(|c| is_unprintable(c) && c != '\n'),
            "{text}"
        );
        let back: Vec<serde_json::Value> = serde_json::from_str(&text).expect("valid JSON");
        assert_eq!(back, vec![v]);
    }
}
