use super::progress::Progress;
use super::{blocked_code, colour_stdout, load, run_info};
use limen::Error;
use limen::render::csv::Rows;
use limen::render::table::Table;
use limen::report::TICK_ROWS;
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
    let run = run_info()?;
    let mut out = std::io::stdout().lock();
    let progress = Progress::counting();
    progress.message("rows checked");
    let mut e = limen::report::evaluate_watched(&ws, &batch, 0, &run, &mut |n| progress.at(n))?;
    // Each later pass over the results, as a bar of the client results.
    let pass =
        |e: &mut limen::report::Evaluation,
         what: &str,
         each: &mut dyn FnMut(&limen::report::ReportRow) -> Result<(), Error>| {
            progress.phase(e.count() as u64, what);
            let mut n = 0u64;
            e.each_row(|_, r| {
                n += 1;
                if n % TICK_ROWS == 0 {
                    progress.at(n);
                }
                each(r)
            })
        };
    let code = match a.format {
        Format::Table => {
            // Two passes: the column widths, then the lines.
            let mut table = Table::new(colour_stdout());
            pass(&mut e, "results sized", &mut |r| {
                table.widen(r);
                Ok(())
            })?;
            let mut w = std::io::BufWriter::with_capacity(1 << 16, &mut out);
            w.write_all(table.head(e.header()).as_bytes())
                .map_err(Error::stdout)?;
            pass(&mut e, "results written", &mut |r| {
                w.write_all(table.row(r).as_bytes()).map_err(Error::stdout)
            })?;
            progress.finish();
            let report = e.finish();
            w.write_all(table.tail(&report).as_bytes())
                .and_then(|()| w.flush())
                .map_err(Error::stdout)?;
            Ok(blocked_code(report.is_blocked()))
        }
        Format::Csv => {
            // Every input error is found before the first line is written;
            // then each row goes out as it is classified.
            let header = e.header().clone();
            let mut rows = Rows::new(
                &header,
                None,
                std::io::BufWriter::with_capacity(1 << 16, &mut out),
            )
            .map_err(Error::stdout)?;
            pass(&mut e, "results written", &mut |r| {
                rows.row(r).map_err(Error::stdout)
            })?;
            rows.finish().map_err(Error::stdout)?;
            progress.finish();
            let report = e.finish();
            for p in &report.problems {
                eprintln!("blocked: {p}");
                eprintln!("hint: {}", p.hint);
            }
            Ok(blocked_code(report.is_blocked()))
        }
    };
    progress.finish();
    code
}
