//! `headroom convert`: a field log from CSV to binary or back, streaming.

use std::path::PathBuf;

use crate::error::{CliError, CliResult};
use crate::logio::{self, LogFormat};

/// Arguments of `headroom convert`.
#[derive(clap::Args)]
pub struct Args {
    /// Log to read (`.csv` or `.hrlog`; see --from).
    pub input: PathBuf,
    /// Log to write (`.csv` or `.hrlog`; see --to).
    pub output: PathBuf,
    /// Format of the output, if its file name does not tell.
    #[arg(long, value_enum)]
    pub to: Option<LogFormat>,
    /// Format of the input, if its file name does not tell.
    #[arg(long, value_enum)]
    pub from: Option<LogFormat>,
    /// Replace the output if it exists.
    #[arg(long)]
    pub force: bool,
    /// Fail on the first damaged region of a binary input instead of
    /// skipping it.
    #[arg(long)]
    pub strict: bool,
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
    let mut input = match args.from {
        None => logio::open(&args.input)?,
        from => logio::open_as(&args.input, from)?,
    };
    input.set_strict(args.strict);
    let header = input.header().copied();
    let (to, mut output) = match args.to {
        None => (
            LogFormat::from_path(&args.output)?,
            logio::create(&args.output, args.force, header)?,
        ),
        Some(to) => (
            to,
            logio::create_as(&args.output, Some(to), args.force, header)?,
        ),
    };
    for rec in &mut input {
        output.write(&rec?)?;
    }
    let written = output.records_written();
    output.finish()?;
    let name = args.input.display();
    for d in input.damage() {
        crate::diag::warn(format!("{name}: {d}"));
    }
    if input.other_frames() > 0 {
        crate::diag::note(format!(
            "{name}: {} frame(s) other than records (decisions, newer kinds) not converted",
            input.other_frames()
        ));
    }
    let lost: u64 = input.damage().iter().map(|d| d.frames_skipped).sum();
    crate::diag::info(format!(
        "converted {written} record(s) from {} to {} ({} damaged region(s), {lost} frame(s) lost)",
        input.format(),
        to,
        input.damage().len()
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
