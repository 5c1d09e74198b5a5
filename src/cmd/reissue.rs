use super::run_info;
use limen::Error;
use limen::error::{EXIT_BLOCKED, EXIT_OK};
use limen::ledger::recompute::Against;
use limen::read::csvtable::read_file;
use limen::read::{Register, Specs};
use limen::reissue::{ReissueRequest, Reissued, reissue};
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
    /// The signatory (an id from lab.toml's [[signatory]]) who authorises
    /// the new revision; needed when the lab has more than one.
    #[arg(long, value_name = "ID")]
    by: Option<String>,
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
    let (ws, mut ledger) = super::ledger_workspace(a.workspace.as_deref())?;
    super::old_signatory_note(&ws);
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
    let templates = limen::templates::Templates::load(Some(&ws.root))?;
    for name in limen::output::sweep(&a.out) {
        eprintln!(
            "note: removed {name}, left in {} by an interrupted run",
            a.out.display()
        );
    }
    let req = ReissueRequest {
        report: &a.report,
        reason: &a.reason,
        out: &a.out,
        force: a.force,
        local_offset: ws.lab.utc_offset.to_string(),
        templates: &templates,
        fault: super::fault()?,
        lab: &ws.lab,
        by: a.by.as_deref(),
        keys: &ws.root,
    };
    let outcome = reissue(&mut ledger, &against, &req, &run)?;
    tell(&a.report, outcome)
}

/// What the re-issue did, in words, and its exit code.
fn tell(report_id: &str, outcome: Reissued) -> Result<i32, Error> {
    match outcome {
        Reissued::Blocked { report } => {
            eprintln!(
                "error: {} revision {} would be blocked; nothing was issued",
                report_id, report.header.revision
            );
            for p in &report.problems {
                eprintln!("  - {p}\n    hint: {}", p.hint);
            }
            eprintln!(
                "hint: resolve the problems (a register row missing for a date?), then re-issue"
            );
            Ok(EXIT_BLOCKED)
        }
        Reissued::Unchanged { revision } => {
            eprintln!("error: nothing changed since revision {revision}; nothing was issued");
            eprintln!("hint: re-issue only when a result or a detail changes, or pass --force");
            Ok(EXIT_BLOCKED)
        }
        Reissued::Issued {
            revision,
            replaces,
            changes,
            paths,
            warnings,
        } => {
            println!("{} revision {replaces} -> revision {revision}", report_id);
            if changes.is_empty() {
                println!("  no result changes");
            }
            for c in &changes {
                println!("  {}", c.describe());
            }
            for w in warnings {
                eprintln!("warning: {w}");
            }
            println!(
                "issued {} revision {revision} (replaces revision {replaces}; {} result(s) changed): {}",
                report_id,
                changes.len(),
                paths
                    .iter()
                    .map(|p| p.display().to_string())
                    .collect::<Vec<_>>()
                    .join(", ")
            );
            Ok(EXIT_OK)
        }
    }
}
