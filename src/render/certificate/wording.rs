//! The certificate's wording: what the templates may use, drawn from the
//! report model, and rendered template text laid into the flow.

use crate::classify::{State, Verdict};
use crate::layout::{Flow, Style};
use crate::qc;
use crate::read::DecisionRule;
use crate::report::{Report, ReportRow};
use crate::templates::{Block, blocks};
use serde::Serialize;
use std::collections::BTreeMap;

/// Everything the templates may use.
#[derive(Serialize)]
pub struct Context {
    lab_name: String,
    lab_address: String,
    accreditation: String,
    signatory: String,
    signatory_role: String,
    /// The review before release; all empty when none was recorded.
    reviewer: String,
    reviewer_role: String,
    reviewed_on: String,
    report: String,
    revision: u32,
    batch: String,
    client_name: String,
    client_address: String,
    client_contact: String,
    pub(super) received_on: String,
    pub(super) issued_on: String,
    pub(super) analysed_from: String,
    pub(super) analysed_to: String,
    verification_code: String,
    guarded: bool,
    compare_reported: bool,
    has_nd: bool,
    has_dbl: bool,
    has_quantified: bool,
    has_over_range: bool,
    has_inconclusive: bool,
    mdl_range: String,
    loq_range: String,
    inconclusive_items: String,
    studies: String,
    has_blank_affected: bool,
    has_matrix_effect: bool,
    has_imprecise: bool,
    has_qc_exception: bool,
    has_qualifiers: bool,
    qc_exception_reason: String,
    is_revision: bool,
    replaces_report: String,
    replaces_revision: u32,
    replaces_issued_on: String,
    revision_reason: String,
    changed_results: String,
    changed_list: Vec<String>,
    has_uncertainty: bool,
    /// Detection power: any result with β; the weak passes, each in words.
    has_power: bool,
    has_low_power: bool,
    has_weak: bool,
    power_items: Vec<String>,
    /// The lab's β as "N in 100", and 100 − that.
    beta_in_100: String,
    detect_in_100: String,
}

/// "lowest (id) to highest (id)", per unit.
fn range(rows: &[ReportRow], pick: impl Fn(&ReportRow) -> rust_decimal::Decimal) -> String {
    let mut by_unit: BTreeMap<&str, (&ReportRow, &ReportRow)> = BTreeMap::new();
    for r in rows {
        let e = by_unit.entry(r.unit.symbol()).or_insert((r, r));
        if pick(r) < pick(e.0) {
            e.0 = r;
        }
        if pick(r) > pick(e.1) {
            e.1 = r;
        }
    }
    by_unit
        .into_iter()
        .map(|(unit, (lo, hi))| {
            format!(
                "{} {unit} ({} {}) to {} {unit} ({} {})",
                pick(lo),
                lo.lab_id,
                lo.analyte,
                pick(hi),
                hi.lab_id,
                hi.analyte
            )
        })
        .collect::<Vec<_>>()
        .join("; ")
}

