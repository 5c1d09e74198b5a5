//! Signal-to-noise estimate from a baseline trace: the noise is the SD of
//! the linearly detrended baseline window, the signal the peak height above
//! that baseline. An estimate, and every output says so.

use super::stats::{fit, sd};
use crate::read::csvtable::{Col, read_rows, req};
use crate::read::{Loc, ReadError};

pub const COLUMNS: &[Col] = &[req("x"), req("signal")];

#[derive(Debug, Clone)]
pub struct NoiseResult {
    pub window: (f64, f64),
    pub points: usize,
    pub noise_sd: f64,
    /// Peak: (x at the maximum, height above the baseline, S/N).
    pub peak: Option<(f64, f64, f64)>,
    pub signal_at_3: f64,
    pub signal_at_10: f64,
    /// With a calibration slope: the concentrations at S/N 3 and 10.
    pub conc_at_3: Option<f64>,
    pub conc_at_10: Option<f64>,
}

pub fn parse_range(text: &str) -> Result<(f64, f64), String> {
    let (a, b) = text
        .split_once(':')
        .ok_or_else(|| format!("`{text}` is not a range A:B"))?;
    let (a, b) = (a.trim().parse::<f64>(), b.trim().parse::<f64>());
    match (a, b) {
        (Ok(a), Ok(b)) if a.is_finite() && b.is_finite() && a < b => Ok((a, b)),
        _ => Err(format!("`{text}` is not a range A:B with A < B")),
    }
}

