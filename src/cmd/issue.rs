use super::progress::Progress;
use super::run_info;
use limen::Error;
use limen::error::{EXIT_BLOCKED, EXIT_OK};
use limen::issue::{Event, Job, Site, issue_all};
use limen::ledger::Ledger;
use limen::read::{Batch, Workspace};
use limen::templates::Templates;
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
    /// The signatory (an id from lab.toml's [[signatory]]) who authorises
    /// release; needed when the lab has more than one.
    #[arg(long, value_name = "ID")]
    by: Option<String>,
}

pub fn run(a: Args) -> Result<i32, Error> {
    let run = run_info()?;
    let fault = super::fault()?;
    let progress = Progress::steps(a.batches.len() as u64 * 2, a.batches.len() > 1);
    let (reports, workspaces) = evaluate(&a, &run, &progress)?;
    let blocked: Vec<_> = reports
        .iter()
        .map(|r| &r.0)
        .filter(|r| r.is_blocked())
        .collect();
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
    let mut sites = Vec::with_capacity(workspaces.len());
    for (_, ws, templates) in &workspaces {
        let (ledger, notes) = Ledger::open(&ws.root)?;
        for n in notes {
            eprintln!("note: {n}");
        }
        sites.push(Site {
            ws,
            templates,
            ledger,
        });
    }
    // Every release is authorised, and its signing key found, before
    // anything is written.
    let mut jobs = Vec::with_capacity(reports.len());
    let mut keys: Vec<((usize, String), limen::sign::Identity)> = Vec::new();
    for (mut report, batch, site) in reports {
        let s = &sites[site];
        let release = limen::release::authorise(
            &s.ws.lab,
            &report,
            a.by.as_deref(),
            &s.ledger.reviews(&report.header.report)?,
            limen::release::Reviewed::Of(&limen::release::Inputs::of(s.ws, &batch)),
        )
        .map_err(|r| {
            let mut e: Error = r.into();
            if let Error::Refused { message, .. } = &mut e {
                *message = format!("{}: {message}", report.header.report);
            }
            e
        })?;
        limen::release::apply(&mut report, &release);
        let who = (site, release.signatory.id.clone());
        let signer = match keys.iter().find(|(k, _)| *k == who) {
            Some((_, id)) => id.clone(),
            None => {
                let id = limen::keys::load(&s.ws.root, &who.1, run.issued_at.timestamp())?;
                keys.push((who, id.clone()));
                id
            }
        };
        jobs.push(Job {
            report,
            batch,
            site,
            signer,
        });
    }
    let issued = issue_all(&mut sites, &a.out, jobs, fault, &mut |e| match e {
        Event::Swept(name) => eprintln!(
            "note: removed {name}, left in {} by an interrupted run",
            a.out.display()
        ),
        Event::Rendering(report) => progress.step(&format!("rendering {report}")),
    })?;
    let mut lines = String::new();
    for i in &issued {
        for w in &i.warnings {
            eprintln!("warning: {w}");
        }
        let written: Vec<String> = i.paths.iter().map(|p| p.display().to_string()).collect();
        lines.push_str(&format!(
            "issued {} revision 0 ({} results, verification code {}): {}\n",
            i.report.header.report,
            i.report.rows.len(),
            i.report.header.verification_code.as_deref().unwrap_or(""),
            written.join(", ")
        ));
    }
    progress.finish();
    super::say(&lines)?;
    Ok(EXIT_OK)
}

type Evaluated = (
    Vec<(limen::Report, Batch, usize)>,
    Vec<(PathBuf, Workspace, Templates)>,
);

/// Each batch evaluated against its workspace (read once for all its
/// batches), with held QC accepted when the analyst says why.
fn evaluate(a: &Args, run: &limen::RunInfo, progress: &Progress) -> Result<Evaluated, Error> {
    // (report, batch, index of its workspace)
    let mut reports: Vec<(limen::Report, Batch, usize)> = Vec::new();
    // Batches of one workspace share its files, read once.
    let mut workspaces: Vec<(PathBuf, Workspace, Templates)> = Vec::new();
    for dir in &a.batches {
        progress.step(&format!("checking {}", dir.display()));
        let root = match &a.workspace {
            Some(w) => w.clone(),
            None => Workspace::find(dir)?,
        };
        let k = match workspaces.iter().position(|(r, _, _)| *r == root) {
            Some(k) => k,
            None => {
                let ws = Workspace::load(&root)?;
                super::old_signatory_note(&ws);
                let t = Templates::load(Some(&ws.root))?;
                workspaces.push((root, ws, t));
                workspaces.len() - 1
            }
        };
        let batch = Batch::load(dir)?;
        let mut report = limen::report::build(&workspaces[k].1, &batch, 0, run)?;
        if let Some(reason) = &a.accept_qc {
            if reason.trim().is_empty() {
                return Err(Error::Usage {
                    message: "--accept-qc needs a reason".into(),
                    hint: "say why the QC exception is acceptable, e.g. --accept-qc \"LCS high bias; all results ND\"".into(),
                });
            }
            report.accept_qc(reason);
        }
        reports.push((report, batch, k));
    }
    Ok((reports, workspaces))
}