pub fn context(report: &Report) -> Context {
    let h = &report.header;
    let rows = &report.rows;
    let has = |s: State| rows.iter().any(|r| r.state == s);
    let qual = |q: &str| rows.iter().any(|r| r.qualifiers.iter().any(|x| x == q));
    let mut studies: Vec<&str> = rows.iter().map(|r| &*r.limits_row).collect();
    studies.sort_unstable();
    studies.dedup();
    let dates = rows.iter().map(|r| r.analyzed_on);
    let replaces = h.replaces.as_ref();
    Context {
        lab_name: h.lab_name.clone(),
        lab_address: h.lab_address.clone(),
        accreditation: h.accreditation.clone().unwrap_or_default(),
        signatory: h.signatory.clone(),
        signatory_role: h.signatory_role.clone(),
        reviewer: h
            .review
            .as_ref()
            .map(|r| r.name.clone())
            .unwrap_or_default(),
        reviewer_role: h
            .review
            .as_ref()
            .map(|r| r.role.clone())
            .unwrap_or_default(),
        reviewed_on: h
            .review
            .as_ref()
            .and_then(|r| chrono::DateTime::parse_from_rfc3339(&r.at).ok())
            .map(|t| {
                t.with_timezone(&h.utc_offset)
                    .format("%Y-%m-%d")
                    .to_string()
            })
            .unwrap_or_default(),
        report: h.report.clone(),
        revision: h.revision,
        batch: h.batch.clone(),
        client_name: h.client_name.clone(),
        client_address: h.client_address.clone(),
        client_contact: h.client_contact.clone(),
        received_on: h.received_on.to_string(),
        issued_on: h
            .issued_at
            .with_timezone(&h.utc_offset)
            .format("%Y-%m-%d")
            .to_string(),
        analysed_from: dates
            .clone()
            .min()
            .map(|d| d.to_string())
            .unwrap_or_default(),
        analysed_to: dates.max().map(|d| d.to_string()).unwrap_or_default(),
        verification_code: h.verification_code.clone().unwrap_or_default(),
        guarded: h.decision_rule == DecisionRule::Guarded,
        compare_reported: h.compare == crate::read::Compare::Reported,
        has_nd: has(State::NotDetected),
        has_dbl: has(State::DetectedBelowLoq),
        has_quantified: has(State::Quantified),
        has_over_range: has(State::OverRange),
        has_inconclusive: rows
            .iter()
            .any(|r| r.verdict == Some(Verdict::Inconclusive) && !r.weak_pass),
        mdl_range: range(rows, |r| r.mdl),
        loq_range: range(rows, |r| r.loq),
        inconclusive_items: rows
            .iter()
            .filter(|r| r.verdict == Some(Verdict::Inconclusive) && !r.weak_pass)
            .map(|r| format!("{} {}", r.lab_id, r.analyte))
            .collect::<Vec<_>>()
            .join(", "),
        studies: studies.join(", "),
        has_blank_affected: qual(qc::BLANK_AFFECTED),
        has_matrix_effect: qual(qc::MATRIX_EFFECT),
        has_imprecise: qual(qc::IMPRECISE),
        has_qc_exception: report.qc_exception.is_some(),
        has_qualifiers: rows.iter().any(|r| !r.qualifiers.is_empty()),
        qc_exception_reason: report.qc_exception.clone().unwrap_or_default(),
        is_revision: replaces.is_some(),
        replaces_report: replaces.map(|r| r.report.clone()).unwrap_or_default(),
        replaces_revision: replaces.map(|r| r.revision).unwrap_or_default(),
        replaces_issued_on: replaces
            .map(|r| r.issued_on.to_string())
            .unwrap_or_default(),
        revision_reason: replaces.map(|r| r.reason.clone()).unwrap_or_default(),
        changed_results: replaces
            .map(|r| {
                if r.changed.is_empty() {
                    "none".to_string()
                } else {
                    r.changed.join("; ")
                }
            })
            .unwrap_or_default(),
        changed_list: replaces.map(|r| r.changed.clone()).unwrap_or_default(),
        has_uncertainty: rows.iter().any(|r| r.uncertainty.is_some()),
        has_power: rows.iter().any(|r| r.beta_at_limit.is_some()),
        has_low_power: qual(crate::report::LOW_POWER),
        has_weak: rows.iter().any(|r| r.weak_pass),
        power_items: rows
            .iter()
            .filter(|r| r.weak_pass)
            .map(|r| power_item(r, h.detection_power.beta))
            .collect(),
        beta_in_100: in_100(h.detection_power.beta),
        detect_in_100: in_100(1.0 - h.detection_power.beta),
    }
}

/// A probability as "about N" times in 100, in words a client can use.
fn in_100(p: f64) -> String {
    let n = (p * 100.0).round();
    if n < 1.0 {
        "fewer than 1".into()
    } else {
        format!("{n}")
    }
}

/// One weak pass in words, with its numbers.
fn power_item(r: &ReportRow, lab_beta: f64) -> String {
    let beta = r.beta_at_limit.unwrap_or_default();
    let b = beta.to_string().parse::<f64>().unwrap_or(f64::NAN);
    let limit = r.spec_limit.map(crate::numeric::plain).unwrap_or_default();
    let ld = r
        .ld
        .map(|d| {
            format!(
                "; it would find {} at least {} times in 100 from about {d} {} (its detection limit L_D)",
                r.analyte,
                in_100(1.0 - lab_beta),
                r.unit
            )
        })
        .unwrap_or_default();
    format!(
        "{} {}: if the item contained {} at exactly the limit ({limit} {}), this test would have missed it about {} times in 100 (β = {beta}){ld}.",
        r.lab_id,
        r.analyte,
        r.analyte,
        r.unit,
        in_100(b)
    )
}

/// The one-letter qualifier codes the results table prints; the legend
/// explains them.
pub fn qualifier_codes(r: &ReportRow) -> String {
    r.qualifiers
        .iter()
        .map(|q| match q.as_str() {
            qc::BLANK_AFFECTED => "B",
            qc::MATRIX_EFFECT => "M",
            qc::IMPRECISE => "I",
            qc::QC_EXCEPTION => "X",
            crate::report::LOW_POWER => "P",
            _ => "?",
        })
        .collect::<Vec<_>>()
        .join(" ")
}

/// Rendered template text as headings, paragraphs and bullets.
pub fn paragraph_blocks(flow: &mut Flow<'_>, text: &str, body: Style) {
    for b in blocks(text) {
        match b {
            Block::Heading(h) => {
                flow.ensure(body.line_height() * 3.0);
                flow.space(4.0);
                flow.paragraph(&h, Style::new(body.size + 1.5).bold(), 0.0);
                flow.space(1.0);
            }
            Block::Paragraph(p) => {
                flow.paragraph(&p, body, 0.0);
                flow.space(3.0);
            }
            Block::Bullet(p) => {
                // The bullet goes on the page its first line lands on.
                flow.ensure(body.line_height());
                let (x, y) = (flow.margins.left + 2.0, flow.y + body.size);
                flow.text_at(x, y, "•", body);
                flow.paragraph(&p, body, 10.0);
                flow.space(1.5);
            }
        }
    }
}
