//! The statistics limit studies need, in f64: a study's replicates are
//! measurements, not reported values, and the t and Grubbs quantiles are
//! irrational anyway.

use statrs::distribution::{ContinuousCDF, StudentsT};

pub fn mean(xs: &[f64]) -> f64 {
    xs.iter().sum::<f64>() / xs.len() as f64
}

/// Sample standard deviation (n − 1).
pub fn sd(xs: &[f64]) -> f64 {
    if xs.len() < 2 {
        return f64::NAN;
    }
    let m = mean(xs);
    (xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (xs.len() - 1) as f64).sqrt()
}

/// The one-sided upper quantile of Student's t with `df` degrees of freedom.
pub fn t_upper(df: f64, p: f64) -> f64 {
    match StudentsT::new(0.0, 1.0, df) {
        Ok(t) => t.inverse_cdf(p),
        Err(_) => f64::NAN,
    }
}

/// t(n − 1, 0.99), the MDL multiplier of 40 CFR Part 136 Appendix B.
pub fn t99(n: usize) -> f64 {
    t_upper(n as f64 - 1.0, 0.99)
}

/// Two-sided Grubbs critical value at significance `alpha` for n values:
/// G = (n − 1)/√n · √(t² / (n − 2 + t²)), t the upper α/(2n) quantile of t(n − 2).
pub fn grubbs_critical(n: usize, alpha: f64) -> f64 {
    let nf = n as f64;
    let t = t_upper(nf - 2.0, 1.0 - alpha / (2.0 * nf));
    (nf - 1.0) / nf.sqrt() * (t * t / (nf - 2.0 + t * t)).sqrt()
}

/// The value farthest from the mean, if Grubbs' test (two-sided, α = 0.05)
/// finds it an outlier: (index, G statistic, critical value).
pub fn grubbs_outlier(xs: &[f64]) -> Option<(usize, f64, f64)> {
    if xs.len() < 3 {
        return None;
    }
    let (m, s) = (mean(xs), sd(xs));
    if s.is_nan() || s == 0.0 {
        return None;
    }
    let (i, dev) = xs
        .iter()
        .map(|x| (x - m).abs())
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(&b.1))?;
    let g = dev / s;
    let crit = grubbs_critical(xs.len(), 0.05);
    (g > crit).then_some((i, g, crit))
}

/// Ordinary least squares y = a + b·x.
#[derive(Debug, Clone, Copy)]
pub struct Line {
    pub slope: f64,
    pub intercept: f64,
    /// Residual standard deviation, n − 2 degrees of freedom.
    pub residual_sd: f64,
    /// Standard deviation of the intercept.
    pub intercept_sd: f64,
    pub r_squared: f64,
    pub n: usize,
}

