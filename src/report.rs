//! Phase 4: the report model. Everything a renderer shows is decided here,
//! as text and decimals; renderers only lay it out.

use crate::classify::{self, Comparison, State, VerdictError};
pub use crate::evaluated::{EvalError, LOW_POWER, ReportRow};
use crate::numeric::round_sig;
use crate::problem::{Problem, ProblemKind};
use crate::qc::{QC_EXCEPTION, QcCheck};
use crate::read::batch::{Pass, each_result_in};
use crate::read::{
    Batch, Compare, DecisionRule, Kind, NotDetectedStyle, PageSize, ResultRow, Workspace,
};
use crate::resolve::{self, Resolution};
use chrono::{DateTime, NaiveDate, Utc};
use std::rc::Rc;

/// What varies between runs, passed in so outputs are reproducible.
#[derive(Debug, Clone)]
pub struct RunInfo {
    pub issued_at: DateTime<Utc>,
    pub tool_version: String,
}

#[derive(Debug, Clone)]
pub struct Header {
    pub report: String,
    pub revision: u32,
    pub batch: String,
    pub client_name: String,
    pub client_address: String,
    pub client_contact: String,
    pub received_on: NaiveDate,
    pub issued_at: DateTime<Utc>,
    /// The lab's offset from UTC: certificates print the issue date in lab time.
    pub utc_offset: chrono::FixedOffset,
    pub tool_version: String,
    pub lab_name: String,
    pub lab_address: String,
    pub accreditation: Option<String>,
    pub signatory: String,
    pub signatory_role: String,
    /// The id of the signatory who authorised release; empty until then.
    pub authorised_by: String,
    /// The review printed beside the authorisation, when there is one.
    pub review: Option<ReviewMark>,
    pub decision_rule: DecisionRule,
    pub detection_power: crate::read::DetectionPower,
    pub compare: Compare,
    pub significant_figures: u32,
    pub page_size: PageSize,
    /// Method id and description (from lab.toml) for each method used.
    pub methods: Vec<(String, String)>,
    /// Filled by the ledger once the report is recorded.
    pub verification_code: Option<String>,
    /// Set on a re-issue: what this revision replaces, and why.
    pub replaces: Option<Replaces>,
}

