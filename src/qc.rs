//! Phase 3b: batch QC. Evaluates method blanks, LCSs, matrix spikes,
//! duplicates and calibration checks against the lab's windows, qualifies
//! client results, and says what holds the batch.

use crate::classify::State;
use crate::evaluated::{EvalError, ReportRow};
use crate::numeric::{plain, round_sig};
use crate::problem::{Problem, ProblemKind};
use crate::read::qc_config::{Criteria, QcConfig};
use crate::read::{InForce, Kind, Loc, ReadError, ResultRow, Workspace};
use crate::resolve::{self, Resolution};
use crate::units::{Dimension, Unit, convert};
use rust_decimal::Decimal;
use std::collections::HashMap;
use std::rc::Rc;

pub const BLANK_AFFECTED: &str = "blank-affected";
pub const MATRIX_EFFECT: &str = "matrix-effect";
pub const IMPRECISE: &str = "imprecise";
pub const QC_EXCEPTION: &str = "qc-exception";

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    Pass,
    Fail,
    NotEvaluated,
    Missing,
}

impl Outcome {
    pub fn name(self) -> &'static str {
        match self {
            Outcome::Pass => "pass",
            Outcome::Fail => "fail",
            Outcome::NotEvaluated => "not evaluated",
            Outcome::Missing => "missing",
        }
    }
}

/// One QC check as a certificate's QC summary states it.
#[derive(Debug, Clone, PartialEq)]
pub struct QcCheck {
    pub check: &'static str,
    pub analyte: Rc<str>,
    pub method: Rc<str>,
    /// The rows the check uses, e.g. "MS-1 on P01".
    pub rows: String,
    /// The number judged, with its unit or %.
    pub value: String,
    pub window: String,
    pub outcome: Outcome,
    /// What followed: results qualified or held.
    pub note: String,
    /// True when this check holds the batch.
    pub blocking: bool,
    /// Indices into the report rows that this check qualifies or holds.
    pub affected: Vec<usize>,
}

fn pct(x: Decimal) -> String {
    format!("{} %", round_sig(x, 3))
}

fn window(w: (Decimal, Decimal)) -> String {
    format!("{}–{} %", plain(w.0), plain(w.1))
}

fn within(x: Decimal, w: (Decimal, Decimal)) -> bool {
    // Both edges pass (common practice, no source).
    x >= w.0 && x <= w.1
}

fn lower(s: &str) -> String {
    s.trim().to_lowercase()
}

/// Case-insensitive equality without allocating for ASCII names.
fn same(a: &str, b: &str) -> bool {
    a.eq_ignore_ascii_case(b)
        || (!(a.is_ascii() && b.is_ascii()) && a.to_lowercase() == b.to_lowercase())
}

/// A QC row's value and limits in its own unit.
struct Measured {
    value: Decimal,
    mdl: Decimal,
    loq: Decimal,
    unit: Unit,
}

fn required_spike(row: &ResultRow) -> Result<Decimal, EvalError> {
    match row.spike_added {
        Some(s) if s > Decimal::ZERO => Ok(s),
        Some(s) => Err(EvalError::Read(ReadError::field(
            row.loc("spike_added"),
            format!("{s} must be greater than zero"),
            "give the amount added (or the true value of a CCV) in the result's unit",
        ))),
        None => Err(EvalError::Read(ReadError::field(
            row.loc("spike_added"),
            format!("empty, but a {} needs the amount added", row.kind.name()),
            "give the amount added (or the true value of a CCV) in the result's unit after preparation",
        ))),
    }
}

fn overflow(row: &ResultRow) -> EvalError {
    EvalError::Overflow {
        at: row.loc("reading"),
    }
}

/// Instrument-level value and LOQ for calibration checks (CCV, CCB), which
/// are read directly and never prepared.
fn reading_level(ws: &Workspace, row: &ResultRow) -> Result<Option<Measured>, EvalError> {
    let limits = match ws
        .register
        .in_force(&row.analyte, &row.matrix, &row.method, row.analyzed_on)
    {
        InForce::Row(r) => r,
        _ => return Ok(None),
    };
    let value = row
        .reading
        .checked_mul(row.dilution)
        .ok_or_else(|| overflow(row))?;
    let to_reading = |x: Decimal| -> Option<Decimal> {
        match limits.unit.dimension() {
            Dimension::MassConcentration => convert(x, limits.unit, row.reading_unit),
            Dimension::MassFraction => {
                // mg/kg × g / mL × 1000 = µg/L at the nominal preparation.
                let (m, v) = (limits.nominal_mass_g?, limits.nominal_volume_ml?);
                let in_mg_kg = convert(x, limits.unit, Unit::MgPerKg)?;
                let ug_l = in_mg_kg
                    .checked_mul(m)?
                    .checked_mul(Decimal::ONE_THOUSAND)?
                    .checked_div(v)?;
                convert(ug_l, Unit::UgPerL, row.reading_unit)
            }
        }
    };
    let (Some(mdl), Some(loq)) = (to_reading(limits.mdl), to_reading(limits.loq)) else {
        return Err(EvalError::Read(ReadError::field(
            Loc::new(&limits.file, limits.line, "unit"),
            format!(
                "the register row's {} limits cannot be put at reading level for {} {}",
                limits.unit,
                row.kind.name(),
                row.lab_id
            ),
            "give the register row nominal_mass_g and nominal_volume_ml, or limits in a reading unit",
        )));
    };
    Ok(Some(Measured {
        value,
        mdl,
        loq,
        unit: row.reading_unit,
    }))
}

fn prepared(ws: &Workspace, row: &ResultRow) -> Result<Option<Measured>, EvalError> {
    match resolve::resolve(row, ws)? {
        Resolution::Resolved(r) => Ok(Some(Measured {
            value: r.value,
            mdl: r.mdl,
            loq: r.loq,
            unit: r.unit,
        })),
        Resolution::Blocked(_) => Ok(None),
    }
}

/// RPD when both results are at least `factor` × LOQ, else the absolute
/// difference against the LOQ. Returns (check name, value text, window text, pass).
pub fn precision(
    a: Decimal,
    b: Decimal,
    loq: Decimal,
    unit: Unit,
    c: &Criteria,
) -> Option<(&'static str, String, String, bool)> {
    let floor = loq.checked_mul(c.rpd_min_loq_factor)?;
    let diff = a.checked_sub(b)?.abs();
    if a >= floor && b >= floor {
        let mean = a.checked_add(b)?.checked_div(Decimal::TWO)?;
        let rpd = diff.checked_mul(Decimal::ONE_HUNDRED)?.checked_div(mean)?;
        Some((
            "RPD",
            pct(rpd),
            format!("≤ {} %", plain(c.rpd_max_pct)),
            rpd <= c.rpd_max_pct,
        ))
    } else {
        Some((
            "difference",
            format!("{} {unit}", round_sig(diff, 3)),
            format!("≤ LOQ {} {unit}", round_sig(loq, 3)),
            diff <= loq,
        ))
    }
}

