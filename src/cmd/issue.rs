use super::{load, run_info};
use limen::Error;
use limen::error::{EXIT_BLOCKED, EXIT_OK};
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
    let mut templates = Vec::new();
    for dir in &a.batches {
        let (ws, batch) = load(dir, a.workspace.as_deref())?;
        templates.push(limen::templates::Templates::load(Some(&ws.root))?);
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
    let mut files = Vec::new();
    let mut counts = Vec::new();
    for (r, t) in reports.iter().zip(&templates) {
        let (f, warnings) = limen::issue::render(r, t)?;
        for w in warnings {
            eprintln!("warning: {w}");
        }
        counts.push((r.header.report.clone(), r.rows.len(), f.len()));
        files.extend(f);
    }
    let paths = limen::issue::write_all(&a.out, &files)?;
    let mut paths = paths.iter();
    for (report, results, n) in counts {
        let written: Vec<String> = paths
            .by_ref()
            .take(n)
            .map(|p| p.display().to_string())
            .collect();
        println!(
            "issued {report} ({results} results): {}",
            written.join(", ")
        );
    }
    Ok(EXIT_OK)
}
