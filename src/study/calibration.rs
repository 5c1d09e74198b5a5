//! Calibration-based limits (ICH Q2(R2)): DL = 3.3 σ / S, QL = 10 σ / S,
//! with σ the residual SD of the line or the SD of its intercept.

use super::stats::{Line, fit};
use crate::read::csvtable::{Col, opt, read_rows, req};
use crate::read::{Loc, ReadError};
use std::collections::BTreeSet;

pub const COLUMNS: &[Col] = &[req("level"), req("response"), opt("analyte"), opt("unit")];

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sigma {
    Residual,
    Intercept,
}

impl Sigma {
    pub fn name(self) -> &'static str {
        match self {
            Sigma::Residual => "residual SD of the line",
            Sigma::Intercept => "SD of the intercept",
        }
    }
}

#[derive(Debug, Clone)]
pub struct CalibrationResult {
    pub analyte: String,
    pub unit: String,
    pub line: Line,
    pub distinct_levels: usize,
    pub sigma: Sigma,
    pub dl: f64,
    pub ql: f64,
    pub warnings: Vec<String>,
}

pub fn compute(file: &str, bytes: &[u8], sigma: Sigma) -> Result<CalibrationResult, ReadError> {
    let (mut xs, mut ys) = (Vec::new(), Vec::new());
    let (mut analyte, mut unit) = (String::new(), String::new());
    read_rows(file, bytes, COLUMNS, |r| {
        let x = r.decimal(0)?.to_string().parse::<f64>().unwrap_or(f64::NAN);
        let y = r.decimal(1)?.to_string().parse::<f64>().unwrap_or(f64::NAN);
        xs.push(x);
        ys.push(y);
        if analyte.is_empty() {
            analyte = r.text(2);
        }
        if unit.is_empty() {
            unit = r.text(3);
        }
        Ok::<(), ReadError>(())
    })?;
    let levels: BTreeSet<u64> = xs.iter().map(|x| x.to_bits()).collect();
    if levels.len() < 3 {
        return Err(ReadError::field(
            Loc::file(file),
            format!(
                "{} distinct level(s); a calibration line needs at least 3",
                levels.len()
            ),
            "ICH Q2(R2) asks for at least 5 levels; add standards",
        ));
    }
    let mut warnings = Vec::new();
    if levels.len() < 5 {
        warnings.push(format!(
            "{} distinct levels; ICH Q2(R2) recommends at least 5",
            levels.len()
        ));
    }
    let line = fit(&xs, &ys).ok_or_else(|| {
        ReadError::field(
            Loc::file(file),
            "the levels do not define a line",
            "check the level column",
        )
    })?;
    if line.slope <= 0.0 {
        return Err(ReadError::field(
            Loc::file(file),
            format!("slope {} is not positive", line.slope),
            "the response must rise with the level; check the columns are not swapped",
        ));
    }
    let s = match sigma {
        Sigma::Residual => line.residual_sd,
        Sigma::Intercept => line.intercept_sd,
    };
    Ok(CalibrationResult {
        analyte,
        unit,
        line,
        distinct_levels: levels.len(),
        sigma,
        dl: 3.3 * s / line.slope,
        ql: 10.0 * s / line.slope,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // The hand-checked line of stats::tests (slope 1.97, residual SD 0.174165,
    // intercept SD 0.182666): DL = 3.3 × 0.174165 / 1.97 = 0.29175,
    // QL = 10 × 0.174165 / 1.97 = 0.88409 (ICH Q2(R2) formulas).
    #[test]
    fn ich_limits_from_a_hand_checked_line() {
        let csv = b"level,response\n1,2.1\n2,3.9\n3,6.2\n4,7.8\n5,10.0\n";
        let r = compute("cal.csv", csv, Sigma::Residual).unwrap();
        assert!((r.dl - 0.29175).abs() < 1e-5, "{}", r.dl);
        assert!((r.ql - 0.88409).abs() < 1e-5, "{}", r.ql);
        assert!(r.warnings.is_empty());
        let r = compute("cal.csv", csv, Sigma::Intercept).unwrap();
        assert!((r.dl - 3.3 * 0.182666 / 1.97).abs() < 1e-5);
    }

    #[test]
    fn level_counts() {
        let four = b"level,response\n1,2\n2,4.1\n3,5.9\n4,8\n";
        assert_eq!(
            compute("c.csv", four, Sigma::Residual)
                .unwrap()
                .warnings
                .len(),
            1
        );
        let two = b"level,response\n1,2\n1,2.1\n2,4\n2,4.2\n";
        assert!(compute("c.csv", two, Sigma::Residual).is_err());
    }

    #[test]
    fn three_levels_make_a_line_and_each_sigma_has_its_name() {
        let r = compute(
            "c.csv",
            b"level,response\n1,2.0\n2,4.1\n3,5.9\n",
            Sigma::Residual,
        );
        assert!(r.is_ok(), "{:?}", r.err());
        let e = compute(
            "c.csv",
            b"level,response\n1,2.0\n2,4.1\n2,4.0\n",
            Sigma::Residual,
        );
        assert!(e.unwrap_err().to_string().contains("2 distinct level(s)"));
        assert_eq!(Sigma::Residual.name(), "residual SD of the line");
        assert_eq!(Sigma::Intercept.name(), "SD of the intercept");
    }
}