fn unit_clash(row: &ResultRow, qc_unit: Unit, sample_unit: Unit) -> EvalError {
    EvalError::Read(ReadError::field(
        row.loc("mass_g"),
        format!(
            "{} {} is in {qc_unit} but the samples it checks are in {sample_unit}",
            row.kind.name(),
            row.lab_id
        ),
        "prepare the QC row like its samples: give mass_g and volume_ml (the nominal ones for a blank or LCS)",
    ))
}

/// A matrix spike and its duplicate on one parent: (value, lab id) each.
#[derive(Default)]
struct SpikePair {
    ms: Option<(Decimal, String)>,
    msd: Option<(Decimal, String)>,
    loq: Decimal,
}

/// A check whose failure qualifies one parent sample.
struct ParentCheck<'a> {
    check: &'static str,
    analyte: &'a Rc<str>,
    method: &'a Rc<str>,
    rows: String,
    value: String,
    window: String,
    pass: bool,
    qualifier: &'static str,
}

pub struct QcResult {
    pub checks: Vec<QcCheck>,
    pub problems: Vec<Problem>,
}

/// A spike's or duplicate's parent sample, as the QC rules need it.
#[derive(Debug, Clone)]
struct Parent {
    index: usize,
    lab_id: String,
    analyte: Rc<str>,
    method: Rc<str>,
    unit: Unit,
    value: Decimal,
    loq: Decimal,
    line: u64,
}

/// The samples of one analyte and method (names compared without case).
#[derive(Debug, Clone)]
struct Group {
    analyte: Rc<str>,
    method: Rc<str>,
    lab_id: String,
    count: usize,
}

/// What one method blank's samples (its analyte, method and matrix) add up to.
#[derive(Debug, Clone, Default)]
struct BlankGroup {
    /// The units met, in first-met order.
    units: Vec<Unit>,
    lowest_limit: Option<Decimal>,
    lowest_result: Option<Decimal>,
}

/// A method blank's analyte, method and matrix, and what its samples add up to.
type BlankKey = (Rc<str>, Rc<str>, Rc<str>, BlankGroup);

/// What the QC rules need of the client results, gathered in one pass over
/// them, so the rules never hold the results themselves: group counts, the
/// aggregates of each method blank's samples, and the parents that spikes
/// and duplicates name.
pub struct Gather {
    groups: Vec<Group>,
    /// One per method-blank QC row, in QC row order.
    blanks: Vec<BlankKey>,
    /// Parents wanted, by lab id: (lower-case analyte, the last sample met).
    parents: HashMap<String, Vec<(String, Option<Parent>)>>,
    count: usize,
}

impl Gather {
    /// Ready for the samples of a batch with these QC rows.
    pub fn new(qc_rows: &[ResultRow]) -> Gather {
        let mut parents: HashMap<String, Vec<(String, Option<Parent>)>> = HashMap::new();
        for q in qc_rows {
            if let (Kind::MatrixSpike | Kind::MatrixSpikeDup | Kind::Duplicate, Some(pid)) =
                (q.kind, &q.parent_id)
            {
                let wanted = parents.entry(pid.clone()).or_default();
                let a = lower(&q.analyte);
                if !wanted.iter().any(|(x, _)| *x == a) {
                    wanted.push((a, None));
                }
            }
        }
        Gather {
            groups: Vec::new(),
            blanks: qc_rows
                .iter()
                .filter(|q| q.kind == Kind::MethodBlank)
                .map(|q| {
                    (
                        q.analyte.clone(),
                        q.method.clone(),
                        q.matrix.clone(),
                        BlankGroup::default(),
                    )
                })
                .collect(),
            parents,
            count: 0,
        }
    }

    /// Takes in the next classified client result (not yet qualified).
    pub fn sample(&mut self, r: &ReportRow) {
        let index = self.count;
        self.count += 1;
        match self
            .groups
            .iter_mut()
            .find(|g| same_name(&g.analyte, &r.analyte) && same_name(&g.method, &r.method))
        {
            Some(g) => g.count += 1,
            None => self.groups.push(Group {
                analyte: r.analyte.clone(),
                method: r.method.clone(),
                lab_id: r.lab_id.clone(),
                count: 1,
            }),
        }
        for (analyte, method, matrix, b) in &mut self.blanks {
            if !(same_name(analyte, &r.analyte)
                && same_name(method, &r.method)
                && same_name(matrix, &r.matrix))
            {
                continue;
            }
            if !b.units.contains(&r.unit) {
                b.units.push(r.unit);
            }
            if let Some(l) = r.spec_limit {
                b.lowest_limit = Some(b.lowest_limit.map_or(l, |x| x.min(l)));
            }
            if matches!(r.state, State::DetectedBelowLoq | State::Quantified) {
                let v = r.value_unrounded;
                b.lowest_result = Some(b.lowest_result.map_or(v, |x| x.min(v)));
            }
        }
        if let Some(wanted) = self.parents.get_mut(r.lab_id.as_str()) {
            let a = lower(&r.analyte);
            if let Some((_, slot)) = wanted.iter_mut().find(|(x, _)| *x == a) {
                *slot = Some(Parent {
                    index,
                    lab_id: r.lab_id.clone(),
                    analyte: r.analyte.clone(),
                    method: r.method.clone(),
                    unit: r.unit,
                    value: r.value_unrounded,
                    loq: r.loq_unrounded,
                    line: r.line,
                });
            }
        }
    }

    fn group(&self, analyte: &str, method: &str) -> Option<&Group> {
        self.groups
            .iter()
            .find(|g| same(&g.analyte, analyte) && same(&g.method, method))
    }

    fn parent(&self, lab_id: &str, analyte: &str) -> Option<&Parent> {
        let a = lower(analyte);
        self.parents
            .get(lab_id)?
            .iter()
            .find(|(x, _)| *x == a)?
            .1
            .as_ref()
    }
}

/// Interned names are usually the same allocation: skip the comparison then.
fn same_name(a: &Rc<str>, b: &Rc<str>) -> bool {
    Rc::ptr_eq(a, b) || same(a, b)
}

/// What a failed check does to the client results, applied to each as it
/// is written.
#[derive(Debug, Clone)]
enum Rule {
    /// A method blank: detected results below `ceiling` are qualified.
    Blank {
        check: usize,
        analyte: Rc<str>,
        method: Rc<str>,
        matrix: Rc<str>,
        ceiling: Decimal,
        factor: Decimal,
    },
    /// Every result of the analyte and method is held (LCS, required QC).
    Group {
        check: usize,
        analyte: Rc<str>,
        method: Rc<str>,
    },
    /// One parent sample is qualified.
    Parent {
        check: usize,
        index: usize,
        qualifier: &'static str,
    },
    /// The results a failed calibration check brackets are held.
    Bracket {
        check: usize,
        problem: usize,
        analyte: Rc<str>,
        method: Rc<str>,
        after_pass: Option<(chrono::NaiveDate, u64)>,
        before_pass: Option<(chrono::NaiveDate, u64)>,
    },
}

/// The QC checks as judged, and the rules that qualify or hold results;
/// `qualify` applies them row by row, `finish` words what they found.
#[derive(Debug, Clone)]
pub struct Plan {
    checks: Vec<QcCheck>,
    problems: Vec<Problem>,
    rules: Vec<Rule>,
    /// Lab ids each rule met, for the notes that list them.
    ids: Vec<Vec<String>>,
}

