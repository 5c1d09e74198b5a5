use super::{blocked_code, colour_stdout, load, run_info};
use limen::Error;
use limen::render::csv::Csv;
use std::io::Write;
use std::path::PathBuf;

#[derive(clap::ValueEnum, Clone, Copy)]
pub enum Format {
    Table,
    Csv,
}

#[derive(clap::Args)]
pub struct Args {
    /// The batch folder (holding batch.toml).
    batch: PathBuf,
    /// The workspace folder; default: searched upward from the batch for lab.toml.
    #[arg(long, value_name = "DIR")]
    workspace: Option<PathBuf>,
    #[arg(long, value_enum, default_value = "table")]
    format: Format,
}

pub fn run(a: Args) -> Result<i32, Error> {
    let (ws, batch) = load(&a.batch, a.workspace.as_deref())?;
    let report = limen::report::build(&ws, &batch, 0, &run_info()?)?;
    let mut out = std::io::stdout().lock();
    match a.format {
        Format::Table => {
            out.write_all(limen::render::table::render(&report, colour_stdout()).as_bytes())
                .and_then(|()| out.flush())
                .map_err(Error::stdout)?;
        }
        Format::Csv => {
            Csv.write(
                &report,
                std::io::BufWriter::with_capacity(1 << 16, &mut out),
            )
            .map_err(Error::stdout)?;
            for p in &report.problems {
                eprintln!("blocked: {p}");
                eprintln!("hint: {}", p.hint);
            }
        }
    }
    Ok(blocked_code(report.is_blocked()))
}
