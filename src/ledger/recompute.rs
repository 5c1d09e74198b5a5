//! Recomputing an issued report from its stored inputs against a register
//! and specs (today's, or corrected ones), and saying what changed.

use super::LedgerError as Error;
use super::{Snapshot, StoredResult};
use crate::read::ReadError;
use crate::read::{Batch, LimitRow, Manifest, Register, SpecRow, Specs, Workspace, lab_from};
use crate::report::{EvalError, Report, RunInfo};
use std::path::{Path, PathBuf};

fn limit_line(r: &LimitRow) -> String {
    format!(
        "{}:{}\t{}\t{}\t{}\t{}\t{}\t{}\t{}\t{}",
        r.file,
        r.line,
        r.analyte,
        r.matrix,
        r.method,
        r.unit,
        r.mdl,
        r.loq,
        r.effective_from,
        r.study_id
    )
}

fn spec_line(r: &SpecRow) -> String {
    format!(
        "{}:{}\t{}\t{}\t{}\t{}\t{}\t{}\t{}",
        r.file, r.line, r.spec, r.analyte, r.matrix, r.limit, r.unit, r.effective_from, r.citation
    )
}

/// Everything needed to compute the report again: the lab's settings and
/// the batch as they were, and the register and spec rows that were used.
pub fn snapshot(ws: &Workspace, batch: &Batch, report: &Report) -> Snapshot {
    Snapshot {
        batch_dir: batch.dir.display().to_string(),
        lab_toml: ws.lab_text.clone(),
        qc_toml: ws.qc_text.clone(),
        batch_toml: batch.manifest_text.clone(),
        results_name: batch.results_file.clone(),
        results: batch.results_bytes.clone(),
        limits_rows: report
            .limits_used
            .iter()
            .map(limit_line)
            .collect::<Vec<_>>()
            .join("\n"),
        spec_rows: report
            .specs_used
            .iter()
            .map(spec_line)
            .collect::<Vec<_>>()
            .join("\n"),
    }
}

/// What to recompute against; `lab` and `manifest` replace the stored
/// lab.toml or batch.toml (a corrected client name, say).
pub struct Against<'a> {
    pub root: &'a Path,
    pub register: &'a Register,
    pub specs: &'a Specs,
    pub lab: Option<&'a str>,
    pub manifest: Option<&'a str>,
}

pub fn recompute(
    report_id: &str,
    snap: &Snapshot,
    against: &Against<'_>,
    revision: u32,
    run: &RunInfo,
) -> Result<(Workspace, Batch, Report), Error> {
    let lab_text = against.lab.unwrap_or(&snap.lab_toml).to_string();
    let lab_file = format!("{report_id} (as issued): lab.toml");
    let qc_file = format!("{report_id} (as issued): qc.toml");
    let lab = lab_from(
        &lab_file,
        &lab_text,
        snap.qc_toml.as_deref().map(|t| (qc_file.as_str(), t)),
    )?;
    let ws = Workspace {
        root: against.root.to_path_buf(),
        lab_text,
        qc_text: snap.qc_toml.clone(),
        lab,
        register: against.register.clone(),
        specs: against.specs.clone(),
        // A re-issue is computed from parsed rows, not from these files.
        register_sha256: String::new(),
        specs_sha256: String::new(),
    };
    let manifest_text = against.manifest.unwrap_or(&snap.batch_toml).to_string();
    let manifest_file = format!("{report_id} (as issued): batch.toml");
    let manifest = Manifest::parse(&manifest_file, &manifest_text)?;
    if manifest.report != report_id {
        return Err(Error::Read(ReadError::field(
            crate::read::Loc::file(&manifest_file),
            format!(
                "the manifest names report {} but this is {report_id}",
                manifest.report
            ),
            "a re-issue keeps its report number; correct the manifest's `report`",
        )));
    }
    let batch = Batch {
        dir: PathBuf::from(&snap.batch_dir),
        manifest_file,
        manifest_text,
        manifest,
        results_file: snap.results_name.clone(),
        results_bytes: snap.results.clone(),
        results_on_disk: None,
    };
    let report = crate::report::build(&ws, &batch, revision, run)
        .map_err(|e: EvalError| Error::Eval(Box::new(e)))?;
    Ok((ws, batch, report))
}

