//! MDL from spikes and blanks by 40 CFR Part 136 Appendix B, Revision 2,
//! with IDL and LOQ, design checks and outlier flags.

use super::stats::{grubbs_outlier, mean, sd, t99};
use super::{Group, StudyKind, StudyRow};
use crate::units::Unit;
use std::collections::BTreeSet;

#[derive(Debug, Clone, PartialEq)]
pub enum LoqRule {
    /// 10 × S_s (ACS Committee on Environmental Improvement, 1980).
    TenSd,
    /// Minimum level: 3.18 × MDL rounded to the nearest 1, 2 or 5 × 10^n.
    MinimumLevel,
    Factor(f64),
    /// The lab's lowest calibration standard, where that is its policy.
    LowestStandard(f64),
}

impl LoqRule {
    pub fn parse(text: &str) -> Result<LoqRule, String> {
        let t = text.trim();
        let num = |v: &str| -> Result<f64, String> {
            v.trim()
                .parse::<f64>()
                .ok()
                .filter(|x| x.is_finite() && *x > 0.0)
                .ok_or_else(|| format!("`{v}` is not a positive number"))
        };
        match t {
            "ten-sd" => Ok(LoqRule::TenSd),
            "ml" => Ok(LoqRule::MinimumLevel),
            _ => match t.split_once(':') {
                Some(("factor", x)) => Ok(LoqRule::Factor(num(x)?)),
                Some(("lowest-standard", v)) => Ok(LoqRule::LowestStandard(num(v)?)),
                _ => Err(format!(
                    "`{t}` is not an LOQ rule: ten-sd, ml, factor:X or lowest-standard:V"
                )),
            },
        }
    }

    pub fn describe(&self) -> String {
        match self {
            LoqRule::TenSd => "10 × S_s (ACS 1980)".into(),
            LoqRule::MinimumLevel => "minimum level: 3.18 × MDL rounded to 1, 2 or 5 × 10^n".into(),
            LoqRule::Factor(x) => format!("{x} × MDL"),
            LoqRule::LowestStandard(v) => format!("lowest calibration standard ({v})"),
        }
    }

    pub fn id(&self) -> String {
        match self {
            LoqRule::TenSd => "ten-sd".into(),
            LoqRule::MinimumLevel => "ml".into(),
            LoqRule::Factor(x) => format!("factor:{x}"),
            LoqRule::LowestStandard(v) => format!("lowest-standard:{v}"),
        }
    }
}

/// Rounds to the nearest 1, 2 or 5 × 10^n, as the minimum level is stated.
pub fn nearest_125(x: f64) -> f64 {
    if !(x.is_finite() && x > 0.0) {
        return x;
    }
    let p = 10f64.powf(x.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * p)
        .min_by(|a, b| (a - x).abs().total_cmp(&(b - x).abs()))
        .unwrap_or(x)
}

#[derive(Debug, Clone)]
pub struct Options {
    pub loq: LoqRule,
    pub idl_factor: f64,
    /// (lab id, reason) left out of the computation.
    pub exclusions: Vec<(String, String)>,
}

