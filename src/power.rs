//! Detection power at a limit (L. A. Currie, Anal. Chem. 40 (1968) 586;
//! IUPAC recommendations 1995): an MDL controls false detections only. A
//! sample whose true amount equals a limit just above the MDL may well be
//! reported "not detected"; β says how often. Probabilities are f64 (they
//! are estimates from a replicate study), the results they qualify stay
//! decimal.

use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

/// Beyond this many degrees of freedom Student's t is the normal
/// distribution to far better than the study's own precision.
const NORMAL_FROM_DF: f64 = 1000.0;

fn cdf(x: f64, df: f64) -> Option<f64> {
    let p = if df > NORMAL_FROM_DF {
        Normal::new(0.0, 1.0).ok()?.cdf(x)
    } else {
        StudentsT::new(0.0, 1.0, df).ok()?.cdf(x)
    };
    p.is_finite().then_some(p)
}

fn upper_quantile(p: f64, df: f64) -> Option<f64> {
    let q = if df > NORMAL_FROM_DF {
        Normal::new(0.0, 1.0).ok()?.inverse_cdf(p)
    } else {
        StudentsT::new(0.0, 1.0, df).ok()?.inverse_cdf(p)
    };
    q.is_finite().then_some(q)
}

/// β at the limit: the probability that a sample whose true amount equals
/// `limit` gives a result below `mdl`, with results spread as the study's
/// spikes (SD `sd` from `n` spikes, Student's t with n − 1 degrees of
/// freedom): β = F_t((MDL − L) / s).
pub fn beta_at_limit(mdl: f64, limit: f64, sd: f64, n: u32) -> Option<f64> {
    if !(sd.is_finite() && sd > 0.0 && n >= 2 && mdl.is_finite() && limit.is_finite()) {
        return None;
    }
    cdf((mdl - limit) / sd, f64::from(n - 1))
}

/// Currie's detection limit L_D = L_C + t(1 − β)·s with L_C = t(1 − α)·s,
/// both with n − 1 degrees of freedom: the true amount that is detected
/// with probability 1 − β.
pub fn detection_limit(sd: f64, n: u32, alpha: f64, beta: f64) -> Option<f64> {
    if !(sd.is_finite() && sd > 0.0) {
        return None;
    }
    Some(ld_factor(n, alpha, beta)? * sd)
}

/// The multiplier of s in L_D, t(1 − α) + t(1 − β): it depends on the
/// spike count and the lab's rates only, so a batch computes it once per n.
pub fn ld_factor(n: u32, alpha: f64, beta: f64) -> Option<f64> {
    if n < 2 {
        return None;
    }
    let df = f64::from(n - 1);
    Some(upper_quantile(1.0 - alpha, df)? + upper_quantile(1.0 - beta, df)?)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Currie (1968) / IUPAC (1995): with α = β = 0.05 and σ known (normal),
    // L_C = 1.645σ and L_D = 2 L_C = 3.29σ.
    #[test]
    fn currie_detection_limit_is_3_29_sigma() {
        let ld = detection_limit(1.0, 100_000, 0.05, 0.05).unwrap();
        assert!((ld - 3.29).abs() < 0.001, "{ld}");
        // α = β: L_D is twice the critical level, for any SD.
        let ld = detection_limit(0.25, 100_000, 0.01, 0.01).unwrap();
        assert!((ld - 2.0 * 2.326 * 0.25).abs() < 0.001, "{ld}");
    }

    // 40 CFR Part 136 Appendix B, Table: t(6, 0.99) = 3.143 for 7 spikes.
    // With α = β = 0.01, L_D = 2 × 3.143 s = 6.286 s (by hand).
    #[test]
    fn seven_spikes_use_t_3_143() {
        let ld = detection_limit(1.0, 7, 0.01, 0.01).unwrap();
        assert!((ld - 6.286).abs() < 0.002, "{ld}");
        // A limit 2 s above an MDL of 3.143 s: β = P(t6 < −2), which
        // statrs and the t table (two-sided 0.05 < p < 0.1 at t = 2.0,
        // df 6: one-sided about 0.046) agree on.
        let b = beta_at_limit(3.143, 5.143, 1.0, 7).unwrap();
        let statrs = StudentsT::new(0.0, 1.0, 6.0).unwrap().cdf(-2.0);
        assert!((b - statrs).abs() < 1e-12);
        assert!((b - 0.0462).abs() < 0.0005, "{b}");
    }

    // β = 0.5 when the limit equals the MDL (symmetry of the distribution),
    // under the normal approximation and with t alike.
    #[test]
    fn a_limit_at_the_mdl_is_missed_half_the_time() {
        for n in [7, 30, 5000] {
            let b = beta_at_limit(0.6, 0.6, 0.19, n).unwrap();
            assert!((b - 0.5).abs() < 1e-9, "{n}: {b}");
        }
    }

    #[test]
    fn beta_falls_as_the_limit_rises() {
        let mut last = 1.0;
        for k in 0..40 {
            let limit = 1.0 + f64::from(k) * 0.1;
            let b = beta_at_limit(1.0, limit, 0.3, 7).unwrap();
            assert!(b < last || k == 0, "limit {limit}: {b} not below {last}");
            assert!((0.0..=0.5).contains(&b));
            last = b;
        }
        assert!(last < 0.001);
    }

    #[test]
    fn nonsense_inputs_give_nothing() {
        assert_eq!(beta_at_limit(1.0, 2.0, 0.0, 7), None);
        assert_eq!(beta_at_limit(1.0, 2.0, 0.3, 1), None);
        assert_eq!(beta_at_limit(f64::NAN, 2.0, 0.3, 7), None);
        assert_eq!(detection_limit(-1.0, 7, 0.01, 0.01), None);
        assert_eq!(detection_limit(0.0, 7, 0.01, 0.01), None);
        assert_eq!(detection_limit(1.0, 1, 0.01, 0.01), None);
    }

    // Past 1000 degrees of freedom the normal distribution is used; at 1000
    // Student's t still is (the switch must not move results silently).
    #[test]
    fn the_normal_takes_over_only_past_1000_degrees_of_freedom() {
        let x = -1.7;
        let normal = Normal::new(0.0, 1.0).unwrap().cdf(x);
        let t1000 = StudentsT::new(0.0, 1.0, 1000.0).unwrap().cdf(x);
        assert_ne!(normal, t1000);
        assert_eq!(beta_at_limit(0.0, 1.7, 1.0, 1001).unwrap(), t1000);
        assert_eq!(beta_at_limit(0.0, 1.7, 1.0, 5001).unwrap(), normal);
        let z = Normal::new(0.0, 1.0).unwrap().inverse_cdf(0.95);
        let t = StudentsT::new(0.0, 1.0, 1000.0).unwrap().inverse_cdf(0.95);
        assert_eq!(detection_limit(1.0, 5001, 0.05, 0.05).unwrap(), 2.0 * z);
        assert_eq!(detection_limit(1.0, 1001, 0.05, 0.05).unwrap(), 2.0 * t);
    }
}