/// Who reviewed the batch's inputs before release, and when (UTC, as
/// recorded).
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewMark {
    pub by: String,
    pub name: String,
    pub role: String,
    pub at: String,
    pub note: String,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Replaces {
    pub report: String,
    pub revision: u32,
    pub issued_on: NaiveDate,
    pub reason: String,
    /// One line per changed result, in words.
    pub changed: Vec<String>,
}

#[derive(Debug, Clone)]
pub struct Report {
    pub header: Header,
    pub rows: Vec<ReportRow>,
    /// QC rows as read; never client results.
    pub qc: Vec<ResultRow>,
    pub qc_checks: Vec<QcCheck>,
    /// The reason given when held QC was accepted for issue.
    pub qc_exception: Option<String>,
    pub problems: Vec<Problem>,
    /// The register and spec rows the results used, in file order.
    pub limits_used: Vec<crate::read::LimitRow>,
    pub specs_used: Vec<crate::read::SpecRow>,
}

impl Report {
    pub fn is_blocked(&self) -> bool {
        !self.problems.is_empty()
    }

    /// Issues despite QC that holds the batch: the QC problems are lifted,
    /// every result they held is qualified `qc-exception`, and the reason is
    /// kept for the certificate. Other problems still block.
    pub fn accept_qc(&mut self, reason: &str) {
        let held: Vec<usize> = self
            .qc_checks
            .iter()
            .filter(|c| c.blocking)
            .flat_map(|c| c.affected.iter().copied())
            .collect();
        let any = self.problems.iter().any(|p| p.kind == ProblemKind::Qc);
        if held.is_empty() && !any {
            return;
        }
        for i in held {
            let q = &mut self.rows[i].qualifiers;
            if !q.iter().any(|x| x == QC_EXCEPTION) {
                q.push(QC_EXCEPTION.to_string());
            }
        }
        self.problems.retain(|p| p.kind != ProblemKind::Qc);
        self.qc_exception = Some(reason.trim().to_string());
    }
}

/// Evaluates a batch into its report model, holding every row.
pub fn build(
    ws: &Workspace,
    batch: &Batch,
    revision: u32,
    run: &RunInfo,
) -> Result<Report, EvalError> {
    let mut e = evaluate_into(
        ws,
        batch,
        revision,
        run,
        &mut |_| {},
        crate::spool::Spool::in_memory(),
    )?;
    let mut rows = Vec::with_capacity(e.count());
    e.each_row(|_, r| {
        rows.push(r.clone());
        Ok::<(), EvalError>(())
    })?;
    let mut report = e.finish();
    report.rows = rows;
    Ok(report)
}

/// A batch evaluated but for its rows: the header, the QC checks as judged,
/// the plan that qualifies each result and the classified rows spooled.
/// `each_row` then hands each finished row on, so a batch of any length is
/// written in flat memory; every input error has been found before the
/// first row is handed on.
pub struct Evaluation {
    header: Header,
    qc: Vec<ResultRow>,
    plan: crate::qc::Plan,
    problems: Vec<Problem>,
    limits_used: Vec<crate::read::LimitRow>,
    specs_used: Vec<crate::read::SpecRow>,
    rows: crate::spool::Spool,
}

/// How often the checking pass says how far it has read.
pub const TICK_ROWS: u64 = 8192;

/// Reads the batch's QC rows, then every row once: the client results are
/// classified, gathered for the QC rules (the QC rows may stand anywhere in
/// the file, a spike before its parent) and spooled, and the rules judged.
/// `rows_read` hears every `TICK_ROWS` rows how many the checking pass has
/// read, for a progress display.
pub fn evaluate_watched<'a>(
    ws: &'a Workspace,
    batch: &'a Batch,
    revision: u32,
    run: &RunInfo,
    rows_read: &mut dyn FnMut(u64),
) -> Result<Evaluation, EvalError> {
    evaluate_into(
        ws,
        batch,
        revision,
        run,
        rows_read,
        crate::spool::Spool::new(),
    )
}

