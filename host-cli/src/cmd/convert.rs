//! `headroom convert`: a field log from CSV to binary or back, streaming.

use std::path::PathBuf;

use crate::error::{CliError, CliResult};
use crate::logio::{self, LogFormat};

/// Arguments of `headroom convert`.
#[derive(clap::Args)]
pub struct Args {
    /// Log to read (`.csv` or `.hrlog`, `-` for standard input; see
    /// --from).
    pub input: PathBuf,
    /// Log to write (`.csv` or `.hrlog`; see --to).
    pub output: PathBuf,
    /// Format of the output, if its file name does not tell.
    #[arg(long, value_enum)]
    pub to: Option<LogFormat>,
    /// Replace the output if it exists.
    #[arg(long)]
    pub force: bool,
    /// How to write the output.
    #[command(flatten)]
    pub write: logio::OutputArgs,
    /// How to read the input.
    #[command(flatten)]
    pub read: logio::InputArgs,
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    if same_file(&args.input, &args.output) {
        return Err(CliError::arg(
            "OUTPUT",
            format!(
                "{} is the input file; write to another file",
                args.output.display()
            ),
        ));
    }
    // A conversion moves the readings a log has and judges none: a CSV
    // without a reading column converts (a warning names it).
    let opts = logio::ReadOptions {
        require_readings: false,
        ..args.read.options()
    };
    let mut input = logio::open_with(&args.input, &opts)?;
    let header = input.header().copied();
    let to = match args.to {
        None => LogFormat::from_path(&args.output)?,
        Some(to) => to,
    };
    let mut output = logio::create_versioned(
        &args.output,
        Some(to),
        args.write.binary_version,
        args.force,
        header,
    )?;
    for rec in &mut input {
        output.write(&rec?)?;
    }
    let written = output.records_written();
    output.finish()?;
    let name = args.input.display();
    for w in input.warnings() {
        crate::diag::warn(w);
    }
    if input.other_frames() > 0 {
        crate::diag::note(format!(
            "{name}: {} frame(s) other than records (decisions, newer kinds) not converted",
            input.other_frames()
        ));
    }
    let damage = input.damage_summary();
    let to = match to {
        LogFormat::Binary => format!("binary format {}", args.write.binary_version.number()),
        LogFormat::Csv => to.to_string(),
    };
    crate::diag::info(format!(
        "converted {written} record(s) from {} to {} ({} damaged region(s), {} frame(s) lost)",
        input.format(),
        to,
        damage.regions,
        damage.frames_lost
    ));
    Ok(())
}

/// Whether two paths name the same existing file.
fn same_file(a: &std::path::Path, b: &std::path::Path) -> bool {
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}