impl Plan {
    /// Forgets what an earlier pass over the results found.
    pub fn restart(&mut self) {
        for c in &mut self.checks {
            c.affected.clear();
        }
        for ids in &mut self.ids {
            ids.clear();
        }
    }

    /// Applies the rules to client result `index` (in file order).
    pub fn qualify(&mut self, index: usize, r: &mut ReportRow) {
        for (k, rule) in self.rules.iter().enumerate() {
            let (check, qualifier) = match rule {
                Rule::Blank {
                    check,
                    analyte,
                    method,
                    matrix,
                    ceiling,
                    ..
                } => {
                    let hit = same_name(analyte, &r.analyte)
                        && same_name(method, &r.method)
                        && same_name(matrix, &r.matrix)
                        && matches!(r.state, State::DetectedBelowLoq | State::Quantified)
                        && r.value_unrounded < *ceiling;
                    if !hit {
                        continue;
                    }
                    (*check, Some(BLANK_AFFECTED))
                }
                Rule::Group {
                    check,
                    analyte,
                    method,
                } => {
                    if !(same_name(analyte, &r.analyte) && same_name(method, &r.method)) {
                        continue;
                    }
                    (*check, None)
                }
                Rule::Parent {
                    check,
                    index: p,
                    qualifier,
                } => {
                    if *p != index {
                        continue;
                    }
                    (*check, Some(*qualifier))
                }
                Rule::Bracket {
                    check,
                    analyte,
                    method,
                    after_pass,
                    before_pass,
                    ..
                } => {
                    let t = (r.analyzed_on, r.line);
                    let hit = same_name(analyte, &r.analyte)
                        && same_name(method, &r.method)
                        && after_pass.is_none_or(|x| t > x)
                        && before_pass.is_none_or(|x| t < x);
                    if !hit {
                        continue;
                    }
                    (*check, None)
                }
            };
            self.checks[check].affected.push(index);
            if matches!(rule, Rule::Blank { .. } | Rule::Bracket { .. }) {
                self.ids[k].push(r.lab_id.clone());
            }
            if let Some(q) = qualifier {
                if !r.qualifiers.iter().any(|x| x == q) {
                    r.qualifiers.push(q.to_string());
                }
            }
        }
    }

    /// The checks and problems, with the notes that name the results the
    /// last pass met.
    pub fn finish(self) -> QcResult {
        let Plan {
            mut checks,
            mut problems,
            rules,
            ids,
        } = self;
        for (rule, ids) in rules.iter().zip(ids) {
            match rule {
                Rule::Blank { check, factor, .. } => {
                    checks[*check].note = if ids.is_empty() {
                        format!("no result below {} × the blank", plain(*factor))
                    } else {
                        format!("{BLANK_AFFECTED}: {}", ids.join(", "))
                    };
                }
                Rule::Bracket { check, problem, .. } => {
                    let joined = ids.join(", ");
                    let c = &mut checks[*check];
                    problems[*problem].message = format!(
                        "{} {} is outside {}; results run since the last passing check are held: {}",
                        c.check,
                        c.value,
                        c.window,
                        if ids.is_empty() { "none" } else { &joined }
                    );
                    c.blocking = !ids.is_empty();
                    c.note = if ids.is_empty() {
                        "no results bracketed".into()
                    } else {
                        format!("held: {joined}")
                    };
                }
                Rule::Group { .. } | Rule::Parent { .. } => {}
            }
        }
        QcResult { checks, problems }
    }
}

/// What every check family reads: the workspace, the QC rows and what was
/// gathered from the classified client results (not yet qualified).
struct Batch<'a> {
    ws: &'a Workspace,
    config: &'a QcConfig,
    results_file: &'a str,
    qc_rows: &'a [ResultRow],
    gathered: &'a Gather,
    /// Samples that could not be evaluated (no limits or spec in force):
    /// their own problem already holds the batch.
    blocked: &'a [Problem],
}

impl Batch<'_> {
    /// The parent sample of a spike or duplicate; None when the parent is
    /// itself blocked, so the check cannot be made (and need not be: the
    /// parent's problem holds the batch).
    fn parent_of(&self, q: &ResultRow) -> Result<Option<&Parent>, EvalError> {
        let Some(pid) = &q.parent_id else {
            return Err(EvalError::Read(ReadError::field(
                q.loc("parent_id"),
                format!(
                    "empty, but a {} needs the sample it was made from",
                    q.kind.name()
                ),
                "give the lab id of the parent sample",
            )));
        };
        if let Some(p) = self.gathered.parent(pid, &q.analyte) {
            return Ok(Some(p));
        }
        if self
            .blocked
            .iter()
            .any(|p| p.lab_id == *pid && same(&p.analyte, &q.analyte))
        {
            return Ok(None);
        }
        Err(EvalError::Read(ReadError::field(
            q.loc("parent_id"),
            format!("{pid} has no {} sample result in this batch", q.analyte),
            "the parent must be a sample row of the same analyte in this results file",
        )))
    }
}

/// What the check families find; the rules apply as results are written.
#[derive(Default)]
struct Found {
    checks: Vec<QcCheck>,
    problems: Vec<Problem>,
    rules: Vec<Rule>,
}

impl Found {
    /// A check whose failure qualifies one parent sample.
    fn on_parent(&mut self, c: ParentCheck<'_>, parent: &Parent) {
        if !c.pass {
            self.rules.push(Rule::Parent {
                check: self.checks.len(),
                index: parent.index,
                qualifier: c.qualifier,
            });
        }
        self.checks.push(QcCheck {
            check: c.check,
            analyte: c.analyte.clone(),
            method: c.method.clone(),
            rows: c.rows,
            value: c.value,
            window: c.window,
            outcome: if c.pass { Outcome::Pass } else { Outcome::Fail },
            note: if c.pass {
                String::new()
            } else {
                format!("{}: {}", c.qualifier, parent.lab_id)
            },
            blocking: false,
            affected: Vec::new(),
        });
    }
}

fn no_limits(q: &ResultRow) -> Problem {
    Problem {
        at: q.loc("analyte"),
        lab_id: q.lab_id.clone(),
        analyte: q.analyte.clone(),
        kind: ProblemKind::Qc,
        message: format!(
            "{} cannot be evaluated: no limits in force for {} / {} / {}",
            q.kind.name(),
            q.analyte,
            q.matrix,
            q.method
        ),
        hint: "add the register row, or correct the QC row's matrix or method".into(),
    }
}

/// Runs every check family over the batch: the checks as judged, and the
/// plan that qualifies the client results as they are written.
pub fn evaluate(
    ws: &Workspace,
    results_file: &str,
    qc_rows: &[ResultRow],
    gathered: &Gather,
    blocked: &[Problem],
) -> Result<Plan, EvalError> {
    let b = Batch {
        ws,
        config: &ws.lab.qc,
        results_file,
        qc_rows,
        gathered,
        blocked,
    };
    let mut out = Found::default();
    method_blanks(&b, &mut out)?;
    lcs(&b, &mut out)?;
    let spiked = matrix_spikes(&b, &mut out)?;
    spike_pairs(&b, &mut out, spiked)?;
    duplicates(&b, &mut out)?;
    calibration(&b, &mut out)?;
    required(&b, &mut out)?;
    let ids = vec![Vec::new(); out.rules.len()];
    Ok(Plan {
        checks: out.checks,
        problems: out.problems,
        rules: out.rules,
        ids,
    })
}