impl Default for Options {
    fn default() -> Options {
        Options {
            loq: LoqRule::TenSd,
            // IDL = 3 × SD of reagent blanks (common practice, no source).
            idl_factor: 3.0,
            exclusions: Vec::new(),
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Governs {
    Spikes,
    Blanks,
}

impl Governs {
    pub fn name(self) -> &'static str {
        match self {
            Governs::Spikes => "MDL_S",
            Governs::Blanks => "MDL_b",
        }
    }
}

#[derive(Debug, Clone)]
pub struct MdlResult {
    pub analyte: String,
    pub matrix: String,
    pub method: String,
    pub unit: Unit,
    pub spikes: Vec<f64>,
    pub spike_levels: Vec<f64>,
    pub n_spike: usize,
    pub mean_spike: f64,
    pub sd_spike: f64,
    pub t_value: f64,
    pub mdl_s: f64,
    pub blanks: Vec<f64>,
    pub n_blank: usize,
    pub n_blank_numeric: usize,
    pub mean_blank: Option<f64>,
    pub sd_blank: Option<f64>,
    pub mdl_b: Option<f64>,
    /// How MDL_b was found, in words.
    pub mdl_b_rule: String,
    pub mdl: f64,
    pub governs: Governs,
    pub loq: f64,
    pub loq_rule: LoqRule,
    pub n_reagent: usize,
    pub idl: Option<f64>,
    pub idl_factor: f64,
    pub warnings: Vec<String>,
    /// Design errors: when present there is no result.
    pub errors: Vec<String>,
    pub excluded: Vec<(String, String)>,
}

impl MdlResult {
    pub fn ok(&self) -> bool {
        self.errors.is_empty()
    }
}

fn fmt(x: f64) -> String {
    format!("{:.4}", x)
        .trim_end_matches('0')
        .trim_end_matches('.')
        .to_string()
}

pub fn compute(group: &Group, opts: &Options) -> MdlResult {
    let excluded_ids: Vec<&str> = opts.exclusions.iter().map(|(id, _)| id.as_str()).collect();
    let excluded: Vec<(String, String)> = opts
        .exclusions
        .iter()
        .filter(|(id, _)| group.rows.iter().any(|r| &r.lab_id == id))
        .cloned()
        .collect();
    let excluded_ids = &excluded_ids;
    let kept = |k: StudyKind| {
        group
            .rows
            .iter()
            .filter(move |r| r.kind == k && !excluded_ids.contains(&r.lab_id.as_str()))
    };
    let mut warnings = Vec::new();
    let mut errors = Vec::new();

    let spike_rows: Vec<_> = kept(StudyKind::Spike).collect();
    let spikes: Vec<f64> = spike_rows.iter().filter_map(|r| r.value).collect();
    check_spikes(&spike_rows, &spikes, &mut warnings, &mut errors);
    let (mean_spike, sd_spike) = (mean(&spikes), sd(&spikes));
    let t_value = t99(spikes.len());
    let mdl_s = t_value * sd_spike;

    let blank_rows: Vec<_> = kept(StudyKind::Blank).collect();
    let n_blank = blank_rows.len();
    let blanks: Vec<f64> = blank_rows.iter().filter_map(|r| r.value).collect();
    if n_blank < 7 {
        errors.push(format!(
            "{n_blank} method blank(s); Appendix B needs at least 7"
        ));
    }
    let (mean_blank, sd_blank, mdl_b, mdl_b_rule) = blank_mdl(&blanks, n_blank);

    for (name, values, rows) in [
        ("spike", &spikes, &spike_rows),
        ("blank", &blanks, &blank_rows),
    ] {
        warnings.extend(outlier(name, values, rows));
    }

    let (mdl, governs) = match mdl_b {
        Some(b) if b > mdl_s => (b, Governs::Blanks),
        _ => (mdl_s, Governs::Spikes),
    };
    let loq = loq_for(&opts.loq, sd_spike, mdl, errors.is_empty(), &mut warnings);
    let spike_levels = levels(&spike_rows);
    if errors.is_empty() {
        warnings.extend(spike_level_warnings(&spike_levels, mdl));
    }

    let reagent: Vec<f64> = kept(StudyKind::ReagentBlank)
        .filter_map(|r| r.value)
        .collect();
    let n_reagent = kept(StudyKind::ReagentBlank).count();
    let idl = idl(&reagent, n_reagent, opts.idl_factor, &mut warnings);
    MdlResult {
        analyte: group.analyte.clone(),
        matrix: group.matrix.clone(),
        method: group.method.clone(),
        unit: group.unit,
        n_spike: spikes.len(),
        spikes,
        spike_levels,
        mean_spike,
        sd_spike,
        t_value,
        mdl_s,
        n_blank,
        n_blank_numeric: blanks.len(),
        blanks,
        mean_blank,
        sd_blank,
        mdl_b,
        mdl_b_rule,
        mdl,
        governs,
        loq,
        loq_rule: opts.loq.clone(),
        n_reagent,
        idl,
        idl_factor: opts.idl_factor,
        warnings,
        errors,
        excluded,
    }
}

/// Appendix B's demands on the spikes: at least 7 numeric results, above
/// zero, prepared on at least 3 dates.
fn check_spikes(
    spike_rows: &[&StudyRow],
    spikes: &[f64],
    warnings: &mut Vec<String>,
    errors: &mut Vec<String>,
) {
    let no_numeric = spike_rows.iter().filter(|r| r.value.is_none()).count();
    let non_positive = spikes.iter().filter(|v| **v <= 0.0).count();
    if no_numeric + non_positive > 0 {
        warnings.push(format!(
            "{} spike(s) gave no numeric result or a result ≤ 0: raise the spike level",
            no_numeric + non_positive
        ));
    }
    if spikes.len() < 7 {
        errors.push(format!(
            "{} numeric spike result(s); Appendix B needs at least 7",
            spikes.len()
        ));
    }
    let dates: BTreeSet<_> = spike_rows.iter().filter_map(|r| r.prepared_on).collect();
    if !spike_rows.is_empty() && dates.len() < 3 {
        warnings.push(format!(
            "spikes prepared on {} date(s); Appendix B asks for at least 3 separate dates",
            dates.len()
        ));
    }
}

/// The LOQ by the chosen rule, never below the MDL (a warning says so
/// when the rule gave less).
fn loq_for(rule: &LoqRule, sd_spike: f64, mdl: f64, ok: bool, warnings: &mut Vec<String>) -> f64 {
    let loq = match rule {
        LoqRule::TenSd => 10.0 * sd_spike,
        LoqRule::MinimumLevel => nearest_125(3.18 * mdl),
        LoqRule::Factor(x) => x * mdl,
        LoqRule::LowestStandard(v) => *v,
    };
    if ok && loq < mdl {
        warnings.push(format!(
            "the LOQ by {} ({}) is below the MDL; the LOQ is set to the MDL",
            rule.id(),
            fmt(loq)
        ));
        return mdl;
    }
    loq
}

/// The distinct spike levels, ascending.
fn levels(spike_rows: &[&StudyRow]) -> Vec<f64> {
    let levels: BTreeSet<u64> = spike_rows
        .iter()
        .filter_map(|r| r.spike_level)
        .map(f64::to_bits)
        .collect();
    levels.into_iter().map(f64::from_bits).collect()
}

/// Appendix B asks for spikes at 2–10 × the MDL found.
fn spike_level_warnings(levels: &[f64], mdl: f64) -> Vec<String> {
    levels
        .iter()
        .filter(|&&level| level < 2.0 * mdl || level > 10.0 * mdl)
        .map(|level| {
            format!(
                "spike level {} is outside 2–10 × the MDL ({} to {})",
                fmt(*level),
                fmt(2.0 * mdl),
                fmt(10.0 * mdl)
            )
        })
        .collect()
}

/// MDL_b, Appendix B Rev. 2: with more than 100 blanks the 99th-percentile
/// result; when some blanks gave no number, the highest numeric blank;
/// else mean (0 if negative) + t × SD. Returns (mean, SD, MDL_b, rule).
fn blank_mdl(blanks: &[f64], n_blank: usize) -> (Option<f64>, Option<f64>, Option<f64>, String) {
    if blanks.is_empty() {
        (
            None,
            None,
            None,
            "not applicable: no blank gave a numeric result".to_string(),
        )
    } else if n_blank > 100 {
        // Rank round(0.99 n) of the ordered results; results with no number
        // count as the lowest.
        let rank = (0.99 * n_blank as f64).round() as usize;
        let mut sorted = blanks.to_vec();
        sorted.sort_by(|a, b| a.total_cmp(b));
        let missing = n_blank - blanks.len();
        let value = rank
            .checked_sub(missing + 1)
            .and_then(|i| sorted.get(i))
            .copied();
        (
            Some(mean(blanks)),
            Some(sd(blanks)),
            value,
            format!("result ranked {rank} of {n_blank} ordered blanks (99th percentile)"),
        )
    } else if blanks.len() < n_blank {
        let hi = blanks.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        (
            Some(mean(blanks)),
            (blanks.len() > 1).then(|| sd(blanks)),
            Some(hi),
            "highest numeric blank (some blanks gave no numeric result)".to_string(),
        )
    } else {
        let (m, s) = (mean(blanks), sd(blanks));
        let t = t99(blanks.len());
        (
            Some(m),
            Some(s),
            Some(m.max(0.0) + t * s),
            format!("mean (0 if negative) + t({}, 0.99) × S_b", blanks.len() - 1),
        )
    }
}

/// A Grubbs outlier among the numeric results of one kind, as a warning.
fn outlier(name: &str, values: &[f64], rows: &[&StudyRow]) -> Option<String> {
    let (i, g, crit) = grubbs_outlier(values)?;
    let id = rows
        .iter()
        .filter(|r| r.value.is_some())
        .nth(i)
        .map(|r| r.lab_id.clone())
        .unwrap_or_default();
    Some(format!(
        "suspected outlier: {name} {id} = {} (Grubbs G = {:.3} > {:.3}, α = 0.05); kept, not dropped",
        fmt(values[i]),
        g,
        crit
    ))
}

/// IDL = factor × SD of at least 10 numeric reagent blanks.
fn idl(reagent: &[f64], n_reagent: usize, factor: f64, warnings: &mut Vec<String>) -> Option<f64> {
    if reagent.len() >= 10 {
        return Some(factor * sd(reagent));
    }
    if n_reagent > 0 {
        warnings.push(format!(
            "{} numeric reagent blank(s): the IDL needs at least 10",
            reagent.len()
        ));
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::study::groups;
    use chrono::NaiveDate;

    fn group(spikes: &[f64], blanks: &[Option<f64>], reagent: &[f64], days: u32) -> Group {
        let day = |i: usize| NaiveDate::from_ymd_opt(2026, 3, 1 + (i as u32 % days)).unwrap();
        let mut rows = Vec::new();
        let mk = |i: usize, kind, value, level| StudyRow {
            line: i as u64 + 2,
            analyte: "Pb".into(),
            matrix: "paint".into(),
            method: "6010D".into(),
            kind,
            value,
            unit: Unit::UgPerL,
            prepared_on: Some(day(i)),
            analyzed_on: day(i),
            batch: String::new(),
            spike_level: level,
            lab_id: format!("{kind:?}-{i}"),
        };
        for (i, v) in spikes.iter().enumerate() {
            rows.push(mk(i, StudyKind::Spike, Some(*v), Some(10.0)));
        }
        for (i, v) in blanks.iter().enumerate() {
            rows.push(mk(i, StudyKind::Blank, *v, None));
        }
        for (i, v) in reagent.iter().enumerate() {
            rows.push(mk(i, StudyKind::ReagentBlank, Some(*v), None));
        }
        groups("s.csv", rows).unwrap().remove(0)
    }

    // Berthouex & Brown, Statistics for Environmental Engineers, 2nd ed. (2002),
    // Example 14.1: set 1 gives s² = 0.10, s = 0.32, MDL = 3.143 × 0.32 = 1.0;
    // set 2 gives s² = 0.16, s = 0.40, MDL = 3.143 × 0.40 = 1.3.
    #[test]
    fn worked_example_two_sets_of_seven() {
        let blanks = [None; 7];
        let one = compute(
            &group(&[2.5, 2.7, 2.2, 2.2, 3.1, 2.6, 2.8], &blanks, &[], 3),
            &Options::default(),
        );
        assert!(one.ok(), "{:?}", one.errors);
        assert_eq!(format!("{:.2}", one.sd_spike.powi(2)), "0.10");
        assert_eq!(format!("{:.2}", one.sd_spike), "0.32");
        assert_eq!(format!("{:.1}", one.mdl_s), "1.0");
        let two = compute(
            &group(&[1.6, 1.9, 1.3, 1.7, 2.1, 0.9, 1.8], &blanks, &[], 3),
            &Options::default(),
        );
        assert_eq!(format!("{:.2}", two.sd_spike.powi(2)), "0.16");
        assert_eq!(format!("{:.2}", two.sd_spike), "0.40");
        assert_eq!(format!("{:.1}", two.mdl_s), "1.3");
        // No numeric blank: MDL_b does not apply and MDL_S governs.
        assert_eq!(one.mdl_b, None);
        assert_eq!(one.governs, Governs::Spikes);
    }

    // LOQ = 10 × S_s (ACS Committee on Environmental Improvement, 1980).
    #[test]
    fn loq_ten_sd_and_other_rules() {
        let g = group(&[2.5, 2.7, 2.2, 2.2, 3.1, 2.6, 2.8], &[None; 7], &[], 3);
        let r = compute(&g, &Options::default());
        assert!((r.loq - 10.0 * r.sd_spike).abs() < 1e-12);
        let r = compute(
            &g,
            &Options {
                loq: LoqRule::Factor(3.0),
                ..Options::default()
            },
        );
        assert!((r.loq - 3.0 * r.mdl).abs() < 1e-12);
        let r = compute(
            &g,
            &Options {
                loq: LoqRule::LowestStandard(0.5),
                ..Options::default()
            },
        );
        assert_eq!(r.loq, r.mdl, "a standard below the MDL is raised to it");
        assert!(r.warnings.iter().any(|w| w.contains("below the MDL")));
    }

    // Minimum level rounding (EPA guidance, as given in the study issue):
    // MDL 0.3 -> ML 1; 0.5 -> 2; 0.21 -> 0.5.
    #[test]
    fn minimum_level_rounding() {
        assert_eq!(nearest_125(3.18 * 0.3), 1.0);
        assert_eq!(nearest_125(3.18 * 0.5), 2.0);
        assert_eq!(nearest_125(3.18 * 0.21), 0.5);
        assert_eq!(nearest_125(31.8), 20.0);
        assert_eq!(nearest_125(7.9), 10.0);
    }

    #[test]
    fn blank_rules() {
        let spikes = [2.5, 2.7, 2.2, 2.2, 3.1, 2.6, 2.8];
        // Some numeric: the highest numeric blank.
        let b = [Some(0.4), None, Some(1.6), None, Some(0.2), None, None];
        let r = compute(&group(&spikes, &b, &[], 3), &Options::default());
        assert_eq!(r.mdl_b, Some(1.6));
        assert_eq!(r.governs, Governs::Blanks);
        assert_eq!(r.mdl, 1.6);
        // All numeric: X̄ + t × S_b, with X̄ taken as 0 when negative.
        let b = [-0.2, -0.1, 0.0, -0.3, 0.1, -0.2, -0.1].map(Some);
        let r = compute(&group(&spikes, &b, &[], 3), &Options::default());
        let s = sd(&[-0.2, -0.1, 0.0, -0.3, 0.1, -0.2, -0.1]);
        assert!((r.mdl_b.unwrap() - 3.143 * s).abs() < 1e-3);
        // Appendix B's own example: 164 blanks -> the 162nd ordered result.
        let b: Vec<Option<f64>> = (1..=164).map(|i| Some(i as f64 / 100.0)).collect();
        let r = compute(&group(&spikes, &b, &[], 3), &Options::default());
        assert_eq!(r.mdl_b, Some(1.62));
    }

    #[test]
    fn design_checks() {
        let r = compute(
            &group(&[1.0, 1.1, 0.9, 1.2, 1.0, 0.8], &[None; 7], &[], 3),
            &Options::default(),
        );
        assert!(!r.ok());
        assert!(r.errors[0].contains("at least 7"));
        let r = compute(
            &group(&[1.0, 1.1, 0.9, 1.2, 1.0, 0.8, 1.1], &[None; 6], &[], 3),
            &Options::default(),
        );
        assert!(r.errors.iter().any(|e| e.contains("method blank")));
        let r = compute(
            &group(&[1.0, 1.1, 0.9, 1.2, 1.0, 0.8, -0.1], &[None; 7], &[], 2),
            &Options::default(),
        );
        assert!(
            r.warnings.iter().any(|w| w.contains("2 date(s)")),
            "{:?}",
            r.warnings
        );
        assert!(
            r.warnings
                .iter()
                .any(|w| w.contains("raise the spike level"))
        );
        // Spike level 10 against an MDL near 1.2: inside 2–10 × MDL? 10 / 1.2 = 8.3: yes.
        assert!(
            !r.warnings.iter().any(|w| w.contains("outside 2–10")),
            "{:?}",
            r.warnings
        );
    }

    // IDL = 3 × SD of at least 10 reagent blanks (common practice, no source).
    #[test]
    fn idl_from_reagent_blanks() {
        let reagent = [
            0.01, -0.02, 0.03, 0.00, 0.02, -0.01, 0.01, 0.04, -0.03, 0.00,
        ];
        let r = compute(
            &group(
                &[2.5, 2.7, 2.2, 2.2, 3.1, 2.6, 2.8],
                &[None; 7],
                &reagent,
                3,
            ),
            &Options::default(),
        );
        assert!((r.idl.unwrap() - 3.0 * sd(&reagent)).abs() < 1e-12);
        let r = compute(
            &group(
                &[2.5, 2.7, 2.2, 2.2, 3.1, 2.6, 2.8],
                &[None; 7],
                &reagent[..9],
                3,
            ),
            &Options::default(),
        );
        assert_eq!(r.idl, None);
    }

    #[test]
    fn exclusions_leave_a_result_out_and_are_recorded() {
        let g = group(
            &[2.5, 2.7, 2.2, 2.2, 3.1, 2.6, 2.8, 9.0],
            &[None; 7],
            &[],
            3,
        );
        let opts = Options {
            exclusions: vec![("Spike-7".into(), "spike vial cracked".into())],
            ..Options::default()
        };
        let r = compute(&g, &opts);
        assert_eq!(r.n_spike, 7);
        assert_eq!(format!("{:.1}", r.mdl_s), "1.0");
        assert_eq!(
            r.excluded,
            vec![("Spike-7".to_string(), "spike vial cracked".to_string())]
        );
        // Without the exclusion, Grubbs flags it but keeps it.
        let r = compute(&g, &Options::default());
        assert_eq!(r.n_spike, 8);
        assert!(
            r.warnings
                .iter()
                .any(|w| w.contains("suspected outlier: spike Spike-7")),
            "{:?}",
            r.warnings
        );
    }

    const SET_ONE: [f64; 7] = [2.5, 2.7, 2.2, 2.2, 3.1, 2.6, 2.8];

    #[test]
    fn loq_rules_parse_name_and_refuse() {
        assert_eq!(LoqRule::parse(" ten-sd "), Ok(LoqRule::TenSd));
        assert_eq!(LoqRule::parse("ml"), Ok(LoqRule::MinimumLevel));
        assert_eq!(LoqRule::parse("factor:3.18"), Ok(LoqRule::Factor(3.18)));
        assert_eq!(
            LoqRule::parse("lowest-standard: 0.5"),
            Ok(LoqRule::LowestStandard(0.5))
        );
        for bad in [
            "factor:0",
            "factor:-2",
            "factor:inf",
            "factor:NaN",
            "factor:x",
        ] {
            let e = LoqRule::parse(bad).unwrap_err();
            assert!(e.contains("not a positive number"), "{bad}: {e}");
        }
        assert!(
            LoqRule::parse("tensd")
                .unwrap_err()
                .contains("not an LOQ rule")
        );
        assert!(
            LoqRule::parse("mean:2")
                .unwrap_err()
                .contains("not an LOQ rule")
        );
        // The id is what the register note records, and it parses back.
        for rule in [
            LoqRule::TenSd,
            LoqRule::MinimumLevel,
            LoqRule::Factor(3.0),
            LoqRule::LowestStandard(0.25),
        ] {
            assert_eq!(LoqRule::parse(&rule.id()), Ok(rule.clone()));
        }
        assert_eq!(LoqRule::Factor(3.0).id(), "factor:3");
        assert_eq!(LoqRule::TenSd.describe(), "10 × S_s (ACS 1980)");
        assert_eq!(LoqRule::Factor(3.0).describe(), "3 × MDL");
        assert_eq!(
            LoqRule::LowestStandard(0.25).describe(),
            "lowest calibration standard (0.25)"
        );
        assert!(
            LoqRule::MinimumLevel
                .describe()
                .starts_with("minimum level: 3.18")
        );
        assert_eq!(Governs::Spikes.name(), "MDL_S");
        assert_eq!(Governs::Blanks.name(), "MDL_b");
    }

    #[test]
    fn nearest_125_leaves_what_it_cannot_round() {
        assert_eq!(nearest_125(-1.0), -1.0);
        assert_eq!(nearest_125(0.0), 0.0);
        assert!(nearest_125(f64::NAN).is_nan());
        assert_eq!(nearest_125(f64::INFINITY), f64::INFINITY);
    }

    // Minimum level = 3.18 × MDL to the nearest 1, 2 or 5 × 10^n (EPA
    // guidance, as given in the study issue); set 1 of Berthouex & Brown
    // Example 14.1 (s = 0.324, t = 3.143) has an MDL of 1.02, so 3.24
    // rounds to 2.
    #[test]
    fn minimum_level_loq_of_the_worked_example() {
        let g = group(&SET_ONE, &[None; 7], &[], 3);
        let opts = Options {
            loq: LoqRule::MinimumLevel,
            ..Options::default()
        };
        let r = compute(&g, &opts);
        assert_eq!(format!("{:.2}", r.mdl), "1.02");
        assert_eq!(r.loq, 2.0);
        assert!(r.warnings.iter().all(|w| !w.contains("below the MDL")));
        // Set 2 (s = 0.40, MDL 1.26): 3.18 × 1.26 = 4.0 rounds to 5.
        let g = group(&[1.6, 1.9, 1.3, 1.7, 2.1, 0.9, 1.8], &[None; 7], &[], 3);
        let r = compute(&g, &opts);
        assert_eq!(format!("{:.2}", r.mdl), "1.26");
        assert_eq!(r.loq, 5.0);
    }

    #[test]
    fn an_loq_equal_to_the_mdl_stands_without_a_warning() {
        let g = group(&SET_ONE, &[None; 7], &[], 3);
        let mdl = compute(&g, &Options::default()).mdl;
        let r = compute(
            &g,
            &Options {
                loq: LoqRule::LowestStandard(mdl),
                ..Options::default()
            },
        );
        assert_eq!(r.loq, mdl);
        assert!(
            r.warnings.iter().all(|w| !w.contains("below the MDL")),
            "{:?}",
            r.warnings
        );
        // Below it: raised, and the warning gives the rule and the value.
        let r = compute(
            &g,
            &Options {
                loq: LoqRule::LowestStandard(0.5),
                ..Options::default()
            },
        );
        assert!(
            r.warnings.contains(
                &"the LOQ by lowest-standard:0.5 (0.5) is below the MDL; the LOQ is set to the MDL"
                    .to_string()
            ),
            "{:?}",
            r.warnings
        );
    }

    #[test]
    fn the_greater_mdl_governs_and_a_tie_stays_with_the_spikes() {
        let mdl_s = compute(&group(&SET_ONE, &[None; 7], &[], 3), &Options::default()).mdl_s;
        // Highest numeric blank (some blanks gave none) below MDL_S.
        let low = [Some(0.2), Some(0.4), None, None, None, None, None];
        let r = compute(&group(&SET_ONE, &low, &[], 3), &Options::default());
        assert_eq!(r.mdl_b, Some(0.4));
        assert_eq!((r.mdl, r.governs), (mdl_s, Governs::Spikes));
        let tie = [Some(0.2), Some(mdl_s), None, None, None, None, None];
        let r = compute(&group(&SET_ONE, &tie, &[], 3), &Options::default());
        assert_eq!(r.mdl_b, Some(mdl_s));
        assert_eq!(r.governs, Governs::Spikes);
    }

    #[test]
    fn clean_spikes_on_three_dates_raise_no_design_warning() {
        let r = compute(&group(&SET_ONE, &[None; 7], &[], 3), &Options::default());
        assert!(r.ok());
        assert!(r.warnings.is_empty(), "{:?}", r.warnings);
        assert_eq!(r.spike_levels, vec![10.0]);
        // A zero result is not above zero.
        let mut zero = SET_ONE;
        zero[0] = 0.0;
        let r = compute(&group(&zero, &[None; 7], &[], 3), &Options::default());
        assert!(
            r.warnings
                .iter()
                .any(|w| w.starts_with("1 spike(s) gave no numeric result or a result ≤ 0")),
            "{:?}",
            r.warnings
        );
    }

    #[test]
    fn a_group_without_spikes_is_an_error_not_a_date_warning() {
        let blanks = [0.1, 0.2, 0.1, 0.3, 0.2, 0.1, 0.2].map(Some);
        let r = compute(&group(&[], &blanks, &[], 3), &Options::default());
        assert!(!r.ok());
        assert!(r.errors[0].starts_with("0 numeric spike result(s)"));
        assert!(
            r.warnings.iter().all(|w| !w.contains("date(s)")),
            "{:?}",
            r.warnings
        );
    }

    #[test]
    fn spike_levels_are_distinct_and_ascending() {
        let mut g = group(&SET_ONE, &[None; 7], &[], 3);
        let levels = [5.0, 2.0, 5.0, 2.0, 8.0, 2.0, 5.0];
        for (row, level) in g.rows.iter_mut().zip(levels) {
            row.spike_level = Some(level);
        }
        let r = compute(&g, &Options::default());
        assert_eq!(r.spike_levels, vec![2.0, 5.0, 8.0]);
    }

    // Appendix B Rev. 2, section 2(a): spike at 2 to 10 times the MDL; the
    // bounds themselves are inside.
    #[test]
    fn spike_levels_outside_two_to_ten_times_the_mdl() {
        let w = spike_level_warnings(&[0.9, 1.0, 3.0, 5.0, 5.1], 0.5);
        assert_eq!(
            w,
            vec![
                "spike level 0.9 is outside 2–10 × the MDL (1 to 5)".to_string(),
                "spike level 5.1 is outside 2–10 × the MDL (1 to 5)".to_string(),
            ]
        );
        assert!(spike_level_warnings(&[1.0, 5.0], 0.5).is_empty());
    }

    #[test]
    fn blank_rule_boundaries() {
        // Exactly 100 blanks, all numeric: still mean + t × S_b; the
        // percentile rule starts above 100.
        let values: Vec<f64> = (1..=100).map(|i| i as f64 / 100.0).collect();
        let b: Vec<Option<f64>> = values.iter().copied().map(Some).collect();
        let r = compute(&group(&SET_ONE, &b, &[], 3), &Options::default());
        assert!(
            r.mdl_b_rule.starts_with("mean (0 if negative)"),
            "{}",
            r.mdl_b_rule
        );
        let expect = mean(&values) + t99(100) * sd(&values);
        assert!((r.mdl_b.unwrap() - expect).abs() < 1e-12);
        // Some blanks without a number: an SD only from two numeric ones.
        let one = [Some(0.4), None, None, None, None, None, None];
        let r = compute(&group(&SET_ONE, &one, &[], 3), &Options::default());
        assert_eq!((r.mdl_b, r.sd_blank), (Some(0.4), None));
        let three = [Some(0.4), Some(0.2), Some(0.3), None, None, None, None];
        let r = compute(&group(&SET_ONE, &three, &[], 3), &Options::default());
        assert_eq!(r.mdl_b, Some(0.4));
        assert!((r.sd_blank.unwrap() - 0.1).abs() < 1e-12);
    }

    #[test]
    fn reagent_blank_warning_only_when_there_are_some() {
        let r = compute(&group(&SET_ONE, &[None; 7], &[], 3), &Options::default());
        assert!(
            r.warnings.iter().all(|w| !w.contains("reagent")),
            "{:?}",
            r.warnings
        );
        let r = compute(
            &group(&SET_ONE, &[None; 7], &[0.01; 9], 3),
            &Options::default(),
        );
        assert!(
            r.warnings
                .contains(&"9 numeric reagent blank(s): the IDL needs at least 10".to_string()),
            "{:?}",
            r.warnings
        );
    }

    #[test]
    fn an_exclusion_for_another_group_is_not_recorded() {
        let g = group(&SET_ONE, &[None; 7], &[], 3);
        let opts = Options {
            exclusions: vec![("Spike-99".into(), "not in this group".into())],
            ..Options::default()
        };
        let r = compute(&g, &opts);
        assert!(r.excluded.is_empty());
        assert_eq!(r.n_spike, 7);
    }
}
