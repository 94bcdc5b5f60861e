//! The `headroom` command as a library: the binary (`src/main.rs`) calls
//! [`run`]; the fuzz targets drive the log reader and link parser through the
//! modules made public here.
//!
//! This crate parses, prints and feeds records; every formula lives in the
//! `headroom` engine crate.

use std::process::ExitCode;

use clap::{CommandFactory, FromArgMatches, Parser, Subcommand};

use error::CliResult;

pub mod atomic;
pub mod diag;
pub mod energy;
pub mod error;
pub mod fleet;
pub mod link;
pub mod logio;
pub mod names;
pub mod output;
pub mod plot;
pub mod quantity;
pub mod rates;

/// The safety caution shown after every command's help.
macro_rules! caution {
    () => {
        "\
CAUTION: transmit power, EIRP, duty cycle and RF exposure limits are set by
regulation and differ by region and band. headroom's numbers are engineering
estimates: check them against the rules that apply where the radio is used,
respect RF exposure limits for people nearby, and defer to local regulations
and licensed practice."
    };
}

const CAUTION: &str = caution!();

pub mod cmd;

/// Link budgets, path loss, fade margins and adaptive transmit power for
/// battery-powered radios.
#[derive(Parser)]
#[command(name = "headroom", version, about, after_help = CAUTION, after_long_help = CAUTION)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

/// A command of `headroom`, with its arguments.
#[derive(Subcommand)]
pub enum Command {
    /// Evaluate a link budget described in a TOML file.
    #[command(after_help = CAUTION)]
    Budget(cmd::budget::Args),
    /// Solve a link for the transmit power, the maximum path loss or the range.
    #[command(after_help = CAUTION)]
    Solve(cmd::solve::Args),
    /// Path loss of a propagation model at one frequency and distance.
    Pathloss(cmd::pathloss::Args),
    /// Fade margin for an availability, or availability for a margin.
    #[command(after_help = CAUTION)]
    Fade(cmd::fade::Args),
    /// Thermal noise power and noise temperature of a receiver.
    #[command(after_help = CAUTION)]
    Noise(cmd::noise::Args),
    /// Required Eb/N0 for a bit error rate.
    #[command(after_help = CAUTION)]
    Ber(cmd::ber::Args),
    /// Rain attenuation (ITU-R P.838 and P.618).
    Rain(cmd::rain::Args),
    /// Replay a field log through the controller: what would it have chosen?
    Replay(cmd::replay::Args),
    /// Generate a synthetic field log from a channel scenario.
    #[command(after_help = CAUTION)]
    Synth(cmd::synth::Args),
    /// Convert a field log between CSV and the framed binary format.
    #[command(after_help = CAUTION)]
    Convert(cmd::convert::Args),
    /// Replay a fleet of logs under a grid of controller settings: the Pareto front of power and loss.
    #[command(after_help = CAUTION)]
    Tune(cmd::tune::Args),
    /// What packets cost the battery: airtime, duty cycle, charge per packet, mean current, battery life.
    #[command(after_help = CAUTION)]
    Battery(cmd::battery::Args),
}

/// Every option that takes a value takes it even when it begins with `-`
/// (`--bandwidth -5`, `--min-tx-dbm -12dBm`): the option's own parser then
/// says what is wrong with it, instead of clap calling `-5` an unknown flag.
fn lenient(c: clap::Command) -> clap::Command {
    c.mut_args(|a| {
        if a.get_long().is_some() && a.get_action().takes_values() {
            a.allow_hyphen_values(true)
        } else {
            a
        }
    })
    .mut_subcommands(lenient)
}

/// What parsing a command line gave: a command to run, or text to show
/// (help, version) with the exit code.
enum Parsed {
    Run(Box<Command>),
    Show(clap::Error, u8),
}

fn parse_from<I, T>(argv: I) -> CliResult<Parsed>
where
    I: IntoIterator<Item = T>,
    T: Into<std::ffi::OsString> + Clone,
{
    let e = match lenient(Cli::command())
        .try_get_matches_from(argv)
        .and_then(|m| Cli::from_arg_matches(&m))
    {
        Ok(cli) => return Ok(Parsed::Run(Box::new(cli.command))),
        Err(e) => e,
    };
    use clap::error::ErrorKind;
    match e.kind() {
        ErrorKind::DisplayHelp | ErrorKind::DisplayVersion => Ok(Parsed::Show(e, 0)),
        ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand => Ok(Parsed::Show(e, 2)),
        _ => {
            // One line: what clap says before its usage hint, joined.
            let text = e.render().to_string();
            let msg: Vec<&str> = text
                .lines()
                .take_while(|l| !l.starts_with("Usage:"))
                .map(str::trim)
                .filter(|l| !l.is_empty() && !l.starts_with("For more information"))
                .collect();
            let msg = msg.join(" ");
            Err(error::CliError::Input(format!(
                "{} (see 'headroom --help')",
                msg.trim_start_matches("error: ")
            )))
        }
    }
}

/// Parse a command line as the `headroom` binary does (`argv[0]` is the
/// program's name): the command, or the binary's one-line usage error
/// (`CliError::Input`, exit code 2). Help and version text are an error
/// here too; the bindings name their commands' arguments themselves.
pub fn parse_command_line<I, T>(argv: I) -> CliResult<Command>
where
    I: IntoIterator<Item = T>,
    T: Into<std::ffi::OsString> + Clone,
{
    match parse_from(argv)? {
        Parsed::Run(c) => Ok(*c),
        Parsed::Show(e, _) => Err(error::CliError::Input(
            e.render()
                .to_string()
                .lines()
                .next()
                .unwrap_or_default()
                .to_string(),
        )),
    }
}

/// Run a parsed command: what the binary does after parsing, without its
/// process set-up (signal handlers, input tracking: see [`run`]).
pub fn run_command(command: Command) -> CliResult {
    match command {
        Command::Budget(a) => cmd::budget::run(a),
        Command::Solve(a) => cmd::solve::run(a),
        Command::Pathloss(a) => cmd::pathloss::run(a),
        Command::Fade(a) => cmd::fade::run(a),
        Command::Noise(a) => cmd::noise::run(a),
        Command::Ber(a) => cmd::ber::run(a),
        Command::Rain(a) => cmd::rain::run(a),
        Command::Replay(a) => cmd::replay::run(a),
        Command::Synth(a) => cmd::synth::run(a),
        Command::Convert(a) => cmd::convert::run(a),
        Command::Tune(a) => cmd::tune::run(a),
        Command::Battery(a) => cmd::battery::run(a),
    }
}

/// Parse the command line, run the command, and give the process's exit
/// code (0 success, 2 a usage error, otherwise the error's own code).
pub fn run() -> ExitCode {
    atomic::install_cleanup();
    atomic::track_inputs();
    let command = match parse_from(std::env::args_os()) {
        Ok(Parsed::Run(c)) => *c,
        Ok(Parsed::Show(e, code)) => {
            let _ = e.print();
            return ExitCode::from(code);
        }
        Err(e) => {
            diag::info(e.to_string());
            return ExitCode::from(2);
        }
    };
    match run_command(command) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            diag::error(&e);
            ExitCode::from(e.exit_code())
        }
    }
}
