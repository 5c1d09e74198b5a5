//! Ongoing MDL verification (40 CFR Part 136 Appendix B, Revision 2): over
//! the routine spikes and blanks of up to 24 months, may the MDL in force be
//! kept, or must it be replaced?

use super::mdl::{MdlResult, Options, compute};
use super::{Group, StudyKind};
use crate::read::{InForce, Register};
use crate::units::convert;
use chrono::{Datelike, Months, NaiveDate};
use std::collections::BTreeMap;

#[derive(Debug, Clone)]
pub struct VerifyResult {
    pub result: MdlResult,
    pub from: NaiveDate,
    pub to: NaiveDate,
    /// The register's MDL in force on the newest date, in the study's unit, and its row.
    pub existing: Option<(f64, String)>,
    pub ratio: Option<f64>,
    pub blanks_above: usize,
    pub blanks_total: usize,
    pub keep: bool,
    pub reasons: Vec<String>,
    /// Calendar quarters with fewer than 2 spikes.
    pub thin_quarters: Vec<(String, usize)>,
}

pub fn verify(group: &Group, register: &Register, opts: &Options) -> VerifyResult {
    let to = group
        .rows
        .iter()
        .map(|r| r.analyzed_on)
        .max()
        .unwrap_or_default();
    let from = to.checked_sub_months(Months::new(24)).unwrap_or(to);
    let window = Group {
        rows: group
            .rows
            .iter()
            .filter(|r| r.analyzed_on > from)
            .cloned()
            .collect(),
        ..group.clone()
    };
    let result = compute(&window, opts);
    let existing = match register.in_force(&group.analyte, &group.matrix, &group.method, to) {
        InForce::Row(row) => convert(row.mdl, row.unit, group.unit)
            .and_then(|d| d.to_string().parse::<f64>().ok())
            .map(|v| (v, row.reference.to_string())),
        _ => None,
    };
    let blanks: Vec<f64> = window
        .rows
        .iter()
        .filter(|r| r.kind == StudyKind::Blank)
        .filter_map(|r| r.value)
        .collect();
    let blanks_total = window
        .rows
        .iter()
        .filter(|r| r.kind == StudyKind::Blank)
        .count();
    let mut reasons = Vec::new();
    let (ratio, blanks_above, keep) = match &existing {
        None => {
            reasons
                .push("no MDL in force in the register for this analyte, matrix and method".into());
            (None, 0, false)
        }
        Some((old, _)) => {
            let ratio = result.mdl / old;
            let above = blanks.iter().filter(|b| *b > old).count();
            let share = if blanks_total == 0 {
                0.0
            } else {
                above as f64 / blanks_total as f64
            };
            let mut keep = result.ok();
            if !result.ok() {
                reasons.push("the recomputed MDL has design errors".into());
            }
            if !(0.5..=2.0).contains(&ratio) {
                keep = false;
                reasons.push(format!(
                    "the new MDL is {ratio:.2} × the existing one, outside 0.5–2.0"
                ));
            }
            if share >= 0.03 {
                keep = false;
                reasons.push(format!(
                    "{above} of {blanks_total} blank results ({:.1} %) are above the existing MDL; fewer than 3 % may be",
                    share * 100.0
                ));
            }
            (Some(ratio), above, keep)
        }
    };
    let thin_quarters = thin_quarters(&window, to);
    VerifyResult {
        result,
        from,
        to,
        existing,
        ratio,
        blanks_above,
        blanks_total,
        keep,
        reasons,
        thin_quarters,
    }
}

/// Calendar quarters of the window with fewer than 2 spikes: Appendix B
/// asks for spikes spread through the year.
fn thin_quarters(window: &Group, to: chrono::NaiveDate) -> Vec<(String, usize)> {
    let mut quarters: BTreeMap<(i32, u32), usize> = BTreeMap::new();
    let first = window
        .rows
        .iter()
        .map(|r| r.analyzed_on)
        .min()
        .unwrap_or(to);
    let (mut y, mut q) = (first.year(), (first.month() - 1) / 3 + 1);
    while (y, q) <= (to.year(), (to.month() - 1) / 3 + 1) {
        quarters.insert((y, q), 0);
        (y, q) = if q == 4 { (y + 1, 1) } else { (y, q + 1) };
    }
    for r in window.rows.iter().filter(|r| r.kind == StudyKind::Spike) {
        *quarters
            .entry((r.analyzed_on.year(), (r.analyzed_on.month() - 1) / 3 + 1))
            .or_default() += 1;
    }
    quarters
        .into_iter()
        .filter(|(_, n)| *n < 2)
        .map(|((y, q), n)| (format!("{y}-Q{q}"), n))
        .collect()
}
