//! The `headroom` command as a library: the binary (`src/main.rs`) calls
//! [`run`]; the fuzz targets drive the log reader and link parser through the
//! modules made public here.
//!
//! This crate parses, prints and feeds records; every formula lives in the
//! `headroom` engine crate.

use std::process::ExitCode;

use clap::{CommandFactory, FromArgMatches, Parser, Subcommand};

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

#[derive(Subcommand)]
enum Command {
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

fn parse() -> Result<Cli, clap::Error> {
    let matches = lenient(Cli::command()).try_get_matches()?;
    Cli::from_arg_matches(&matches)
}

/// Parse the command line, run the command, and give the process's exit
/// code (0 success, 2 a usage error, otherwise the error's own code).
pub fn run() -> ExitCode {
    atomic::install_cleanup();
    atomic::track_inputs();
    let cli = match parse() {
        Ok(cli) => cli,
        Err(e) => {
            use clap::error::ErrorKind;
            if matches!(e.kind(), ErrorKind::DisplayHelp | ErrorKind::DisplayVersion)
                || matches!(
                    e.kind(),
                    ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand
                )
            {
                let _ = e.print();
                return if e.kind() == ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand {
                    ExitCode::from(2)
                } else {
                    ExitCode::SUCCESS
                };
            }
            // One line: what clap says before its usage hint, joined.
            let text = e.render().to_string();
            let msg: Vec<&str> = text
                .lines()
                .take_while(|l| !l.starts_with("Usage:"))
                .map(str::trim)
                .filter(|l| !l.is_empty() && !l.starts_with("For more information"))
                .collect();
            let msg = msg.join(" ");
            diag::info(format!(
                "{} (see 'headroom --help')",
                msg.trim_start_matches("error: ")
            ));
            return ExitCode::from(2);
        }
    };
    let result = match cli.command {
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
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            diag::error(&e);
            ExitCode::from(e.exit_code())
        }
    }
}
