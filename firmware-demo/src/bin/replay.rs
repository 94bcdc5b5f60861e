//! Replay on target: reads a framed binary field log from the host
//! (semihosting), runs it through the engine's replay semantics
//! ([`headroom::control::Replay`], the same code as `headroom replay`) with
//! the settings the engine resolves from the log's header
//! ([`headroom::control::settings::for_log`], the same rule as the host),
//! and writes one decision frame per record to a host file. `cargo xtask firmware` compares those frames with the
//! host's `headroom replay` output, record by record.
//!
//! A log whose header has several rates is replayed with the rate choice
//! costed by the engine's invented demo node
//! ([`headroom::energy::demo::demo_profile`]).
//!
//! Usage (under QEMU): `-append "LOG.hrlog DECISIONS.hrlog"`; prints a
//! one-line summary and exits 0, or prints why it failed and exits 1.
#![no_std]
#![no_main]

use cortex_m_rt::entry;
use cortex_m_semihosting::hprintln;

use headroom::control::{settings, ControllerConfig, Replay, REPLAY_WINDOW};
use headroom::energy::demo;
use headroom::record::codec::{CodecError, Encoder, Event, Frame, FrameDecoder, MAX_FRAME};
use headroom::record::{DecisionRecord, LogHeader};
use headroom_firmware_demo::host::{self, File, HostError, Mode};
use headroom_firmware_demo::stack;

/// Bytes read from the host per call.
const READ_CHUNK: usize = 256;

/// Output bytes gathered before one host write.
const WRITE_BUFFER: usize = 512;

#[entry]
fn main() -> ! {
    stack::paint();
    let ok = match run() {
        Ok(()) => true,
        Err(e) => {
            hprintln!("replay: {}", e);
            false
        }
    };
    host::exit(ok)
}

/// Why the replay stopped.
enum Failure {
    Usage,
    Host(HostError),
    Config(settings::ResolveError),
    Encode(CodecError),
    Profile,
    /// A static state was asked for twice (cannot happen: `run` runs once).
    Static,
}

impl core::fmt::Display for Failure {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Failure::Usage => f.write_str("usage: replay LOG.hrlog DECISIONS.hrlog"),
            Failure::Host(e) => f.write_str(e.as_str()),
            // The setting only: its numbers would pull float formatting
            // (about 20 KB of flash) into the image; the host says them.
            Failure::Config(e) => write!(f, "controller settings refused: {}", e.setting()),
            Failure::Encode(e) => write!(f, "a decision frame did not encode: {e}"),
            Failure::Profile => f.write_str("the demo node's energy profile was refused"),
            Failure::Static => f.write_str("a static state was taken twice"),
        }
    }
}

impl From<HostError> for Failure {
    fn from(e: HostError) -> Self {
        Failure::Host(e)
    }
}

impl From<CodecError> for Failure {
    fn from(e: CodecError) -> Self {
        Failure::Encode(e)
    }
}

/// Frames gathered into one buffer and written to the host in large pieces.
struct Output {
    file: File,
    buf: [u8; WRITE_BUFFER],
    len: usize,
    bytes: u64,
}

impl Output {
    fn push(&mut self, frame: &[u8]) -> Result<(), HostError> {
        if self.len + frame.len() > self.buf.len() {
            self.flush()?;
        }
        match self.buf.get_mut(self.len..self.len + frame.len()) {
            Some(dst) => {
                dst.copy_from_slice(frame);
                self.len += frame.len();
                Ok(())
            }
            // Larger than the whole buffer: write it directly.
            None => self.file.write_all(frame),
        }?;
        self.bytes += frame.len() as u64;
        Ok(())
    }

    fn flush(&mut self) -> Result<(), HostError> {
        let data = self.buf.get(..self.len).unwrap_or(&[]);
        self.file.write_all(data)?;
        self.len = 0;
        Ok(())
    }
}

/// Set the replay up from the log's header (or none): the settings the
/// engine resolves from it. Not inlined, and in two steps that are not
/// inlined either: the settings layers and the replay being built then
/// share no frame with the loop nor with each other, which keeps the peak
/// stack within the microbit's 16 KiB.
#[inline(never)]
fn start(h: Option<&LogHeader>, slot: &mut Option<Replay<REPLAY_WINDOW>>) -> Result<(), Failure> {
    let config = resolve(h)?;
    build(&config, slot)
}