fn evaluate_into<'a>(
    ws: &'a Workspace,
    batch: &'a Batch,
    revision: u32,
    run: &RunInfo,
    rows_read: &mut dyn FnMut(u64),
    mut rows: crate::spool::Spool,
) -> Result<Evaluation, EvalError> {
    let lab = &ws.lab;
    let m = &batch.manifest;
    let header = Header {
        report: m.report.clone(),
        revision,
        batch: m.batch.clone(),
        client_name: m.client_name.clone(),
        client_address: m.client_address.clone(),
        client_contact: m.client_contact.clone(),
        received_on: m.received_on,
        issued_at: run.issued_at,
        utc_offset: lab.utc_offset,
        tool_version: run.tool_version.clone(),
        lab_name: lab.name.clone(),
        lab_address: lab.address.clone(),
        accreditation: lab.accreditation.clone(),
        signatory: lab.signatory.clone(),
        signatory_role: lab.signatory_role.clone(),
        authorised_by: String::new(),
        review: None,
        decision_rule: m.decision_rule.unwrap_or(lab.decision_rule),
        detection_power: lab.detection_power,
        compare: lab.compare,
        significant_figures: lab.significant_figures,
        page_size: lab.page_size,
        methods: Vec::new(),
        verification_code: None,
        replaces: None,
    };
    // First the QC rows alone, so the gathering knows which parents to keep.
    let mut qc = Vec::new();
    each_result_in(&batch.results_file, batch.source(), Pass::Qc, |row| {
        qc.push(row);
        Ok::<(), EvalError>(())
    })?;
    // Should this pass have stopped early, the checking pass below fails on
    // the same row, so when it succeeds these are all the QC rows.
    let mut gather = crate::qc::Gather::new(&qc);
    let mut problems = Vec::new();
    let mut limits_used: std::collections::BTreeMap<u64, crate::read::LimitRow> =
        Default::default();
    let mut specs_used: std::collections::BTreeMap<u64, crate::read::SpecRow> = Default::default();
    let mut methods: Vec<Rc<str>> = Vec::new();
    let mut ld_factors: Vec<(u32, Option<f64>)> = Vec::new();
    let mut read = 0u64;
    let mut lookups = resolve::Lookups::default();
    each_result_in(&batch.results_file, batch.source(), Pass::Check, |row| {
        read += 1;
        if read % TICK_ROWS == 0 {
            rows_read(read);
        }
        if row.kind != Kind::Sample {
            return Ok(());
        }
        match resolve::resolve_with(&row, ws, &mut lookups)? {
            Resolution::Blocked(p) => problems.push(p),
            Resolution::Resolved(r) => {
                limits_used
                    .entry(r.limits.line)
                    .or_insert_with(|| r.limits.clone());
                if let Some(spec) = &r.spec {
                    specs_used
                        .entry(spec.row.line)
                        .or_insert_with(|| spec.row.clone());
                }
                if r.over_range {
                    problems.push(over_range_problem(&row, &r));
                }
                if !methods.iter().any(|m| **m == *row.method) {
                    methods.push(row.method.clone());
                }
                let out = classify_row(row, &r, &header, lab.not_detected_style, &mut ld_factors)?;
                gather.sample(&out);
                rows.push(&out)?;
            }
        }
        Ok::<(), EvalError>(())
    })?;
    let plan = crate::qc::evaluate(ws, &batch.results_file, &qc, &gather, &problems)?;
    let mut header = header;
    header.methods = methods_used(&lab.methods, &methods);
    Ok(Evaluation {
        header,
        qc,
        plan,
        problems,
        limits_used: limits_used.into_values().collect(),
        specs_used: specs_used.into_values().collect(),
        rows,
    })
}

/// An error of evaluation, or of whatever took the row.
enum RowError<E> {
    Eval(EvalError),
    Each(E),
}

impl<E> From<EvalError> for RowError<E> {
    fn from(e: EvalError) -> Self {
        RowError::Eval(e)
    }
}

impl<E> From<crate::read::ReadError> for RowError<E> {
    fn from(e: crate::read::ReadError) -> Self {
        RowError::Eval(e.into())
    }
}

impl Evaluation {
    pub fn header(&self) -> &Header {
        &self.header
    }

    /// The number of client results.
    pub fn count(&self) -> usize {
        self.rows.len()
    }

    /// Hands each client result, classified and qualified, to `each` in
    /// file order. May be run more than once (a table sizes its columns,
    /// then prints); `finish` reflects the last run.
    pub fn each_row<E: From<EvalError>>(
        &mut self,
        mut each: impl FnMut(&Header, &ReportRow) -> Result<(), E>,
    ) -> Result<(), E> {
        self.plan.restart();
        let (header, plan) = (&self.header, &mut self.plan);
        let mut index = 0usize;
        self.rows
            .replay(|out: &mut ReportRow| -> Result<(), RowError<E>> {
                plan.qualify(index, out);
                index += 1;
                each(header, out).map_err(RowError::Each)
            })
            .map_err(|e| match e {
                RowError::Eval(e) => E::from(e),
                RowError::Each(e) => e,
            })
    }

    /// The report model, without its rows (which `each_row` handed on).
    pub fn finish(self) -> Report {
        let evaluated = self.plan.finish();
        let mut problems = self.problems;
        problems.extend(evaluated.problems);
        Report {
            header: self.header,
            rows: Vec::new(),
            qc: self.qc,
            qc_checks: evaluated.checks,
            qc_exception: None,
            problems,
            limits_used: self.limits_used,
            specs_used: self.specs_used,
        }
    }
}