/// What about a result changed. One list, used by `impact`, `reissue`,
/// `history` and the revised certificate, so all count the same changes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum ChangeKind {
    /// A result in one and not the other.
    Added,
    Removed,
    State,
    Verdict,
    /// The printed result ("< 0.979", "25.0") or its unit.
    Reported,
    /// The unrounded value behind it.
    Value,
    /// The sample MDL or LOQ printed, or the register row they come from.
    Limits,
    /// The spec applied or its limit.
    Spec,
    Qualifiers,
    /// The expanded uncertainty printed under the result.
    Uncertainty,
    /// Detection power: β at the limit or L_D.
    Power,
}

impl ChangeKind {
    pub fn name(self) -> &'static str {
        match self {
            ChangeKind::Added => "added",
            ChangeKind::Removed => "removed",
            ChangeKind::State => "state",
            ChangeKind::Verdict => "verdict",
            ChangeKind::Reported => "reported value",
            ChangeKind::Value => "value",
            ChangeKind::Limits => "MDL/LOQ",
            ChangeKind::Spec => "limit applied",
            ChangeKind::Qualifiers => "qualifiers",
            ChangeKind::Uncertainty => "uncertainty",
            ChangeKind::Power => "detection power",
        }
    }
}

/// What changed between two records of one result, in the order above.
/// Fields a schema-1 record did not keep (None) are not compared.
pub fn kinds(o: &StoredResult, n: &StoredResult) -> Vec<ChangeKind> {
    let kept =
        |a: &Option<String>, b: &Option<String>| matches!((a, b), (Some(x), Some(y)) if x != y);
    let mut k = Vec::new();
    if o.state != n.state {
        k.push(ChangeKind::State);
    }
    if o.verdict != n.verdict {
        k.push(ChangeKind::Verdict);
    }
    if o.reported != n.reported || o.unit != n.unit {
        k.push(ChangeKind::Reported);
    }
    if o.value != n.value {
        k.push(ChangeKind::Value);
    }
    if o.mdl != n.mdl || o.loq != n.loq || o.limits_row != n.limits_row {
        k.push(ChangeKind::Limits);
    }
    if kept(&o.spec, &n.spec) || kept(&o.spec_limit, &n.spec_limit) {
        k.push(ChangeKind::Spec);
    }
    if o.qualifiers != n.qualifiers {
        k.push(ChangeKind::Qualifiers);
    }
    if kept(&o.uncertainty, &n.uncertainty) {
        k.push(ChangeKind::Uncertainty);
    }
    if kept(&o.beta, &n.beta) || kept(&o.ld, &n.ld) {
        k.push(ChangeKind::Power);
    }
    k
}

/// One result that differs between what was issued and what is computed now.
#[derive(Debug, Clone, PartialEq)]
pub struct Change {
    pub lab_id: String,
    pub analyte: String,
    pub old: Option<StoredResult>,
    pub new: Option<StoredResult>,
    /// Never empty.
    pub kinds: Vec<ChangeKind>,
}

impl Change {
    pub fn is(&self, kind: ChangeKind) -> bool {
        self.kinds.contains(&kind)
    }

    /// In words, for a change table and a revised certificate.
    pub fn describe(&self) -> String {
        let side = |r: &Option<StoredResult>| match r {
            Some(r) => format!(
                "{} {} ({}{}; MDL {}, LOQ {}{})",
                r.reported,
                r.unit,
                r.state,
                if r.verdict.is_empty() {
                    String::new()
                } else {
                    format!(", {}", r.verdict)
                },
                r.mdl,
                r.loq,
                match (&r.spec, &r.spec_limit) {
                    (Some(s), Some(l)) if !s.is_empty() && self.is(ChangeKind::Spec) =>
                        format!("; {s} {l} {}", r.unit),
                    _ => String::new(),
                }
            ),
            None => "not reported".into(),
        };
        format!(
            "{} {}: {} → {} [{}]",
            self.lab_id,
            self.analyte,
            side(&self.old),
            side(&self.new),
            self.kinds
                .iter()
                .map(|k| k.name())
                .collect::<Vec<_>>()
                .join(", ")
        )
    }
}

