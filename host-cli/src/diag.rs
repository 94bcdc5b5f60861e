//! The one writer of diagnostics: every error, warning and note goes to
//! stderr through here, as one line that begins with `headroom:`.
//!
//! - Each line is escaped ([`crate::error::printable`]) and capped at
//!   [`MAX_CHARS`] characters, so that a hostile file cannot forge lines,
//!   drive the terminal or make a message of megabytes.
//! - Each line is one `write` call of the whole line (no interleaving of
//!   pieces with another writer, no write per fragment).
//! - A stderr that cannot be written (closed: `2>&1 | head -0`; full) is
//!   given up quietly: later lines are dropped, the command carries on and
//!   its exit code is unchanged. Nothing here panics.

use std::fmt::Display;
use std::io::Write;
use std::sync::atomic::{AtomicBool, Ordering};

use crate::error::printable;

/// Longest line printed, in characters, after escaping (without the
/// `headroom: ` prefix); longer messages keep their beginning and end
/// around an ellipsis.
pub const MAX_CHARS: usize = 300;
/// Characters kept from the end of a message cut to [`MAX_CHARS`] (where
/// parse errors say what is wrong).
const TAIL_CHARS: usize = 100;

/// Set once a write to stderr has failed.
static GONE: AtomicBool = AtomicBool::new(false);

/// An error of the command (the line the process ends with).
pub fn error(msg: impl Display) {
    line("error: ", &msg.to_string());
}

/// A warning: something was skipped or assumed; the command goes on.
pub fn warn(msg: impl Display) {
    line("warning: ", &msg.to_string());
}

/// A note: a fact worth knowing about the result.
pub fn note(msg: impl Display) {
    line("note: ", &msg.to_string());
}

/// A line without a kind (`headroom: converted 12 record(s) ...`, the usage
/// errors of the argument parser).
pub fn info(msg: impl Display) {
    line("", &msg.to_string());
}

/// `msg` as printed: control characters escaped, at most [`MAX_CHARS`]
/// characters (the first ones, `…`, the last [`TAIL_CHARS`]).
pub fn shown(msg: &str) -> String {
    capped(&printable(msg), MAX_CHARS)
}

/// `s` cut to at most `max` characters: its beginning, `…`, its end.
pub fn capped(s: &str, max: usize) -> String {
    let n = s.chars().count();
    if n <= max {
        return s.to_string();
    }
    let tail = TAIL_CHARS.min(max / 2);
    let head = max.saturating_sub(tail + 1);
    let mut out: String = s.chars().take(head).collect();
    out.push('…');
    out.extend(s.chars().skip(n - tail));
    out
}

thread_local! {
    /// This thread's lines, while [`capture`] runs a command.
    static CAPTURED: std::cell::RefCell<Option<Vec<String>>> = const { std::cell::RefCell::new(None) };
}

/// Run `f` with the lines it would print on this thread kept instead,
/// each as printed without the `headroom: ` prefix (`warning: ...`): the
/// Python binding turns them into Python warnings.
pub fn capture<R>(f: impl FnOnce() -> R) -> (R, Vec<String>) {
    let outer = CAPTURED.with(|c| c.borrow_mut().replace(Vec::new()));
    let r = f();
    let lines = CAPTURED.with(|c| std::mem::replace(&mut *c.borrow_mut(), outer));
    (r, lines.unwrap_or_default())
}

fn line(kind: &str, msg: &str) {
    let kept = CAPTURED.with(|c| match c.borrow_mut().as_mut() {
        Some(v) => {
            v.push(format!("{kind}{}", shown(msg)));
            true
        }
        None => false,
    });
    if kept || GONE.load(Ordering::Relaxed) {
        return;
    }
    let text = format!("headroom: {kind}{}\n", shown(msg));
    let mut err = std::io::stderr().lock();
    if err
        .write_all(text.as_bytes())
        .and_then(|()| err.flush())
        .is_err()
    {
        GONE.store(true, Ordering::Relaxed);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn capture_keeps_the_lines_as_printed() {
        let ((), lines) = capture(|| {
            warn("a.csv: skipped: not a regular file");
            note(format!("x{}", "\u{1b}"));
        });
        assert_eq!(
            lines,
            vec![
                "warning: a.csv: skipped: not a regular file".to_string(),
                format!("note: {}", shown("x\u{1b}")),
            ]
        );
        assert!(!lines[1].contains('\u{1b}'));
    }

    #[test]
    fn long_messages_keep_their_ends() {
        let msg = format!("file.toml: {} invalid escape", "x".repeat(10_000_000));
        let s = shown(&msg);
        assert_eq!(s.chars().count(), MAX_CHARS);
        assert!(s.starts_with("file.toml: xx"), "{s}");
        assert!(s.ends_with("xx invalid escape"), "{s}");
        assert!(s.contains('…'));
        assert_eq!(shown("short"), "short");
    }

    #[test]
    fn escaping_comes_before_the_cap() {
        // 400 ESC characters escape to 2 400 characters, then are cut.
        let s = shown(&"\u{1b}".repeat(400));
        assert_eq!(s.chars().count(), MAX_CHARS);
        assert!(!s.chars().any(char::is_control));
    }
}
