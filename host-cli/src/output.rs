//! Printing results: an aligned table for people, one JSON object for scripts.

use clap::ValueEnum;
use serde_json::{Map, Value};

use std::fmt::Write as _;
use std::io::Write as _;

use crate::error::{printable, printable_json, CliError, CliResult};

/// Output format of the calculator commands.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// Aligned `key  value  unit` lines.
    #[default]
    Table,
    /// One JSON object on stdout.
    Json,
}

/// A result being assembled: ordered keys, values, and units for the table.
#[derive(Default)]
pub struct Report {
    rows: Vec<(String, Value, &'static str)>,
}

impl Report {
    /// A new, empty report.
    pub fn new() -> Self {
        Self::default()
    }

    /// Add a number with its unit (the unit is shown in the table only).
    pub fn num(&mut self, key: &str, value: f32, unit: &'static str) -> &mut Self {
        self.rows.push((key.to_string(), json_num(value), unit));
        self
    }

    /// Add any JSON value (a string, an array of line items, ...).
    pub fn value(&mut self, key: &str, value: Value) -> &mut Self {
        self.rows.push((key.to_string(), value, ""));
        self
    }

    /// Print in the chosen format.
    pub fn print(&self, format: Format) -> CliResult {
        write_stdout(&self.render(format)?)
    }

    /// The text [`Report::print`] prints: no raw control character in
    /// either format (names and strings from files are escaped).
    pub fn render(&self, format: Format) -> CliResult<String> {
        let mut out = String::new();
        match format {
            Format::Json => {
                let mut m = Map::new();
                for (k, v, _) in &self.rows {
                    m.insert(k.clone(), v.clone());
                }
                out.push_str(&json_text(&Value::Object(m))?);
                out.push('\n');
            }
            Format::Table => {
                let keys: Vec<String> = self.rows.iter().map(|r| printable(&r.0)).collect();
                let width = keys.iter().map(|k| k.chars().count()).max().unwrap_or(0);
                for (k, (_, v, unit)) in keys.iter().zip(&self.rows) {
                    match v {
                        Value::Number(_) | Value::String(_) | Value::Bool(_) | Value::Null => {
                            let _ = writeln!(out, "{k:<width$}  {}  {unit}", scalar(v));
                        }
                        _ => {
                            let _ = writeln!(out, "{k}:");
                            print_nested(&mut out, v, 1);
                        }
                    }
                }
            }
        }
        Ok(out)
    }
}

/// `v` as pretty-printed JSON text without a raw control character
/// ([`printable_json`]): what every JSON output of headroom prints.
pub fn json_text(v: &Value) -> CliResult<String> {
    serde_json::to_string_pretty(v)
        .map(|s| printable_json(&s))
        .map_err(|e| CliError::Io(format!("cannot encode JSON: {e}")))
}

/// `v` as one line of JSON (JSON Lines) without a raw control character.
pub fn json_line(v: &Value) -> CliResult<String> {
    serde_json::to_string(v)
        .map(|s| printable_json(&s))
        .map_err(|e| CliError::Io(format!("cannot encode JSON: {e}")))
}

/// A JSON number with the seven significant digits an f32 carries (no
/// 13.979400634765625 noise); NaN and infinities become `null`.
pub fn json_num(x: f32) -> Value {
    if !x.is_finite() {
        return Value::Null;
    }
    let v: f64 = format!("{:.6e}", f64::from(x))
        .parse()
        .unwrap_or(f64::from(x));
    serde_json::Number::from_f64(v)
        .map(Value::Number)
        .unwrap_or(Value::Null)
}

fn scalar(v: &Value) -> String {
    match v {
        Value::Number(n) => {
            let x = n.as_f64().unwrap_or(f64::NAN);
            let a = x.abs();
            if x == x.trunc() && a < 1e15 {
                format!("{x:.0}")
            } else if !(1e-3..1e15).contains(&a) {
                format!("{x:.4e}")
            } else if a >= 1.0 {
                format!("{x:.3}")
            } else {
                // Four significant digits below 1.
                let decimals = (3.0 - a.log10().floor()) as usize;
                format!("{x:.decimals$}")
            }
        }
        Value::String(s) => printable(s),
        other => printable(&other.to_string()),
    }
}

fn print_nested(out: &mut String, v: &Value, depth: usize) {
    let pad = "  ".repeat(depth);
    match v {
        Value::Array(items) => {
            for item in items {
                match item {
                    Value::Object(m) => {
                        let line: Vec<String> = m
                            .iter()
                            .map(|(k, v)| format!("{}={}", printable(k), scalar(v)))
                            .collect();
                        let _ = writeln!(out, "{pad}{}", line.join("  "));
                    }
                    other => {
                        let _ = writeln!(out, "{pad}{}", scalar(other));
                    }
                }
            }
        }
        Value::Object(m) => {
            for (k, v) in m {
                let _ = writeln!(out, "{pad}{}  {}", printable(k), scalar(v));
            }
        }
        other => {
            let _ = writeln!(out, "{pad}{}", scalar(other));
        }
    }
}

thread_local! {
    /// What this thread's command printed, while [`capture`] runs it.
    static CAPTURED: std::cell::RefCell<Option<Vec<u8>>> = const { std::cell::RefCell::new(None) };
}

/// Run `f` with what it prints on stdout (through [`write_stdout`] or
/// [`Stdout`]) kept, on this thread, instead of printed: the Python
/// binding returns a command's JSON this way, the very text the command
/// prints.
pub fn capture<R>(f: impl FnOnce() -> R) -> (R, String) {
    let outer = CAPTURED.with(|c| c.borrow_mut().replace(Vec::new()));
    let r = f();
    let bytes = CAPTURED.with(|c| std::mem::replace(&mut *c.borrow_mut(), outer));
    let text = String::from_utf8_lossy(&bytes.unwrap_or_default()).into_owned();
    (r, text)
}

/// Keep `bytes` if [`capture`] is running on this thread (then `true`).
fn captured(bytes: &[u8]) -> bool {
    CAPTURED.with(|c| match c.borrow_mut().as_mut() {
        Some(s) => {
            s.extend_from_slice(bytes);
            true
        }
        None => false,
    })
}

/// Stdout as a writer, for commands that stream their output (`tune
/// --format jsonl`); it goes where [`write_stdout`] writes.
pub struct Stdout;

impl std::io::Write for Stdout {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        if captured(buf) {
            return Ok(buf.len());
        }
        std::io::stdout().lock().write(buf)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        std::io::stdout().lock().flush()
    }
}