fn classify_row(
    row: ResultRow,
    r: &resolve::Resolved<'_>,
    header: &Header,
    nd_style: NotDetectedStyle,
    ld_factors: &mut Vec<(u32, Option<f64>)>,
) -> Result<ReportRow, EvalError> {
    let sig = header.significant_figures;
    let state = classify::state(r.value, r.mdl, r.loq, r.over_range);
    let rounded = round_sig(r.value, sig);
    let (mdl, loq) = (round_sig(r.mdl, sig), round_sig(r.loq, sig));
    let mut verdict = verdict_of(&row, r, header, state, (rounded, mdl, loq))?;
    let (ld, beta_at_limit, beta) = power_at_limit(r, state, header, ld_factors);
    let p = header.detection_power;
    let weak_pass = verdict == Some(classify::Verdict::Pass) && beta.is_some_and(|b| b > p.beta);
    let mut qualifiers = Vec::new();
    if weak_pass {
        match p.weak_pass {
            crate::read::WeakPass::Qualify => qualifiers.push(LOW_POWER.to_string()),
            crate::read::WeakPass::Inconclusive => verdict = Some(classify::Verdict::Inconclusive),
        }
    }
    let uncertainty = match (state, row.uncertainty_pct) {
        (State::Quantified, Some(pct)) => Some(classify::reported_uncertainty(
            classify::expanded_uncertainty(r.value, pct).ok_or_else(|| EvalError::Overflow {
                at: row.loc("uncertainty_pct"),
            })?,
            sig,
        )),
        _ => None,
    };
    let text = |prefix: &str, d: rust_decimal::Decimal| {
        let mut s = String::with_capacity(prefix.len() + 12);
        s.push_str(prefix);
        crate::numeric::push_decimal(&mut s, d);
        s
    };
    let (reported, value) = match state {
        State::NotDetected => (
            match nd_style {
                NotDetectedStyle::LessThan => text("< ", mdl),
                NotDetectedStyle::Nd => "ND".to_string(),
            },
            None,
        ),
        State::OverRange => (
            match r.upper {
                Some(u) => text("> ", round_sig(u, sig)),
                None => "over range".to_string(),
            },
            None,
        ),
        State::DetectedBelowLoq | State::Quantified => (text("", rounded), Some(rounded)),
    };
    Ok(ReportRow {
        line: row.line,
        lab_id: row.lab_id,
        client_id: row.client_id,
        description: row.description,
        analyte: row.analyte,
        matrix: row.matrix,
        method: row.method,
        analyzed_on: row.analyzed_on,
        reported,
        value,
        value_unrounded: r.value,
        unit: r.unit,
        state,
        mdl,
        loq,
        mdl_unrounded: r.mdl,
        loq_unrounded: r.loq,
        dilution: row.dilution,
        spec: r.spec.as_ref().map(|s| s.row.spec.clone()),
        spec_limit: r.spec.as_ref().map(|s| s.limit),
        spec_citation: r
            .spec
            .as_ref()
            .map(|s| s.row.citation.clone())
            .unwrap_or_else(|| Rc::from("")),
        verdict,
        uncertainty_pct: row.uncertainty_pct,
        uncertainty,
        ld,
        beta_at_limit,
        weak_pass,
        qualifiers,
        limits_row: r.limits.reference.clone(),
    })
}

