//! Re-issuing a report: recompute its latest revision from the ledger's
//! snapshot and, when anything changed, issue the next revision naming the
//! one it replaces, the reason and every changed result. Above both the
//! ledger (which recomputes) and `issue` (which records).

use crate::Error;
use crate::issue::Fault;
use crate::ledger::Ledger;
use crate::ledger::recompute::{Against, Change, changes, recompute, snapshot, stored};
use crate::report::{Report, RunInfo};
use std::path::{Path, PathBuf};

/// How a re-issue ended.
pub enum Reissued {
    Issued {
        revision: u32,
        replaces: u32,
        changes: Vec<Change>,
        paths: Vec<PathBuf>,
        warnings: Vec<String>,
    },
    /// Nothing differs from the revision in force (and no --force).
    Unchanged {
        revision: u32,
    },
    Blocked {
        report: Box<Report>,
    },
}

pub struct ReissueRequest<'a> {
    pub report: &'a str,
    pub reason: &'a str,
    pub out: &'a Path,
    pub force: bool,
    pub local_offset: String,
    pub templates: &'a crate::templates::Templates,
    pub fault: Option<Fault>,
    /// The lab as it stands now: who may authorise the new revision, and
    /// its review policy.
    pub lab: &'a crate::read::Lab,
    /// The authorising signatory's id (None: the lab's only one).
    pub by: Option<&'a str>,
    /// The workspace whose keys/ folder holds the signatories' keys.
    pub keys: &'a Path,
}

/// Recomputes a report's latest revision and, if anything changed (or
/// `force`), issues the next revision, which names the one it replaces,
/// the reason, and every changed result.
pub fn reissue(
    ledger: &mut Ledger,
    against: &Against<'_>,
    req: &ReissueRequest<'_>,
    run: &RunInfo,
) -> Result<Reissued, Error> {
    let prev = ledger
        .latest(req.report)?
        .ok_or_else(|| crate::ledger::LedgerError::Unknown {
            report: req.report.to_string(),
        })?;
    let snap = ledger.snapshot(prev.id)?;
    let revision = prev.revision + 1;
    let (ws, batch, mut report) = recompute(req.report, &snap, against, revision, run)?;
    if report.is_blocked() {
        return Ok(Reissued::Blocked {
            report: Box::new(report),
        });
    }
    let diff = changes(&ledger.results(prev.id)?, &stored(&report));
    let details_changed = against.manifest.is_some_and(|m| m != snap.batch_toml)
        || against.lab.is_some_and(|l| l != snap.lab_toml);
    if diff.is_empty() && !details_changed && !req.force {
        return Ok(Reissued::Unchanged {
            revision: prev.revision,
        });
    }
    let changed: Vec<String> = diff.iter().map(Change::describe).collect();
    report.header.replaces = Some(crate::report::Replaces {
        report: prev.report.clone(),
        revision: prev.revision,
        issued_on: chrono::NaiveDate::parse_from_str(
            prev.issued_at.get(..10).unwrap_or(""),
            "%Y-%m-%d",
        )
        .unwrap_or_default(),
        reason: req.reason.trim().to_string(),
        changed: changed.clone(),
    });
    let release = crate::release::authorise(
        req.lab,
        &report,
        req.by,
        &ledger.reviews(req.report)?,
        crate::release::Reviewed::After(&prev.issued_at),
    )?;
    crate::release::apply(&mut report, &release);
    let signer = crate::keys::load(
        req.keys,
        &release.signatory.id,
        report.header.issued_at.timestamp(),
    )?;
    let record = crate::issue::Record {
        rendered: None,
        snapshot: snapshot(&ws, &batch, &report),
        local_offset: req.local_offset.clone(),
        reason: req.reason.trim().to_string(),
        changed,
        templates: req.templates,
        signer: &signer,
    };
    let (paths, warnings) =
        crate::issue::issue_recorded(ledger, req.out, &mut report, record, req.fault)?;
    Ok(Reissued::Issued {
        revision,
        replaces: prev.revision,
        changes: diff,
        paths,
        warnings,
    })
}