/// Write `text` to stdout; a closed pipe (`| head`) or a full disk is an
/// error with exit code 1, never a panic.
pub fn write_stdout(text: &str) -> CliResult {
    if captured(text.as_bytes()) {
        return Ok(());
    }
    let mut stdout = std::io::stdout().lock();
    stdout
        .write_all(text.as_bytes())
        .and_then(|()| stdout.flush())
        .map_err(|e| CliError::Io(format!("stdout: cannot write: {e}")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn capture_keeps_what_a_command_prints_on_its_thread_only() {
        use std::io::Write as _;
        let (r, text) = capture(|| {
            write_stdout("{\"a\": 1}\n")?;
            let mut w = std::io::BufWriter::new(Stdout);
            // A multi-byte character split across two writes stays whole.
            w.write_all("µ".as_bytes().get(..1).unwrap_or_default())
                .and_then(|()| w.flush())
                .and_then(|()| w.write_all("µ".as_bytes().get(1..).unwrap_or_default()))
                .and_then(|()| w.flush())
                .map_err(|e| CliError::Io(e.to_string()))?;
            let (_, inner) = capture(|| write_stdout("nested"));
            assert_eq!(inner, "nested");
            CliResult::Ok(())
        });
        assert!(r.is_ok());
        assert_eq!(text, "{\"a\": 1}\nµ");
        let other = std::thread::spawn(|| capture(|| ()).1)
            .join()
            .unwrap_or_default();
        assert_eq!(other, "");
    }

    #[test]
    fn table_cells_carry_no_control_character() {
        let forged = "antenna\r\n\u{1b}[2Kcable loss  0  dB\u{9b}";
        let mut r = Report::new();
        r.value(
            "line items",
            serde_json::json!([{ "name": forged, "gain": 2.0 }]),
        )
        .value(forged, Value::String(forged.into()))
        .value("nested", serde_json::json!({ forged: forged }));
        let text = r.render(Format::Table).expect("render");
        let bad: Vec<char> = text
            .chars()
            .filter(|&c| c != '\n' && crate::error::is_unprintable(c))
            .collect();
        assert!(bad.is_empty(), "{bad:?} in {text}");
        // One line per row: the CR LF of the name did not start a new one.
        assert!(text.lines().all(|l| !l.starts_with("cable loss")), "{text}");
    }

    #[test]
    fn json_text_escapes_what_the_encoder_leaves_raw() {
        let v = serde_json::json!({ "name": "a\u{7f}\u{9b}b" });
        let text = json_text(&v).expect("encode");
        assert_eq!(
            json_line(&v).expect("encode"),
            "{\"name\":\"a\\u007f\\u009bb\"}"
        );
        let mut r = Report::new();
        r.value("name", Value::String("a\u{7f}\u{9b}b".into()));
        assert_eq!(r.render(Format::Json).expect("render"), format!("{text}\n"));
        assert!(text.contains("\\u007f\\u009b"), "{text}");
        let back: Value = serde_json::from_str(&text).expect("valid JSON");
        assert_eq!(back, v);
    }
}