/// The method blank's threshold and its window text: the highest of the
/// MDL, a percentage of the lowest limit and a percentage of the lowest
/// detected result governs. None on overflow.
fn blank_threshold(
    m: &Measured,
    lowest_limit: Option<Decimal>,
    lowest_result: Option<Decimal>,
    c: &Criteria,
) -> Option<(Decimal, String)> {
    let mut threshold = m.mdl;
    let mut basis = "(MDL)".to_string();
    for (base, pct, name) in [
        (lowest_limit, c.blank_limit_pct, "of the limit"),
        (lowest_result, c.blank_sample_pct, "of the lowest result"),
    ] {
        let Some(base) = base else { continue };
        let t = base.checked_mul(pct)?.checked_div(Decimal::ONE_HUNDRED)?;
        if t > threshold {
            threshold = t;
            basis = format!("({} % {name})", plain(pct));
        }
    }
    let window = format!("< {} {} {basis}", round_sig(threshold, 3), m.unit);
    Some((threshold, window))
}

/// Method blanks: associated with samples of the same analyte, method and matrix.
fn method_blanks(b: &Batch<'_>, out: &mut Found) -> Result<(), EvalError> {
    let blanks = b.qc_rows.iter().filter(|q| q.kind == Kind::MethodBlank);
    for (q, (_, _, _, group)) in blanks.zip(&b.gathered.blanks) {
        let c = b.config.for_method(&q.method);
        let Some(m) = prepared(b.ws, q)? else {
            out.problems.push(no_limits(q));
            continue;
        };
        if let Some(&u) = group.units.iter().find(|&&u| u != m.unit) {
            return Err(unit_clash(q, m.unit, u));
        }
        let (threshold, window) = blank_threshold(&m, group.lowest_limit, group.lowest_result, c)
            .ok_or_else(|| overflow(q))?;
        let pass = m.value < threshold;
        if !pass {
            let ceiling = m
                .value
                .checked_mul(c.blank_affects_below_factor)
                .ok_or_else(|| overflow(q))?;
            out.rules.push(Rule::Blank {
                check: out.checks.len(),
                analyte: q.analyte.clone(),
                method: q.method.clone(),
                matrix: q.matrix.clone(),
                ceiling,
                factor: c.blank_affects_below_factor,
            });
        }
        out.checks.push(QcCheck {
            check: "method blank",
            analyte: q.analyte.clone(),
            method: q.method.clone(),
            rows: q.lab_id.clone(),
            value: format!("{} {}", round_sig(m.value, 3), m.unit),
            window,
            outcome: if pass { Outcome::Pass } else { Outcome::Fail },
            // A failed blank's note names the results it met (`Plan::finish`).
            note: String::new(),
            blocking: false,
            affected: Vec::new(),
        });
    }

    Ok(())
}

/// LCS: a failed recovery holds every result of that analyte and method.
fn lcs(b: &Batch<'_>, out: &mut Found) -> Result<(), EvalError> {
    for q in b.qc_rows.iter().filter(|q| q.kind == Kind::Lcs) {
        let c = b.config.for_method(&q.method);
        let spike = required_spike(q)?;
        let Some(m) = prepared(b.ws, q)? else {
            out.problems.push(no_limits(q));
            continue;
        };
        let recovery = m
            .value
            .checked_mul(Decimal::ONE_HUNDRED)
            .and_then(|x| x.checked_div(spike))
            .ok_or_else(|| overflow(q))?;
        let pass = within(recovery, c.lcs_recovery_pct);
        if !pass {
            let held = b
                .gathered
                .group(&q.analyte, &q.method)
                .map_or(0, |g| g.count);
            out.problems.push(Problem {
                at: q.loc("reading"),
                lab_id: q.lab_id.clone(),
                analyte: q.analyte.clone(),
                kind: ProblemKind::Qc,
                message: format!(
                    "LCS recovery {} is outside {}; {held} result(s) of {} / {} are held",
                    pct(recovery),
                    window(c.lcs_recovery_pct),
                    q.analyte,
                    q.method
                ),
                hint: "re-prepare and re-analyse the batch for this analyte, or issue with --accept-qc \"REASON\"".into(),
            });
            out.rules.push(Rule::Group {
                check: out.checks.len(),
                analyte: q.analyte.clone(),
                method: q.method.clone(),
            });
        }
        out.checks.push(QcCheck {
            check: "LCS recovery",
            analyte: q.analyte.clone(),
            method: q.method.clone(),
            rows: q.lab_id.clone(),
            value: pct(recovery),
            window: window(c.lcs_recovery_pct),
            outcome: if pass { Outcome::Pass } else { Outcome::Fail },
            note: if pass {
                String::new()
            } else {
                "results held".into()
            },
            blocking: !pass,
            affected: Vec::new(),
        });
    }

    Ok(())
}

/// Matrix spikes and spike duplicates, each against its parent; gathers
/// the pairs for the precision check.
fn matrix_spikes(
    b: &Batch<'_>,
    out: &mut Found,
) -> Result<HashMap<(String, String), SpikePair>, EvalError> {
    let mut spiked: HashMap<(String, String), SpikePair> = HashMap::new();
    for q in b
        .qc_rows
        .iter()
        .filter(|q| matches!(q.kind, Kind::MatrixSpike | Kind::MatrixSpikeDup))
    {
        let c = b.config.for_method(&q.method);
        let spike = required_spike(q)?;
        let Some(p) = b.parent_of(q)? else {
            continue;
        };
        let Some(m) = prepared(b.ws, q)? else {
            out.problems.push(no_limits(q));
            continue;
        };
        if m.unit != p.unit {
            return Err(unit_clash(q, m.unit, p.unit));
        }
        let name = if q.kind == Kind::MatrixSpike {
            "matrix spike recovery"
        } else {
            "spike duplicate recovery"
        };
        let rows_text = format!("{} on {}", q.lab_id, p.lab_id);
        let entry = spiked
            .entry((p.lab_id.clone(), lower(&q.analyte)))
            .or_insert_with(|| SpikePair {
                loq: m.loq,
                ..Default::default()
            });
        if q.kind == Kind::MatrixSpike {
            entry.ms = Some((m.value, q.lab_id.clone()));
        } else {
            entry.msd = Some((m.value, q.lab_id.clone()));
        }
        let limit = spike
            .checked_mul(c.spike_parent_max_factor)
            .ok_or_else(|| overflow(q))?;
        if p.value > limit {
            out.checks.push(QcCheck {
                check: name,
                analyte: q.analyte.clone(),
                method: q.method.clone(),
                rows: rows_text,
                value: String::new(),
                window: window(c.spike_recovery_pct),
                outcome: Outcome::NotEvaluated,
                note: format!(
                    "sample is more than {} × the amount added",
                    plain(c.spike_parent_max_factor)
                ),
                blocking: false,
                affected: Vec::new(),
            });
            continue;
        }
        let recovery = m
            .value
            .checked_sub(p.value)
            .ok_or_else(|| overflow(q))?
            .checked_mul(Decimal::ONE_HUNDRED)
            .and_then(|x| x.checked_div(spike))
            .ok_or_else(|| overflow(q))?;
        let pass = within(recovery, c.spike_recovery_pct);
        out.on_parent(
            ParentCheck {
                check: name,
                analyte: &q.analyte,
                method: &q.method,
                rows: rows_text,
                value: pct(recovery),
                window: window(c.spike_recovery_pct),
                pass,
                qualifier: MATRIX_EFFECT,
            },
            p,
        );
    }
    Ok(spiked)
}