pub fn fit(xs: &[f64], ys: &[f64]) -> Option<Line> {
    let n = xs.len();
    if n < 3 || ys.len() != n {
        return None;
    }
    let (mx, my) = (mean(xs), mean(ys));
    let sxx: f64 = xs.iter().map(|x| (x - mx).powi(2)).sum();
    if sxx == 0.0 {
        return None;
    }
    let sxy: f64 = xs.iter().zip(ys).map(|(x, y)| (x - mx) * (y - my)).sum();
    let slope = sxy / sxx;
    let intercept = my - slope * mx;
    let sse: f64 = xs
        .iter()
        .zip(ys)
        .map(|(x, y)| (y - intercept - slope * x).powi(2))
        .sum();
    let sst: f64 = ys.iter().map(|y| (y - my).powi(2)).sum();
    let residual_sd = (sse / (n - 2) as f64).sqrt();
    Some(Line {
        slope,
        intercept,
        residual_sd,
        intercept_sd: residual_sd * (1.0 / n as f64 + mx * mx / sxx).sqrt(),
        r_squared: if sst == 0.0 { 1.0 } else { 1.0 - sse / sst },
        n,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn r3(x: f64) -> f64 {
        (x * 1000.0).round() / 1000.0
    }

    // One-sided 99 % Student's t table printed with the MDL procedure in
    // 40 CFR Part 136 Appendix B.
    #[test]
    fn t_values_match_the_appendix_b_table() {
        let table = [
            (7, 3.143),
            (8, 2.998),
            (9, 2.896),
            (10, 2.821),
            (11, 2.764),
            (16, 2.602),
            (21, 2.528),
            (26, 2.485),
            (31, 2.457),
            (61, 2.390),
        ];
        for (n, t) in table {
            assert_eq!(r3(t99(n)), t, "n = {n}");
        }
        // The table's last line, for infinite degrees of freedom: z(0.99) = 2.326.
        assert_eq!(r3(t99(100_000)), 2.326);
        // t(12, 0.99) = 2.681 (Berthouex & Brown, Statistics for Environmental
        // Engineers, 2nd ed., Example 14.1, pooled MDL).
        assert_eq!(r3(t_upper(12.0, 0.99)), 2.681);
    }

    // 7 replicates give the familiar multiplier 3.14 (common practice, no source).
    #[test]
    fn seven_replicates_give_3_14() {
        assert_eq!(format!("{:.2}", t99(7)), "3.14");
    }

    // Grubbs critical values, ASTM E178 table (from memory): two-sided α = 0.05
    // (upper 2.5 %) n = 7: 2.020, 8: 2.126, 9: 2.215, 10: 2.290; one-sided 5 %
    // 1.938, 2.032, 2.110, 2.176. Printed tables are cut at 3 decimals, so within 0.001.
    #[test]
    fn grubbs_critical_values() {
        for (n, two, one) in [
            (7, 2.020, 1.938),
            (8, 2.126, 2.032),
            (9, 2.215, 2.110),
            (10, 2.290, 2.176),
        ] {
            assert!((grubbs_critical(n, 0.05) - two).abs() <= 0.001, "n = {n}");
            assert!((grubbs_critical(n, 0.10) - one).abs() <= 0.001, "n = {n}");
        }
    }

    #[test]
    fn grubbs_flags_a_clear_outlier_only() {
        let clean = [1.02, 0.98, 1.01, 0.97, 1.03, 0.99, 1.00];
        assert_eq!(grubbs_outlier(&clean), None);
        let with = [1.02, 0.98, 1.01, 0.97, 1.03, 0.99, 1.60];
        let (i, g, crit) = grubbs_outlier(&with).unwrap();
        assert_eq!(i, 6);
        assert!(g > crit);
    }

    // Hand-checked line: x = 1..5, y = 2.1, 3.9, 6.2, 7.8, 10.0.
    // Sxx = 10, Sxy = 19.7 -> slope 1.97, intercept 6.0 − 1.97·3 = 0.09;
    // residuals 0.04, −0.13, 0.20, −0.17, 0.06, SSE = 0.091, s = √(0.091/3) = 0.17416;
    // s(intercept) = s·√(1/5 + 9/10) = 0.18267; SST = 38.9, r² = 1 − 0.091/38.9 = 0.99766.
    #[test]
    fn least_squares_hand_checked() {
        let l = fit(&[1.0, 2.0, 3.0, 4.0, 5.0], &[2.1, 3.9, 6.2, 7.8, 10.0]).unwrap();
        assert!((l.slope - 1.97).abs() < 1e-12);
        assert!((l.intercept - 0.09).abs() < 1e-12);
        assert!((l.residual_sd - 0.174165).abs() < 1e-6);
        assert!((l.intercept_sd - 0.182666).abs() < 1e-6);
        assert!((l.r_squared - 0.997661).abs() < 1e-6);
    }

    // The sample SD needs two values; with two it is |a − b| / √2 (by hand).
    #[test]
    fn sd_needs_two_values() {
        assert!(sd(&[1.0]).is_nan());
        assert!((sd(&[1.0, 3.0]) - 2.0_f64.sqrt()).abs() < 1e-12);
    }

    // Three values are enough for Grubbs' test (ASTM E178 tabulates n = 3,
    // two-sided α = 0.05: 1.154 to three places, from memory). [0, 0, 1]
    // gives the largest G possible for n = 3, (n − 1)/√n = 1.1547 (by hand),
    // just above it: an outlier.
    #[test]
    fn grubbs_runs_from_three_values() {
        assert_eq!(grubbs_outlier(&[1.0, 2.0]), None);
        assert!((grubbs_critical(3, 0.05) - 1.1543).abs() < 0.0001);
        let (i, g, _) = grubbs_outlier(&[0.0, 0.0, 1.0]).expect("an outlier at n = 3");
        assert_eq!(i, 2);
        assert!((g - 2.0 / 3.0_f64.sqrt()).abs() < 1e-9);
        assert_eq!(grubbs_outlier(&[5.0, 5.0, 5.0]), None);
    }

    // A line through three exact points (by hand): y = 1 + 2x, r² = 1.
    #[test]
    fn three_points_fit_a_line() {
        let l = fit(&[1.0, 2.0, 3.0], &[3.0, 5.0, 7.0]).expect("3 points suffice");
        assert!((l.slope - 2.0).abs() < 1e-12 && (l.intercept - 1.0).abs() < 1e-12);
        assert_eq!(fit(&[1.0, 2.0], &[3.0, 5.0]).map(|l| l.n), None);
        assert!(fit(&[1.0, 2.0, 3.0], &[3.0, 5.0]).is_none());
    }

    #[test]
    fn a_line_through_exact_points_has_no_residual() {
        // y = 1 + 2x at x = 1..4: slope 2, intercept 1, every residual 0.
        let l = fit(&[1.0, 2.0, 3.0, 4.0], &[3.0, 5.0, 7.0, 9.0]).unwrap();
        assert_eq!((l.slope, l.intercept), (2.0, 1.0));
        assert_eq!(l.residual_sd, 0.0);
        // One point off by 1 gives a positive residual SD.
        let l = fit(&[1.0, 2.0, 3.0, 4.0], &[3.0, 5.0, 8.0, 9.0]).unwrap();
        assert!(l.residual_sd > 0.0);
    }
}
