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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::study::StudyRow;
    use crate::units::Unit;

    fn day(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    fn row(n: usize, kind: StudyKind, value: Option<f64>, on: &str) -> StudyRow {
        StudyRow {
            line: n as u64 + 2,
            analyte: "Pb".into(),
            matrix: "water".into(),
            method: "200.8".into(),
            kind,
            value,
            unit: Unit::MgPerL,
            prepared_on: Some(day(on)),
            analyzed_on: day(on),
            batch: String::new(),
            spike_level: (kind == StudyKind::Spike).then_some(1.0),
            lab_id: format!("L{n}"),
        }
    }

    const SPIKES: [f64; 8] = [1.0, 1.1, 0.9, 1.0, 1.05, 0.95, 1.0, 1.0];
    const SPIKE_DAYS: [&str; 3] = ["2026-01-10", "2026-03-10", "2026-06-10"];

    /// Eight spikes on three dates (MDL_S near 0.18 mg/L) and 100 blanks,
    /// mostly without a number, whose highest numeric result (0.8)
    /// therefore sets MDL_b and the MDL (Appendix B Rev. 2).
    fn study(numeric_blanks: &[f64]) -> Group {
        let mut rows = Vec::new();
        for (i, v) in SPIKES.iter().enumerate() {
            rows.push(row(i, StudyKind::Spike, Some(*v), SPIKE_DAYS[i % 3]));
        }
        for i in 0..100 {
            let v = numeric_blanks.get(i).copied();
            rows.push(row(100 + i, StudyKind::Blank, v, "2026-06-30"));
        }
        Group {
            analyte: "Pb".into(),
            matrix: "water".into(),
            method: "200.8".into(),
            unit: Unit::MgPerL,
            rows,
        }
    }

    fn register(mdl: &str, unit: &str) -> Register {
        let text = format!(
            "analyte,matrix,method,unit,mdl,loq,effective_from,study_id\n\
             Pb,water,200.8,{unit},{mdl},5000,2020-01-01,S-2020\n"
        );
        Register::parse("limits.csv", text.as_bytes()).unwrap()
    }

    fn run(blanks: &[f64], mdl: &str) -> VerifyResult {
        verify(&study(blanks), &register(mdl, "mg/L"), &Options::default())
    }

    #[test]
    fn the_mdl_of_the_blanks_is_their_highest_number() {
        let v = run(&[0.8, 0.1], "0.8");
        assert!(v.result.ok(), "{:?}", v.result.errors);
        assert_eq!(v.result.mdl, 0.8);
        assert_eq!(v.existing, Some((0.8, "S-2020".to_string())));
        assert_eq!(v.ratio, Some(1.0));
        assert!(v.keep, "{:?}", v.reasons);
        assert!(v.reasons.is_empty());
        assert_eq!((v.blanks_above, v.blanks_total), (0, 100));
        assert_eq!((v.from, v.to), (day("2024-06-30"), day("2026-06-30")));
    }

    // Appendix B Rev. 2: the existing MDL may be kept when the recomputed
    // one is within 0.5–2.0 times it (both ends kept) and fewer than 3 % of
    // the blanks are above it (from memory).
    #[test]
    fn the_ratio_bounds_are_inclusive() {
        let v = run(&[0.8], "0.4");
        assert_eq!(v.ratio, Some(2.0));
        assert_eq!(v.blanks_above, 1, "0.8 is above 0.4");
        assert!(v.keep, "{:?}", v.reasons);
        let v = run(&[0.8], "1.6");
        assert_eq!(v.ratio, Some(0.5));
        assert!(v.keep, "{:?}", v.reasons);
        let v = run(&[0.8], "1.7");
        assert!(!v.keep);
        assert_eq!(
            v.reasons,
            ["the new MDL is 0.47 × the existing one, outside 0.5–2.0"]
        );
        let v = run(&[0.8], "0.39");
        assert!(!v.keep);
        assert_eq!(
            v.reasons,
            ["the new MDL is 2.05 × the existing one, outside 0.5–2.0"]
        );
    }

    #[test]
    fn three_percent_of_blanks_above_the_mdl_replaces_it() {
        // A blank equal to the MDL is not above it.
        let v = run(&[0.8, 0.8, 0.4, 0.4], "0.4");
        assert_eq!(v.blanks_above, 2);
        assert!(v.keep, "{:?}", v.reasons);
        let v = run(&[0.8, 0.8, 0.8], "0.4");
        assert_eq!(v.blanks_above, 3);
        assert!(!v.keep);
        assert_eq!(
            v.reasons,
            ["3 of 100 blank results (3.0 %) are above the existing MDL; fewer than 3 % may be"]
        );
    }

    #[test]
    fn the_register_mdl_is_compared_in_the_studys_unit() {
        let v = verify(
            &study(&[0.8]),
            &register("400", "µg/L"),
            &Options::default(),
        );
        assert_eq!(v.existing.as_ref().map(|e| e.0), Some(0.4));
        assert_eq!(v.ratio, Some(2.0));
    }

    #[test]
    fn with_no_mdl_in_force_nothing_is_kept() {
        let other = Register::parse(
            "limits.csv",
            b"analyte,matrix,method,unit,mdl,loq,effective_from\n\
              Cd,water,200.8,mg/L,0.4,1,2020-01-01\n\
              Pb,water,200.8,mg/L,0.4,1,2026-07-01\n",
        )
        .unwrap();
        let v = verify(&study(&[0.8]), &other, &Options::default());
        assert_eq!(v.existing, None);
        assert_eq!(v.ratio, None);
        assert!(!v.keep);
        assert_eq!(
            v.reasons,
            ["no MDL in force in the register for this analyte, matrix and method"]
        );
    }

    #[test]
    fn a_recomputed_mdl_with_design_errors_is_not_kept() {
        let mut g = study(&[0.8]);
        g.rows
            .retain(|r| r.kind != StudyKind::Spike || r.lab_id != "L0");
        g.rows
            .retain(|r| r.kind != StudyKind::Spike || r.lab_id != "L1");
        let v = verify(&g, &register("0.8", "mg/L"), &Options::default());
        assert!(!v.result.ok());
        assert!(!v.keep);
        assert_eq!(v.reasons, ["the recomputed MDL has design errors"]);
    }

    // The window is the 24 months up to the newest result: a result on the
    // day 24 months before is outside it, the day after is inside
    // (Appendix B Rev. 2, ongoing verification; from memory).
    #[test]
    fn the_window_is_twenty_four_months() {
        let mut g = study(&[0.8]);
        g.rows
            .push(row(900, StudyKind::Spike, Some(5.0), "2024-06-30"));
        let v = verify(&g, &register("0.8", "mg/L"), &Options::default());
        assert_eq!(v.result.n_spike, 8);
        g.rows
            .push(row(901, StudyKind::Spike, Some(5.0), "2024-07-01"));
        let v = verify(&g, &register("0.8", "mg/L"), &Options::default());
        assert_eq!(v.result.n_spike, 9);
        assert_eq!(v.thin_quarters.first(), Some(&("2024-Q3".to_string(), 1)));
    }

    #[test]
    fn quarters_with_fewer_than_two_spikes_across_a_year_end() {
        let g = Group {
            rows: [
                ("2025-05-02", 0),
                ("2025-06-02", 1),
                ("2025-11-02", 2),
                ("2025-12-02", 3),
                ("2025-12-03", 4),
                ("2026-02-10", 5),
            ]
            .iter()
            .map(|(d, i)| row(*i, StudyKind::Spike, Some(1.0), d))
            .chain([row(9, StudyKind::Blank, Some(0.1), "2026-02-10")])
            .collect(),
            ..study(&[])
        };
        assert_eq!(
            thin_quarters(&g, day("2026-02-10")),
            [("2025-Q3".to_string(), 0), ("2026-Q1".to_string(), 1)]
        );
        let only_blanks = Group {
            rows: vec![row(9, StudyKind::Blank, Some(0.1), "2026-02-10")],
            ..study(&[])
        };
        assert_eq!(
            thin_quarters(&only_blanks, day("2026-02-10")),
            [("2026-Q1".to_string(), 0)]
        );
    }

    // Quarter boundaries at March: a window opening on a March blank starts
    // in Q1, and one ending in March ends in Q1.
    #[test]
    fn quarters_begin_and_end_at_march() {
        let spikes = [
            "2025-04-02",
            "2025-05-02",
            "2025-07-02",
            "2025-08-02",
            "2025-10-02",
            "2025-11-02",
            "2026-01-20",
            "2026-03-20",
        ];
        let g = Group {
            rows: [row(9, StudyKind::Blank, Some(0.1), "2025-03-10")]
                .into_iter()
                .chain(
                    spikes
                        .iter()
                        .enumerate()
                        .map(|(i, d)| row(i, StudyKind::Spike, Some(1.0), d)),
                )
                .collect(),
            ..study(&[])
        };
        assert_eq!(
            thin_quarters(&g, day("2026-03-20")),
            [("2025-Q1".to_string(), 0)]
        );
    }
}
