//! Running programs with a time limit and a clear message when they fail.

use std::io::Read;
use std::process::{Child, Command, Stdio};
use std::thread;
use std::time::{Duration, Instant};

/// What a finished program printed, and whether it succeeded.
pub struct Output {
    /// Exit status was 0.
    pub success: bool,
    /// Standard output.
    pub stdout: Vec<u8>,
    /// Standard error.
    pub stderr: String,
}

/// A program's command line as text, for messages.
pub fn show(cmd: &Command) -> String {
    let mut s = cmd.get_program().to_string_lossy().into_owned();
    for a in cmd.get_args() {
        s.push(' ');
        s.push_str(&a.to_string_lossy());
    }
    s
}

/// Run `cmd` to the end, its output inherited; an error unless it exits 0.
pub fn run_inherit(cmd: &mut Command) -> Result<(), String> {
    let shown = show(cmd);
    let status = cmd
        .status()
        .map_err(|e| format!("cannot start `{shown}`: {e}"))?;
    if status.success() {
        Ok(())
    } else {
        Err(format!("`{shown}` failed ({status})"))
    }
}

/// Run `cmd`, capturing its output, killing it after `timeout`. Its
/// standard input is whatever `cmd` was given (the parent's by default).
pub fn run_capture(cmd: &mut Command, timeout: Duration) -> Result<Output, String> {
    let shown = show(cmd);
    let child = cmd
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .map_err(|e| format!("cannot start `{shown}`: {e}"))?;
    wait_capture(child, timeout, &shown)
}

/// Wait for `child` (stdout and stderr piped) at most `timeout`.
pub fn wait_capture(mut child: Child, timeout: Duration, shown: &str) -> Result<Output, String> {
    let mut out = child.stdout.take();
    let mut err = child.stderr.take();
    // Read both pipes on their own threads so a full pipe never blocks the child.
    let t_out = thread::spawn(move || {
        let mut v = Vec::new();
        if let Some(o) = out.as_mut() {
            let _ = o.read_to_end(&mut v);
        }
        v
    });
    let t_err = thread::spawn(move || {
        let mut v = Vec::new();
        if let Some(e) = err.as_mut() {
            let _ = e.read_to_end(&mut v);
        }
        String::from_utf8_lossy(&v).into_owned()
    });
    let start = Instant::now();
    let status = loop {
        match child.try_wait() {
            Ok(Some(s)) => break s,
            Ok(None) if start.elapsed() > timeout => {
                let _ = child.kill();
                let _ = child.wait();
                return Err(format!(
                    "`{shown}` did not finish within {} s (QEMU_TIMEOUT)",
                    timeout.as_secs()
                ));
            }
            Ok(None) => thread::sleep(Duration::from_millis(20)),
            Err(e) => return Err(format!("waiting for `{shown}`: {e}")),
        }
    };
    let stdout = t_out.join().unwrap_or_default();
    let stderr = t_err.join().unwrap_or_default();
    Ok(Output {
        success: status.success(),
        stdout,
        stderr,
    })
}