#[inline(never)]
fn resolve(h: Option<&LogHeader>) -> Result<ControllerConfig, Failure> {
    Ok(settings::for_log(h).map_err(Failure::Config)?.config)
}

#[inline(never)]
fn build(
    config: &ControllerConfig,
    slot: &mut Option<Replay<REPLAY_WINDOW>>,
) -> Result<(), Failure> {
    let refused = |e| Failure::Config(settings::ResolveError::Invalid(e));
    // A log with several rates: the rate is chosen by the charge of the
    // engine's invented demo node, as `cargo xtask firmware` replays it.
    let replay = if config.rates.len() > 1 {
        let profile = demo::demo_profile().map_err(|_| Failure::Profile)?;
        Replay::with_energy(*config, &profile)
    } else {
        Replay::new(*config)
    };
    *slot = Some(replay.map_err(refused)?);
    Ok(())
}

fn run() -> Result<(), Failure> {
    // The program name comes first: QEMU passes the full path of the ELF.
    let mut line = [0u8; 512];
    let cmdline = host::command_line(&mut line)?;
    let (Some(input), Some(output)) = (host::arg(cmdline, 0), host::arg(cmdline, 1)) else {
        return Err(Failure::Usage);
    };

    let mut log = File::open(input, Mode::ReadBinary)?;
    let log_len = log.len()?;
    let mut out = Output {
        file: File::open(output, Mode::WriteBinary)?,
        buf: [0; WRITE_BUFFER],
        len: 0,
        bytes: 0,
    };

    // Set up by the log's header frame, or without a header when a record
    // comes first (the header was lost): as the host does. The replay and
    // the decoder (about 3 KB together with rates and format 2 blocks) live
    // in static memory, not in this frame: the peak stack of the loop then
    // stays within the microbit's 16 KiB.
    let replay: &'static mut Option<Replay<REPLAY_WINDOW>> =
        cortex_m::singleton!(: Option<Replay<REPLAY_WINDOW>> = None).ok_or(Failure::Static)?;
    let mut enc = Encoder::new();
    let mut frame = [0u8; MAX_FRAME];
    out.push(enc.header(&LogHeader::default(), &mut frame)?)?;

    let dec: &'static mut FrameDecoder =
        cortex_m::singleton!(: FrameDecoder = FrameDecoder::new()).ok_or(Failure::Static)?;
    let mut chunk = [0u8; READ_CHUNK];
    let mut damaged = 0u64;
    let mut other = 0u64;
    let mut handle = |ev: Event, out: &mut Output, enc: &mut Encoder| -> Result<(), Failure> {
        match ev {
            Event::Frame {
                frame: Frame::Record(rec),
                ..
            } => {
                if replay.is_none() {
                    start(None, replay)?;
                }
                let Some(replay) = replay.as_mut() else {
                    return Ok(());
                };
                let s = replay.step(&rec);
                let d = DecisionRecord {
                    t_ms: s.t_ms,
                    tx_dbm: s.chosen.0,
                    outcome: s.outcome.code(),
                    reason: s.reason.code(),
                    rate: s.rate,
                };
                out.push(enc.decision(&d, &mut frame)?)?;
            }
            Event::Frame {
                frame: Frame::Header { header, .. },
                ..
            } => {
                // The first header sets the replay up; a later one is only
                // counted (the host reports it).
                if replay.is_none() {
                    start(Some(&header), replay)?;
                } else {
                    other += 1;
                }
            }
            Event::Frame { .. } => other += 1,
            Event::Damaged { .. } => damaged += 1,
        }
        Ok(())
    };
    loop {
        let n = log.read(&mut chunk)?;
        if n == 0 {
            break;
        }
        let mut input: &[u8] = chunk.get(..n).unwrap_or(&[]);
        while let Some(ev) = dec.feed(&mut input) {
            handle(ev, &mut out, &mut enc)?;
        }
    }
    if let Some(ev) = dec.finish() {
        handle(ev, &mut out, &mut enc)?;
    }
    out.flush()?;

    let Some(replay) = replay.as_ref() else {
        hprintln!("replay: {} bytes in, no record", log_len);
        return Ok(());
    };
    let s = replay.summary();
    hprintln!(
        "replay: {} bytes in, {} records, {} lost of {} judged, {} unjudged, {} damaged, {} other frames, {} bytes out, stack {} of {} bytes",
        log_len,
        s.records,
        s.lost,
        s.judged,
        s.unjudged,
        damaged,
        other,
        out.bytes,
        stack::peak(),
        stack::available()
    );
    Ok(())
}