/// Precision between a matrix spike and its duplicate on one parent.
fn spike_pairs(
    b: &Batch<'_>,
    out: &mut Found,
    spiked: HashMap<(String, String), SpikePair>,
) -> Result<(), EvalError> {
    let mut pairs: Vec<_> = spiked.into_iter().collect();
    pairs.sort_by(|x, y| x.0.cmp(&y.0));
    for ((parent_id, analyte), pair) in pairs {
        let (Some((ms, ms_id)), Some((msd, msd_id))) = (pair.ms, pair.msd) else {
            continue;
        };
        let loq = pair.loq;
        let Some(p) = b.gathered.parent(&parent_id, &analyte) else {
            continue;
        };
        let c = b.config.for_method(&p.method);
        let Some((kind, value, win, pass)) = precision(ms, msd, loq, p.unit, c) else {
            return Err(EvalError::Overflow {
                at: Loc::new(b.results_file, p.line, "reading"),
            });
        };
        out.on_parent(
            ParentCheck {
                check: if kind == "RPD" {
                    "spike duplicate RPD"
                } else {
                    "spike duplicate difference"
                },
                analyte: &p.analyte,
                method: &p.method,
                rows: format!("{ms_id} / {msd_id}"),
                value,
                window: win,
                pass,
                qualifier: IMPRECISE,
            },
            p,
        );
    }

    Ok(())
}

/// Laboratory duplicates against their parents.
fn duplicates(b: &Batch<'_>, out: &mut Found) -> Result<(), EvalError> {
    for q in b.qc_rows.iter().filter(|q| q.kind == Kind::Duplicate) {
        let c = b.config.for_method(&q.method);
        let Some(parent) = b.parent_of(q)? else {
            continue;
        };
        let Some(m) = prepared(b.ws, q)? else {
            out.problems.push(no_limits(q));
            continue;
        };
        if m.unit != parent.unit {
            return Err(unit_clash(q, m.unit, parent.unit));
        }
        let (kind, value, win, pass) = precision(parent.value, m.value, parent.loq, parent.unit, c)
            .ok_or_else(|| overflow(q))?;
        out.on_parent(
            ParentCheck {
                check: if kind == "RPD" {
                    "duplicate RPD"
                } else {
                    "duplicate difference"
                },
                analyte: &q.analyte,
                method: &q.method,
                rows: format!("{} / {}", parent.lab_id, q.lab_id),
                value,
                window: win,
                pass,
                qualifier: IMPRECISE,
            },
            parent,
        );
    }

    Ok(())
}

/// Calibration checks, bracketing the samples of their analyte and method
/// in run order (analysis date, then file order): a failed check holds the
/// results run since the last passing check of its kind, up to the next.
fn calibration(b: &Batch<'_>, out: &mut Found) -> Result<(), EvalError> {
    let mut cal: Vec<(&ResultRow, bool, QcCheck)> = Vec::new();
    for q in b
        .qc_rows
        .iter()
        .filter(|q| matches!(q.kind, Kind::Ccv | Kind::Ccb))
    {
        match calibration_check(b, q)? {
            Some((pass, check)) => cal.push((q, pass, check)),
            None => out.problems.push(no_limits(q)),
        }
    }
    cal.sort_by_key(|(q, _, _)| (q.analyzed_on, q.line));
    let first = out.checks.len();
    for f in 0..cal.len() {
        if cal[f].1 {
            continue;
        }
        let (after_pass, before_pass) = bracket(&cal, f);
        let q = cal[f].0;
        out.rules.push(Rule::Bracket {
            check: first + f,
            problem: out.problems.len(),
            analyte: q.analyte.clone(),
            method: q.method.clone(),
            after_pass,
            before_pass,
        });
        // The message names the held results (`Plan::finish`).
        out.problems.push(Problem {
            at: q.loc("reading"),
            lab_id: q.lab_id.clone(),
            analyte: q.analyte.clone(),
            kind: ProblemKind::Qc,
            message: String::new(),
            hint: "recalibrate and re-analyse the bracketed results, or issue with --accept-qc \"REASON\"".into(),
        });
    }
    out.checks.extend(cal.into_iter().map(|(_, _, c)| c));
    Ok(())
}
/// One CCV or CCB judged at reading level; None when no limits are in force.
fn calibration_check(b: &Batch<'_>, q: &ResultRow) -> Result<Option<(bool, QcCheck)>, EvalError> {
    let c = b.config.for_method(&q.method);
    let Some(m) = reading_level(b.ws, q)? else {
        return Ok(None);
    };
    let (check, value, win, pass) = if q.kind == Kind::Ccv {
        let truth = required_spike(q)?;
        let recovery = m
            .value
            .checked_mul(Decimal::ONE_HUNDRED)
            .and_then(|x| x.checked_div(truth))
            .ok_or_else(|| overflow(q))?;
        (
            "CCV recovery",
            pct(recovery),
            window(c.ccv_recovery_pct),
            within(recovery, c.ccv_recovery_pct),
        )
    } else {
        (
            "CCB",
            format!("{} {}", round_sig(m.value, 3), m.unit),
            format!("< LOQ {} {}", round_sig(m.loq, 3), m.unit),
            m.value < m.loq,
        )
    };
    Ok(Some((
        pass,
        QcCheck {
            check,
            analyte: q.analyte.clone(),
            method: q.method.clone(),
            rows: q.lab_id.clone(),
            value,
            window: win,
            outcome: if pass { Outcome::Pass } else { Outcome::Fail },
            note: String::new(),
            blocking: false,
            affected: Vec::new(),
        },
    )))
}

/// The run positions between which a failed calibration check `f` holds
/// results of its analyte and method: after the last passing check before
/// it, before the first passing check after it. `cal` is in run order.
type Bracket = (
    Option<(chrono::NaiveDate, u64)>,
    Option<(chrono::NaiveDate, u64)>,
);

fn bracket(cal: &[(&ResultRow, bool, QcCheck)], f: usize) -> Bracket {
    let (fa, fm) = (&cal[f].0.analyte, &cal[f].0.method);
    let at = |j: usize| (cal[j].0.analyzed_on, cal[j].0.line);
    let peer = |j: usize| cal[j].1 && same(&cal[j].0.analyte, fa) && same(&cal[j].0.method, fm);
    let before = (0..cal.len())
        .rev()
        .find(|&j| at(j) < at(f) && peer(j))
        .map(at);
    let after = (0..cal.len()).find(|&j| at(j) > at(f) && peer(j)).map(at);
    (before, after)
}