pub fn compute(
    file: &str,
    bytes: &[u8],
    window: (f64, f64),
    peak: Option<(f64, f64)>,
    slope: Option<f64>,
) -> Result<NoiseResult, ReadError> {
    let mut pts: Vec<(f64, f64)> = Vec::new();
    read_rows(file, bytes, COLUMNS, |r| {
        let x = r.decimal(0)?.to_string().parse::<f64>().unwrap_or(f64::NAN);
        let y = r.decimal(1)?.to_string().parse::<f64>().unwrap_or(f64::NAN);
        pts.push((x, y));
        Ok::<(), ReadError>(())
    })?;
    let base: Vec<(f64, f64)> = pts
        .iter()
        .copied()
        .filter(|(x, _)| *x >= window.0 && *x <= window.1)
        .collect();
    if base.len() < 5 {
        return Err(ReadError::field(
            Loc::file(file),
            format!(
                "{} point(s) in the baseline window {}:{}",
                base.len(),
                window.0,
                window.1
            ),
            "choose a window with at least 5 points of baseline and no peak",
        ));
    }
    let xs: Vec<f64> = base.iter().map(|p| p.0).collect();
    let ys: Vec<f64> = base.iter().map(|p| p.1).collect();
    let line = fit(&xs, &ys).ok_or_else(|| {
        ReadError::field(
            Loc::file(file),
            "the baseline window has one x value only",
            "widen the window",
        )
    })?;
    let residuals: Vec<f64> = base
        .iter()
        .map(|(x, y)| y - (line.intercept + line.slope * x))
        .collect();
    let noise_sd = sd(&residuals);
    let peak = match peak {
        None => None,
        Some((c, d)) => {
            let top = pts
                .iter()
                .filter(|(x, _)| *x >= c && *x <= d)
                .max_by(|a, b| a.1.total_cmp(&b.1))
                .copied()
                .ok_or_else(|| {
                    ReadError::field(
                        Loc::file(file),
                        format!("no points in the peak range {c}:{d}"),
                        "give --peak as a range of x that holds the peak",
                    )
                })?;
            let height = top.1 - (line.intercept + line.slope * top.0);
            Some((top.0, height, height / noise_sd))
        }
    };
    let (s3, s10) = (3.0 * noise_sd, 10.0 * noise_sd);
    Ok(NoiseResult {
        window,
        points: base.len(),
        noise_sd,
        peak,
        signal_at_3: s3,
        signal_at_10: s10,
        conc_at_3: slope.map(|m| s3 / m),
        conc_at_10: slope.map(|m| s10 / m),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn detrending_removes_a_drift_and_the_peak_is_measured_above_it() {
        // Baseline 100 + 2x with alternating ±1 noise; a peak of +50 at x = 15.
        let mut csv = String::from("x,signal\n");
        for x in 0..20 {
            let noise = if x % 2 == 0 { 1.0 } else { -1.0 };
            let peak = if x == 15 { 50.0 } else { 0.0 };
            csv.push_str(&format!("{x},{}\n", 100.0 + 2.0 * x as f64 + noise + peak));
        }
        let r = compute(
            "t.csv",
            csv.as_bytes(),
            (0.0, 9.0),
            Some((12.0, 18.0)),
            Some(2.5),
        )
        .unwrap();
        // Residuals of ±1 around a fitted line: SD close to 1 (the fit absorbs a little).
        assert!((r.noise_sd - 1.0).abs() < 0.1, "{}", r.noise_sd);
        let (x, height, sn) = r.peak.unwrap();
        assert_eq!(x, 15.0);
        assert!((height - 49.0).abs() < 1.0, "{height}");
        assert!((sn - height / r.noise_sd).abs() < 1e-12);
        assert!((r.conc_at_10.unwrap() - 10.0 * r.noise_sd / 2.5).abs() < 1e-12);
        assert!(parse_range("5:1").is_err());
    }

    #[test]
    fn ranges_need_two_finite_ends_in_order() {
        assert_eq!(parse_range("0:14").unwrap(), (0.0, 14.0));
        assert_eq!(parse_range(" 1.5 : 2 ").unwrap(), (1.5, 2.0));
        for bad in ["5:5", "5:1", "NaN:5", "1:inf", "1-5", "a:b"] {
            assert!(parse_range(bad).is_err(), "{bad}");
        }
    }

    fn trace(points: &[(f64, f64)]) -> String {
        let mut csv = String::from("x,signal\n");
        for (x, y) in points {
            csv.push_str(&format!("{x},{y}\n"));
        }
        csv
    }

    #[test]
    fn the_window_is_inclusive_and_needs_five_points() {
        // A flat baseline with noise +1, -1, ... (population arithmetic by hand).
        let pts: Vec<(f64, f64)> = (0..10)
            .map(|x| (x as f64, if x % 2 == 0 { 11.0 } else { 9.0 }))
            .collect();
        let csv = trace(&pts);
        // 0..=4 is five points: accepted; 0..=3.5 is four: refused.
        let r = compute("t.csv", csv.as_bytes(), (0.0, 4.0), None, None).unwrap();
        assert_eq!(r.points, 5);
        let e = compute("t.csv", csv.as_bytes(), (0.0, 3.5), None, None).unwrap_err();
        assert!(e.to_string().contains("4 point(s)"), "{e}");
        // The signal levels are exactly 3 and 10 times the noise SD.
        assert_eq!(r.signal_at_3, 3.0 * r.noise_sd);
        assert_eq!(r.signal_at_10, 10.0 * r.noise_sd);
        assert!(r.noise_sd > 0.5, "{}", r.noise_sd);
        // With a calibration slope, concentration = signal / slope.
        let r = compute("t.csv", csv.as_bytes(), (0.0, 9.0), None, Some(2.5)).unwrap();
        assert_eq!(r.conc_at_3, Some(r.signal_at_3 / 2.5));
        assert_eq!(r.conc_at_10, Some(r.signal_at_10 / 2.5));
    }

    #[test]
    fn the_peak_is_the_highest_point_inside_its_range_only() {
        let mut pts: Vec<(f64, f64)> = (0..30)
            .map(|x| (x as f64, if x % 2 == 0 { 11.0 } else { 9.0 }))
            .collect();
        pts[20].1 = 60.0; // the peak, inside 18:22
        pts[27].1 = 500.0; // a larger spike outside it
        let csv = trace(&pts);
        let r = compute(
            "t.csv",
            csv.as_bytes(),
            (0.0, 9.0),
            Some((18.0, 22.0)),
            None,
        )
        .unwrap();
        let (x, height, _) = r.peak.unwrap();
        assert_eq!(x, 20.0);
        assert!((height - 50.0).abs() < 1.0, "{height}");
        let e = compute(
            "t.csv",
            csv.as_bytes(),
            (0.0, 9.0),
            Some((40.0, 41.0)),
            None,
        )
        .unwrap_err();
        assert!(e.to_string().contains("no points in the peak range"), "{e}");
    }
}
