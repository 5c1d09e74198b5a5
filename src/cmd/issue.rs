use super::{load, run_info};
use limen::Error;
use limen::error::{EXIT_BLOCKED, EXIT_OK};
use limen::render::Render;
use limen::render::csv::Csv;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct Args {
    /// One or more batch folders; nothing is issued unless all can be.
    #[arg(required = true)]
    batches: Vec<PathBuf>,
    /// Folder the report files are written to.
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    /// The workspace folder; default: searched upward from each batch for lab.toml.
    #[arg(long, value_name = "DIR")]
    workspace: Option<PathBuf>,
    /// Issue despite QC that holds the batch; the reason goes on the report
    /// and every held result is qualified qc-exception.
    #[arg(long, value_name = "REASON")]
    accept_qc: Option<String>,
}

pub fn run(a: Args) -> Result<i32, Error> {
    let run = run_info()?;
    let mut reports = Vec::new();
    for dir in &a.batches {
        let (ws, batch) = load(dir, a.workspace.as_deref())?;
        let mut report = limen::report::build(&ws, &batch, 0, &run)?;
        if let Some(reason) = &a.accept_qc {
            if reason.trim().is_empty() {
                return Err(Error::Usage {
                    message: "--accept-qc needs a reason".into(),
                    hint: "say why the QC exception is acceptable, e.g. --accept-qc \"LCS high bias; all results ND\"".into(),
                });
            }
            report.accept_qc(reason);
        }
        reports.push(report);
    }
    let blocked: Vec<_> = reports.iter().filter(|r| r.is_blocked()).collect();
    if !blocked.is_empty() {
        for r in &blocked {
            eprintln!("error: {} is blocked; nothing was issued", r.header.report);
            for p in &r.problems {
                eprintln!("  - {p}\n    hint: {}", p.hint);
            }
        }
        eprintln!("hint: run `limen check` on the batch, resolve each problem, then issue again");
        return Ok(EXIT_BLOCKED);
    }
    let names: Vec<String> = reports
        .iter()
        .map(|r| format!("{}.{}", r.header.report, Csv.extension()))
        .collect();
    limen::output::check_free(&a.out, &names)?;
    for (r, name) in reports.iter().zip(&names) {
        let path = limen::output::write_new(&a.out, name, &Csv.render(r))?;
        println!(
            "issued {} ({} results): {}",
            r.header.report,
            r.rows.len(),
            path.display()
        );
    }
    Ok(EXIT_OK)
}