/// The verdict against the spec in force, from the unrounded or the
/// reported numbers as the lab compares; None without a spec.
fn verdict_of(
    row: &ResultRow,
    r: &resolve::Resolved<'_>,
    header: &Header,
    state: State,
    (rounded, mdl, loq): (
        rust_decimal::Decimal,
        rust_decimal::Decimal,
        rust_decimal::Decimal,
    ),
) -> Result<Option<classify::Verdict>, EvalError> {
    Ok(match &r.spec {
        None => None,
        Some(spec) => {
            let reported = header.compare == Compare::Reported;
            let c = Comparison {
                state,
                value: if reported { rounded } else { r.value },
                mdl: if reported { mdl } else { r.mdl },
                loq: if reported { loq } else { r.loq },
                upper: r.upper,
                limit: spec.limit,
                uncertainty_pct: row.uncertainty_pct,
            };
            Some(
                classify::verdict(&c, header.decision_rule).map_err(|e| match e {
                    VerdictError::NoUncertainty => EvalError::NoUncertainty {
                        at: row.loc("uncertainty_pct"),
                    },
                    VerdictError::Overflow => EvalError::Overflow {
                        at: row.loc("reading"),
                    },
                })?,
            )
        }
    })
}

/// A reading above the calibrated range holds the batch until diluted and
/// re-analysed.
fn over_range_problem(row: &ResultRow, r: &resolve::Resolved<'_>) -> Problem {
    Problem {
        at: row.loc("reading"),
        lab_id: row.lab_id.clone(),
        analyte: row.analyte.clone(),
        kind: ProblemKind::OverRange,
        message: format!(
            "reading {} {} is above the calibrated range (highest standard {}, {})",
            row.reading,
            row.reading_unit,
            r.limits
                .upper_range
                .map(|(v, u)| format!("{} {u}", crate::numeric::plain(v)))
                .unwrap_or_default(),
            r.limits.reference.clone()
        ),
        hint: "dilute the digest into the calibrated range and re-analyse".into(),
    }
}

/// Each method the results use, in first-use order, with its description
/// from lab.toml.
fn methods_used(
    lab_methods: &std::collections::BTreeMap<String, String>,
    used: &[Rc<str>],
) -> Vec<(String, String)> {
    used.iter()
        .map(|m| {
            let description = lab_methods
                .iter()
                .find(|(id, _)| id.eq_ignore_ascii_case(m))
                .map(|(_, d)| d.clone())
                .unwrap_or_default();
            (m.to_string(), description)
        })
        .collect()
}

/// L_D and β at the limit for a not-detected or below-LOQ result with a
/// limit whose register row keeps the study's spike SD (Currie; see
/// `power`): (L_D as printed, β as printed, β unrounded for the verdict).
type Power = (
    Option<rust_decimal::Decimal>,
    Option<rust_decimal::Decimal>,
    Option<f64>,
);

fn power_at_limit(
    r: &resolve::Resolved<'_>,
    state: State,
    header: &Header,
    ld_factors: &mut Vec<(u32, Option<f64>)>,
) -> Power {
    let (Some((sd, n)), Some(spec)) = (r.spike_sd, &r.spec) else {
        return (None, None, None);
    };
    if !matches!(state, State::NotDetected | State::DetectedBelowLoq) {
        return (None, None, None);
    }
    let f = |d: rust_decimal::Decimal| d.to_string().parse::<f64>().ok();
    let (Some(sd), Some(mdl), Some(limit)) = (f(sd), f(r.mdl), f(spec.limit)) else {
        return (None, None, None);
    };
    let p = header.detection_power;
    let factor = match ld_factors.iter().find(|(k, _)| *k == n) {
        Some((_, f)) => *f,
        None => {
            let f = crate::power::ld_factor(n, p.alpha, p.beta);
            ld_factors.push((n, f));
            f
        }
    };
    let ld = factor
        .filter(|_| sd > 0.0)
        .and_then(|k| crate::numeric::decimal_of(k * sd))
        .map(|d| round_sig(d, header.significant_figures));
    let beta = crate::power::beta_at_limit(mdl, limit, sd, n);
    // Four decimal places: "0.0000" is below 0.00005 (a decimal cannot hold
    // the far tail, and no study supports more digits).
    let printed =
        beta.and_then(|b| crate::numeric::decimal_of(b.max(0.0).max(1e-12)).map(|d| d.round_dp(4)));
    (ld, printed, beta)
}
