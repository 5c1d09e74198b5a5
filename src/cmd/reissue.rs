use super::run_info;
use limen::Error;
use limen::error::{EXIT_BLOCKED, EXIT_OK};
use limen::ledger::recompute::{Against, changes, recompute, stored};
use limen::read::csvtable::read_file;
use limen::read::{Register, Specs};
use limen::report::Replaces;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct Args {
    /// The report number to re-issue (its latest revision is replaced).
    report: String,
    /// Why the report is re-issued; printed on the new certificate.
    #[arg(long, value_name = "TEXT")]
    reason: String,
    /// Folder the new revision's files are written to.
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    #[arg(long, value_name = "DIR")]
    workspace: Option<PathBuf>,
    /// A register to use instead of the workspace's limits.csv.
    #[arg(long, value_name = "FILE")]
    limits: Option<PathBuf>,
    /// Specs to use instead of the workspace's specs.csv.
    #[arg(long, value_name = "FILE")]
    specs: Option<PathBuf>,
    /// A corrected lab.toml to use instead of the one issued with.
    #[arg(long, value_name = "FILE")]
    lab: Option<PathBuf>,
    /// A corrected batch.toml (e.g. a client detail) instead of the one issued with.
    #[arg(long, value_name = "FILE")]
    manifest: Option<PathBuf>,
    /// Re-issue even when no result changes.
    #[arg(long)]
    force: bool,
}

fn text(path: &Option<PathBuf>) -> Result<Option<String>, Error> {
    match path {
        None => Ok(None),
        Some(p) => Ok(Some(String::from_utf8_lossy(&read_file(p)?).into_owned())),
    }
}

pub fn run(a: Args) -> Result<i32, Error> {
    if a.reason.trim().is_empty() {
        return Err(Error::Usage {
            message: "--reason is empty".into(),
            hint: "say why the report is re-issued; the reason is printed on the new certificate"
                .into(),
        });
    }
    let run = run_info()?;
    let fault = super::fault()?;
    let (ws, mut ledger) = super::ledger_workspace(a.workspace.as_deref())?;
    let prev = ledger
        .latest(&a.report)?
        .ok_or_else(|| limen::ledger::LedgerError::Unknown {
            report: a.report.clone(),
        })?;
    let snap = ledger.snapshot(prev.id)?;
    let register = match &a.limits {
        Some(p) => Register::parse(&p.display().to_string(), &read_file(p)?)?,
        None => ws.register.clone(),
    };
    let specs = match &a.specs {
        Some(p) => Specs::parse(&p.display().to_string(), &read_file(p)?)?,
        None => ws.specs.clone(),
    };
    let (lab, manifest) = (text(&a.lab)?, text(&a.manifest)?);
    let against = Against {
        root: &ws.root,
        register: &register,
        specs: &specs,
        lab: lab.as_deref(),
        manifest: manifest.as_deref(),
    };
    let revision = prev.revision + 1;
    let (rws, batch, mut report) = recompute(&a.report, &snap, &against, revision, &run)?;
    if report.is_blocked() {
        eprintln!(
            "error: {} revision {revision} would be blocked; nothing was issued",
            a.report
        );
        for p in &report.problems {
            eprintln!("  - {p}\n    hint: {}", p.hint);
        }
        eprintln!("hint: resolve the problems (a register row missing for a date?), then re-issue");
        return Ok(EXIT_BLOCKED);
    }
    let old = ledger.results(prev.id)?;
    let diff = changes(&old, &stored(&report));
    let manifest_changed =
        manifest.is_some() && manifest.as_deref() != Some(snap.batch_toml.as_str());
    let lab_changed = lab.is_some() && lab.as_deref() != Some(snap.lab_toml.as_str());
    println!(
        "{} revision {} -> revision {revision}",
        a.report, prev.revision
    );
    if diff.is_empty() {
        println!("  no result changes");
    }
    for c in &diff {
        println!("  {}", c.describe());
    }
    if manifest_changed {
        println!("  report details changed (corrected batch.toml)");
    }
    if lab_changed {
        println!("  laboratory details changed (corrected lab.toml)");
    }
    if diff.is_empty() && !manifest_changed && !lab_changed && !a.force {
        eprintln!(
            "error: nothing changed since revision {}; nothing was issued",
            prev.revision
        );
        eprintln!(
            "hint: re-issue only when a result or a detail changes, or pass --force with a reason"
        );
        return Ok(EXIT_BLOCKED);
    }
    let issued_on = chrono::NaiveDate::parse_from_str(
        &prev.issued_at[..10.min(prev.issued_at.len())],
        "%Y-%m-%d",
    )
    .unwrap_or_default();
    let changed: Vec<String> = diff.iter().map(|c| c.describe()).collect();
    report.header.replaces = Some(Replaces {
        report: prev.report.clone(),
        revision: prev.revision,
        issued_on,
        reason: a.reason.trim().to_string(),
        changed: changed.clone(),
    });
    let templates = limen::templates::Templates::load(Some(&ws.root))?;
    for name in limen::output::sweep(&a.out) {
        eprintln!(
            "note: removed {name}, left in {} by an interrupted run",
            a.out.display()
        );
    }
    let record = limen::issue::Record {
        snapshot: limen::ledger::recompute::snapshot(&rws, &batch, &report),
        local_offset: ws.lab.utc_offset.to_string(),
        reason: a.reason.trim().to_string(),
        changed,
        templates: &templates,
    };
    let (paths, warnings) =
        limen::issue::issue_recorded(&mut ledger, &a.out, &mut report, record, fault)?;
    for w in warnings {
        eprintln!("warning: {w}");
    }
    println!(
        "issued {} revision {revision} (replaces revision {}; {} result(s) changed): {}",
        a.report,
        prev.revision,
        diff.len(),
        paths
            .iter()
            .map(|p| p.display().to_string())
            .collect::<Vec<_>>()
            .join(", ")
    );
    Ok(EXIT_OK)
}