/// Required QC kinds per analyte and method present among the samples.
fn required(b: &Batch<'_>, out: &mut Found) -> Result<(), EvalError> {
    for g in &b.gathered.groups {
        for kind in &b.config.required {
            let present = b.qc_rows.iter().any(|q| {
                q.kind == *kind && same(&q.analyte, &g.analyte) && same(&q.method, &g.method)
            });
            if present {
                continue;
            }
            out.problems.push(Problem {
                at: Loc::file(b.results_file),
                lab_id: g.lab_id.clone(),
                analyte: g.analyte.clone(),
                kind: ProblemKind::Qc,
                message: format!(
                    "no {} for {} / {}, which the lab's QC rules require",
                    kind.name(),
                    g.analyte,
                    g.method
                ),
                hint: "add the QC row to the results, or issue with --accept-qc \"REASON\"".into(),
            });
            out.rules.push(Rule::Group {
                check: out.checks.len(),
                analyte: g.analyte.clone(),
                method: g.method.clone(),
            });
            out.checks.push(QcCheck {
                check: kind.name(),
                analyte: g.analyte.clone(),
                method: g.method.clone(),
                rows: String::new(),
                value: String::new(),
                window: "required".into(),
                outcome: Outcome::Missing,
                note: "results held".into(),
                blocking: true,
                affected: Vec::new(),
            });
        }
    }

    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::str::FromStr;

    fn d(s: &str) -> Decimal {
        Decimal::from_str(s).unwrap()
    }

    // RPD = |a − b| / ((a + b) / 2) × 100 (EPA SW-846 Chapter One, definition of RPD, from memory):
    // a = 52.0, b = 47.0 -> 5 / 49.5 × 100 = 10.1 %.
    #[test]
    fn rpd_worked_example() {
        let c = Criteria::default();
        let (kind, value, _, pass) =
            precision(d("52.0"), d("47.0"), d("2"), Unit::MgPerKg, &c).unwrap();
        assert_eq!((kind, value.as_str(), pass), ("RPD", "10.1 %", true));
        // 60 vs 45: 15 / 52.5 = 28.6 % > 20 %.
        let (_, value, _, pass) = precision(d("60"), d("45"), d("2"), Unit::MgPerKg, &c).unwrap();
        assert_eq!((value.as_str(), pass), ("28.6 %", false));
    }

    // Below 5 × LOQ the absolute difference is judged against the LOQ (common practice, from memory).
    #[test]
    fn the_five_loq_switch() {
        let c = Criteria::default();
        let loq = d("2");
        // Both at 10 = 5 × LOQ exactly: RPD applies.
        assert_eq!(
            precision(d("10"), d("10"), loq, Unit::MgPerKg, &c)
                .unwrap()
                .0,
            "RPD"
        );
        // One at 9.99: difference rule. 9.99 vs 6.5 -> 3.49 > 2 fails although RPD would be 42 %.
        let (kind, _, _, pass) = precision(d("9.99"), d("6.5"), loq, Unit::MgPerKg, &c).unwrap();
        assert_eq!((kind, pass), ("difference", false));
        // 3.0 vs 4.5: difference 1.5 ≤ 2 passes though the RPD is 40 %.
        let (kind, _, _, pass) = precision(d("3.0"), d("4.5"), loq, Unit::MgPerKg, &c).unwrap();
        assert_eq!((kind, pass), ("difference", true));
    }

    #[test]
    fn window_edges_pass() {
        let w = (d("80"), d("120"));
        assert!(within(d("80"), w));
        assert!(within(d("120"), w));
        assert!(!within(d("79.99"), w));
        assert!(!within(d("120.01"), w));
    }

    // In-memory batches for the rules below (common practice, no source,
    // unless a test says otherwise). Solid paint: mg/kg = reading / 2.
    const LIMITS: &str = "analyte,matrix,method,unit,mdl,loq,effective_from,upper_range,upper_range_unit\n\
        Pb,paint,6010D,ug/L,8,25,2025-01-01,5000,ug/L\n\
        Cd,paint,6010D,ug/L,8,25,2025-01-01,5000,ug/L\n\
        Pb,metal,6010D,ug/L,8,25,2025-01-01,5000,ug/L\n\
        Pb,émail,6010D,ug/L,8,25,2025-01-01,5000,ug/L\n\
        Pb,glaçure,6010D,ug/L,8,25,2025-01-01,5000,ug/L\n\
        Pb,paint,6020B,ug/L,8,25,2025-01-01,5000,ug/L\n";
    const HEAD: &str = "lab_id,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec,spike_added,parent_id\n";

    fn line(
        id: &str,
        kind: &str,
        analyte: &str,
        matrix: &str,
        reading: &str,
        rest: &str,
    ) -> String {
        format!(
            "{id},{kind},{analyte},{matrix},6010D,{reading},ug/L,1,0.100,50,2026-11-13,{rest}\n"
        )
    }

    fn build(
        required: &str,
        spec_limit: &str,
        rows: &str,
    ) -> Result<crate::report::Report, EvalError> {
        let lab = format!("name='L'\naddress='A'\nsignatory='S'\n[qc]\nrequired=[{required}]\n");
        let ws = Workspace {
            root: ".".into(),
            lab_text: lab.clone(),
            qc_text: None,
            lab: crate::read::Lab::parse("lab.toml", &lab).unwrap(),
            register: crate::read::Register::parse("limits.csv", LIMITS.as_bytes()).unwrap(),
            specs: crate::read::Specs::parse(
                "specs.csv",
                format!("spec,analyte,matrix,limit,unit,effective_from\nL,Pb,,{spec_limit},mg/kg,2009-01-01\n").as_bytes(),
            )
            .unwrap(),
            register_sha256: String::new(),
            specs_sha256: String::new(),
        };
        let manifest = "batch='B'\nreport='R'\nclient_name='c'\nclient_address='a'\nclient_contact='p'\nreceived_on=2026-11-10\nresults='r.csv'\n";
        let batch = crate::read::Batch {
            dir: ".".into(),
            manifest_file: "batch.toml".into(),
            manifest_text: manifest.into(),
            manifest: crate::read::Manifest::parse("batch.toml", manifest).unwrap(),
            results_file: "r.csv".into(),
            results_bytes: format!("{HEAD}{rows}").into_bytes(),
            results_on_disk: None,
        };
        let run = crate::report::RunInfo {
            issued_at: chrono::DateTime::from_timestamp(0, 0).unwrap(),
            tool_version: "t".into(),
        };
        crate::report::build(&ws, &batch, 0, &run)
    }

    fn quals(r: &crate::report::Report, id: &str, analyte: &str) -> Vec<String> {
        r.rows
            .iter()
            .find(|x| x.lab_id == id && &*x.analyte == analyte)
            .unwrap()
            .qualifiers
            .clone()
    }

    fn check<'r>(r: &'r crate::report::Report, name: &str) -> &'r QcCheck {
        r.qc_checks
            .iter()
            .find(|c| c.check == name)
            .unwrap_or_else(|| panic!("no {name}: {:?}", r.qc_checks))
    }

    #[test]
    fn a_blank_covers_its_own_analyte_method_and_matrix_in_any_case() {
        // S1 Pb at 50 mg/kg; each blank at 20 mg/kg fails (above the MDL of 4).
        let s1 = line("S1", "sample", "Pb", "paint", "100", "L,,");
        for (blank, qualified) in [
            (line("MB", "method-blank", "Pb", "paint", "40", ",,"), true),
            (line("MB", "method-blank", "pb", "PAINT", "40", ",,"), true),
            (line("MB", "method-blank", "Cd", "paint", "40", ",,"), false),
            (line("MB", "method-blank", "Pb", "metal", "40", ",,"), false),
        ] {
            let r = build("", "90", &(s1.clone() + &blank)).unwrap();
            let q = quals(&r, "S1", "Pb");
            assert_eq!(
                q.contains(&BLANK_AFFECTED.to_string()),
                qualified,
                "{blank}: {q:?}"
            );
        }
        // Non-ASCII matrix names compare without case too, and differ when they differ.
        let s = line("S1", "sample", "Pb", "émail", "100", "L,,");
        let r = build(
            "",
            "90",
            &(s.clone() + &line("MB", "method-blank", "Pb", "ÉMAIL", "40", ",,")),
        )
        .unwrap();
        assert_eq!(quals(&r, "S1", "Pb"), [BLANK_AFFECTED]);
        let r = build(
            "",
            "90",
            &(s + &line("MB", "method-blank", "Pb", "glaçure", "40", ",,")),
        )
        .unwrap();
        assert!(quals(&r, "S1", "Pb").is_empty());
    }

    #[test]
    fn blank_edges_and_one_qualifier_however_many_blanks_fail() {
        let s1 = line("S1", "sample", "Pb", "paint", "100", "L,,");
        // A blank exactly at the MDL (8 µg/L = 4 mg/kg) fails: it must be below.
        let r = build(
            "",
            "60",
            &(s1.clone() + &line("MB", "method-blank", "Pb", "paint", "8", ",,")),
        )
        .unwrap();
        let c = check(&r, "method blank");
        assert_eq!(c.outcome, Outcome::Fail);
        // 5 % of a limit of 80 equals the MDL: the MDL stays the basis.
        let r = build(
            "",
            "80",
            &(s1.clone() + &line("MB", "method-blank", "Pb", "paint", "1", ",,")),
        )
        .unwrap();
        assert_eq!(check(&r, "method blank").window, "< 4.00 mg/kg (MDL)");
        // 5 % of 200 = 10 > 4: the limit governs.
        let r = build(
            "",
            "200",
            &(s1.clone() + &line("MB", "method-blank", "Pb", "paint", "1", ",,")),
        )
        .unwrap();
        assert_eq!(
            check(&r, "method blank").window,
            "< 10.0 mg/kg (5 % of the limit)"
        );
        // A result exactly at 10 × the blank (20 mg/kg × 10 = 200) is not affected.
        let s = line("S2", "sample", "Pb", "paint", "400", "L,,");
        let r = build(
            "",
            "90",
            &(s + &line("MB", "method-blank", "Pb", "paint", "40", ",,")),
        )
        .unwrap();
        assert!(quals(&r, "S2", "Pb").is_empty());
        // Two failing blanks qualify once.
        let both = s1
            + &line("MB-1", "method-blank", "Pb", "paint", "40", ",,")
            + &line("MB-2", "method-blank", "Pb", "paint", "40", ",,");
        let r = build("", "90", &both).unwrap();
        assert_eq!(quals(&r, "S1", "Pb"), [BLANK_AFFECTED]);
    }

    #[test]
    fn a_spike_of_zero_is_refused() {
        let rows = line("S1", "sample", "Pb", "paint", "100", "L,,")
            + &line("LCS", "lcs", "Pb", "paint", "100", ",0,");
        let e = build("", "90", &rows).unwrap_err();
        assert!(
            e.to_string().contains("spike_added") && e.to_string().contains("greater than zero"),
            "{e}"
        );
    }

    #[test]
    fn spikes_pair_up_on_their_parent_and_analyte() {
        // S1 has Pb at 10 mg/kg and Cd at 100 mg/kg; a duplicate of S1 Pb
        // agrees with the Pb result, not the Cd one.
        let mut rows = line("S1", "sample", "Pb", "paint", "20", "L,,");
        rows += &line("S1", "sample", "Cd", "paint", "200", ",,");
        rows += &line("DUP", "duplicate", "Pb", "paint", "20", ",,S1");
        // MS and MSD at 30 and 31 mg/kg after adding 20: recoveries 100 and 105 %.
        rows += &line("MS", "matrix-spike", "Pb", "paint", "60", ",20,S1");
        rows += &line("MSD", "matrix-spike-dup", "Pb", "paint", "62", ",20,S1");
        let r = build("", "90", &rows).unwrap();
        assert_eq!(check(&r, "duplicate difference").outcome, Outcome::Pass);
        assert_eq!(check(&r, "matrix spike recovery").value, "100 %");
        assert_eq!(check(&r, "spike duplicate recovery").value, "105 %");
        // 30 and 31 are below 5 × LOQ (62.5): judged by difference, not RPD.
        let pair = check(&r, "spike duplicate difference");
        assert_eq!(pair.rows, "MS / MSD");
        assert_eq!(pair.outcome, Outcome::Pass);
        // Well above 5 × LOQ the pair is judged by RPD.
        let mut rows = line("S1", "sample", "Pb", "paint", "200", "L,,");
        rows += &line("MS", "matrix-spike", "Pb", "paint", "400", ",100,S1");
        rows += &line("MSD", "matrix-spike-dup", "Pb", "paint", "404", ",100,S1");
        let r = build("", "90", &rows).unwrap();
        assert_eq!(check(&r, "spike duplicate RPD").outcome, Outcome::Pass);
    }

    #[test]
    fn a_spike_without_its_parent_is_an_error_even_beside_a_blocked_sample() {
        // S9 has no limits (method unknown to the register) and is blocked;
        // a spike naming a parent that does not exist is still an error.
        let mut rows = line("S1", "sample", "Pb", "paint", "100", "L,,");
        rows += "S9,sample,Pb,paint,6010X,100,ug/L,1,0.100,50,2026-11-13,L,,\n";
        rows += &line("MS", "matrix-spike", "Pb", "paint", "100", ",20,NOPE");
        let e = build("", "90", &rows).unwrap_err();
        assert!(
            e.to_string().contains("NOPE has no Pb sample result"),
            "{e}"
        );
    }

    #[test]
    fn a_failed_ccv_holds_only_what_its_own_passing_checks_bracket() {
        // Pb: S0, CCV-1 pass, S1, CCV-2 fail, (a Cd CCV passes), S2, CCV-3
        // pass, S3. The failure holds what ran since the last passing check
        // and until the next one (SW-846 6010D's CCV bracketing, from memory).
        let ccv = |id: &str, analyte: &str, reading: &str| {
            format!("{id},ccv,{analyte},paint,6010D,{reading},ug/L,1,,,2026-11-13,,100,\n")
        };
        let mut rows = line("S0", "sample", "Pb", "paint", "100", "L,,");
        rows += &ccv("CCV-1", "Pb", "100");
        rows += &line("S1", "sample", "Pb", "paint", "100", "L,,");
        rows += &ccv("CCV-2", "Pb", "80");
        rows += &ccv("CCV-C", "Cd", "100");
        rows += &line("S2", "sample", "Pb", "paint", "100", "L,,");
        rows += &ccv("CCV-3", "Pb", "100");
        rows += &line("S3", "sample", "Pb", "paint", "100", "L,,");
        let r = build("", "90", &rows).unwrap();
        let failed = r.qc_checks.iter().find(|c| c.rows == "CCV-2").unwrap();
        let held: Vec<&str> = failed
            .affected
            .iter()
            .map(|&i| r.rows[i].lab_id.as_str())
            .collect();
        assert_eq!(held, ["S1", "S2"]);
        assert!(failed.blocking);
    }

    #[test]
    fn a_required_check_counts_only_of_its_kind_analyte_and_method() {
        let s1 = line("S1", "sample", "Pb", "paint", "100", "L,,");
        let missing =
            |r: &crate::report::Report| r.qc_checks.iter().any(|c| c.outcome == Outcome::Missing);
        // Only a method blank, or an LCS of another analyte: the Pb LCS is missing.
        for other in [
            line("MB", "method-blank", "Pb", "paint", "1", ",,"),
            line("LCS", "lcs", "Cd", "paint", "100", ",50,"),
        ] {
            let r = build("\"lcs\"", "90", &(s1.clone() + &other)).unwrap();
            assert!(missing(&r), "{other}");
        }
        // An LCS written in other case counts.
        let lcs = "LCS,lcs,pb,paint,6010d,100,ug/L,1,0.100,50,2026-11-13,,50,\n";
        let r = build("\"lcs\"", "90", &(s1 + lcs)).unwrap();
        assert!(!missing(&r), "{:?}", r.qc_checks);
    }

    #[test]
    fn one_result_above_five_loq_and_one_below_is_judged_by_difference() {
        let c = Criteria::default();
        // LOQ 2: floor 10. 12 is above, 9 below: the difference rule (3 > 2 fails).
        let (kind, _, _, pass) = precision(d("12"), d("9"), d("2"), Unit::MgPerKg, &c).unwrap();
        assert_eq!((kind, pass), ("difference", false));
        let (kind, _, _, _) = precision(d("9"), d("12"), d("2"), Unit::MgPerKg, &c).unwrap();
        assert_eq!(kind, "difference");
    }

    /// `line`, run by method 6020B.
    fn line_6020b(id: &str, kind: &str, reading: &str, rest: &str) -> String {
        line(id, kind, "Pb", "paint", reading, rest).replace(",6010D,", ",6020B,")
    }

    #[test]
    fn names_compare_without_case_by_unicode_rules() {
        assert!(same("Pb", "pB"));
        assert!(same("émail", "ÉMAIL"));
        assert!(!same("émail", "email"));
        // KELVIN SIGN (U+212A) lower-cases to k (Unicode case mapping), so
        // the non-ASCII path is taken when only one side is ASCII.
        assert!(same("K", "\u{212A}"));
        assert!(!same("K", "\u{212B}"));
    }

    #[test]
    fn required_qc_and_held_counts_are_per_analyte_and_method() {
        let mb = line("MB", "method-blank", "Pb", "paint", "1", ",,");
        let rows = line("S1", "sample", "Pb", "paint", "100", "L,,")
            + &line("S2", "sample", "Pb", "paint", "100", "L,,")
            + &line_6020b("S3", "sample", "100", "L,,")
            + &mb;
        let r = build("\"method-blank\"", "90", &rows).unwrap();
        // The 6010D blank does not stand for the 6020B results.
        let msgs: Vec<String> = r.problems.iter().map(|p| p.message.clone()).collect();
        assert!(
            msgs.iter()
                .any(|m| m == "no method-blank for Pb / 6020B, which the lab's QC rules require"),
            "{msgs:?}"
        );
        assert!(!msgs.iter().any(|m| m.contains("Pb / 6010D")), "{msgs:?}");
        // A failed 6020B LCS (40 %) holds the one 6020B result, not the two 6010D ones.
        let rows = rows + &line_6020b("LCS", "lcs", "40", ",50,");
        let mut r = build("", "90", &rows).unwrap();
        let msgs: Vec<String> = r.problems.iter().map(|p| p.message.clone()).collect();
        assert!(
            msgs.iter()
                .any(|m| m.ends_with("1 result(s) of Pb / 6020B are held")),
            "{msgs:?}"
        );
        r.accept_qc("test");
        assert!(
            quals(&r, "S3", "Pb")
                .iter()
                .any(|q| q.starts_with("qc-exception"))
        );
        for id in ["S1", "S2"] {
            assert!(
                quals(&r, id, "Pb").is_empty(),
                "{id}: {:?}",
                quals(&r, id, "Pb")
            );
        }
    }

    #[test]
    fn a_blank_is_judged_against_its_own_analyte_method_and_matrix_results() {
        // Blank 40 µg/L = 20 mg/kg. Threshold: the highest of the MDL (4
        // mg/kg), 5 % of the limit (4.5) and 5 % of the lowest result of its
        // group: S1 at 1000 mg/kg gives 50, so the blank passes. A low
        // result of another analyte or matrix must not lower it.
        let base = line("S1", "sample", "Pb", "paint", "2000", "L,,")
            + &line("MB", "method-blank", "Pb", "paint", "40", ",,");
        let r = build("", "90", &base).unwrap();
        assert_eq!(check(&r, "method blank").outcome, Outcome::Pass);
        for other in [
            line("S2", "sample", "Cd", "paint", "100", ",,"),
            line("S2", "sample", "Pb", "metal", "100", ",,"),
        ] {
            let r = build("", "90", &(base.clone() + &other)).unwrap();
            assert_eq!(check(&r, "method blank").outcome, Outcome::Pass, "{other}");
        }
        // A low result of its own group does lower it (50 mg/kg -> 2.5): fail.
        let r = build(
            "",
            "90",
            &(base + &line("S2", "sample", "Pb", "paint", "100", ",,")),
        )
        .unwrap();
        assert_eq!(check(&r, "method blank").outcome, Outcome::Fail);
    }

    #[test]
    fn a_blank_prepared_unlike_its_samples_is_an_input_error() {
        // S1 has no mass, so it reports in µg/L; the blank is per kg.
        let rows = "S1,sample,Pb,paint,6010D,100,ug/L,1,,50,2026-11-13,,,\n".to_string()
            + &line("MB", "method-blank", "Pb", "paint", "1", ",,");
        let Err(e) = build("", "90", &rows) else {
            panic!("a unit clash is an error");
        };
        let text = e.to_string();
        assert!(
            text.contains("method-blank MB is in mg/kg but the samples it checks are in"),
            "{text}"
        );
    }
}