/// What the ledger would keep of each result of `report`.
pub fn stored(report: &Report) -> Vec<StoredResult> {
    report.rows.iter().map(StoredResult::of).collect()
}

/// Results that differ between what was issued and what is computed now,
/// each with what about it changed.
pub fn changes(old: &[StoredResult], new: &[StoredResult]) -> Vec<Change> {
    let key = |r: &StoredResult| (r.lab_id.clone(), r.analyte.to_lowercase());
    let mut out = Vec::new();
    for o in old {
        let n = new.iter().find(|n| key(n) == key(o));
        let kinds = match n {
            None => vec![ChangeKind::Removed],
            Some(n) => kinds(o, n),
        };
        if !kinds.is_empty() {
            out.push(Change {
                lab_id: o.lab_id.clone(),
                analyte: o.analyte.clone(),
                old: Some(o.clone()),
                new: n.cloned(),
                kinds,
            });
        }
    }
    for n in new.iter().filter(|n| !old.iter().any(|o| key(o) == key(n))) {
        out.push(Change {
            lab_id: n.lab_id.clone(),
            analyte: n.analyte.clone(),
            old: None,
            new: Some(n.clone()),
            kinds: vec![ChangeKind::Added],
        });
    }
    out
}

/// One issued report that would change under the register and specs given.
#[derive(Debug, Clone)]
pub struct Impact {
    pub issued: super::Issued,
    pub changes: Vec<Change>,
    pub state_changes: usize,
    pub verdict_changes: usize,
    pub value_changes: usize,
    pub limits_changes: usize,
    pub spec_changes: usize,
    /// The recomputed report has a blocking problem (a limit no longer in force, say).
    pub now_blocked: bool,
}

/// Recomputes the latest revision of every issued report (issued since
/// `since`, if given) and returns those a re-issue would change (by
/// `changes`, the comparison `reissue` makes), and those that could not be
/// recomputed. `done` hears, before each report, how many of how many are
/// done.
pub fn impact(
    ledger: &super::Ledger,
    against: &Against<'_>,
    since: Option<chrono::NaiveDate>,
    run: &RunInfo,
    done: &mut dyn FnMut(usize, usize),
) -> Result<(usize, Vec<Impact>, Vec<String>), Error> {
    let mut affected = Vec::new();
    let mut failed = Vec::new();
    let all = ledger.latest_all(since)?;
    for (n, issued) in all.iter().enumerate() {
        done(n, all.len());
        let snap = ledger.snapshot(issued.id)?;
        let report = match recompute(&issued.report, &snap, against, issued.revision, run) {
            Ok((_, _, r)) => r,
            Err(e) => {
                failed.push(format!("{}: {e}", issued.report));
                continue;
            }
        };
        // The same comparison a re-issue makes, so the counts agree.
        let diff = changes(&ledger.results(issued.id)?, &stored(&report));
        if diff.is_empty() && !report.is_blocked() {
            continue;
        }
        let count = |k: ChangeKind| diff.iter().filter(|c| c.is(k)).count();
        affected.push(Impact {
            issued: issued.clone(),
            state_changes: count(ChangeKind::State),
            verdict_changes: count(ChangeKind::Verdict),
            value_changes: count(ChangeKind::Reported),
            limits_changes: count(ChangeKind::Limits),
            spec_changes: count(ChangeKind::Spec),
            now_blocked: report.is_blocked(),
            changes: diff,
        });
    }
    Ok((all.len(), affected, failed))
}
