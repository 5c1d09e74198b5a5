//! Phase 3: the state of a result against its sample limits, and the verdict
//! against its spec under the lab's decision rule.

use crate::read::DecisionRule;
use rust_decimal::Decimal;
use std::fmt;

#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum State {
    NotDetected,
    DetectedBelowLoq,
    Quantified,
    OverRange,
}

impl State {
    pub const ALL: [State; 4] = [
        State::NotDetected,
        State::DetectedBelowLoq,
        State::Quantified,
        State::OverRange,
    ];

    pub fn name(self) -> &'static str {
        match self {
            State::NotDetected => "not-detected",
            State::DetectedBelowLoq => "detected-below-loq",
            State::Quantified => "quantified",
            State::OverRange => "over-range",
        }
    }
}

impl fmt::Display for State {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Verdict {
    Pass,
    ConditionalPass,
    ConditionalFail,
    Fail,
    Inconclusive,
}

impl Verdict {
    pub const ALL: [Verdict; 5] = [
        Verdict::Pass,
        Verdict::ConditionalPass,
        Verdict::ConditionalFail,
        Verdict::Fail,
        Verdict::Inconclusive,
    ];

    pub fn name(self) -> &'static str {
        match self {
            Verdict::Pass => "pass",
            Verdict::ConditionalPass => "conditional-pass",
            Verdict::ConditionalFail => "conditional-fail",
            Verdict::Fail => "fail",
            Verdict::Inconclusive => "inconclusive",
        }
    }
}

impl fmt::Display for Verdict {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// The state of a result. A value exactly at the MDL counts as detected and
/// exactly at the LOQ as quantified (common practice, no source).
pub fn state(value: Decimal, mdl: Decimal, loq: Decimal, over_range: bool) -> State {
    if over_range {
        State::OverRange
    } else if value < mdl {
        State::NotDetected
    } else if value < loq {
        State::DetectedBelowLoq
    } else {
        State::Quantified
    }
}

/// What the verdict is computed from, already in the result's unit (and
/// already rounded when the lab compares reported values).
#[derive(Debug, Clone, Copy)]
pub struct Comparison {
    pub state: State,
    pub value: Decimal,
    pub mdl: Decimal,
    pub loq: Decimal,
    pub upper: Option<Decimal>,
    pub limit: Decimal,
    pub uncertainty_pct: Option<Decimal>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VerdictError {
    /// The guarded rule needs U, and the result has none.
    NoUncertainty,
    Overflow,
}

pub fn verdict(c: &Comparison, rule: DecisionRule) -> Result<Verdict, VerdictError> {
    let within = |x: Decimal| {
        if x <= c.limit {
            Verdict::Pass
        } else {
            Verdict::Inconclusive
        }
    };
    Ok(match c.state {
        // The test could not see down to the limit when the MDL lies above it.
        State::NotDetected => within(c.mdl),
        State::DetectedBelowLoq => within(c.loq),
        State::OverRange => match c.upper {
            // The true value is above the upper range; if that already reaches
            // the limit, the limit is exceeded whatever the exact value.
            Some(u) if u >= c.limit => Verdict::Fail,
            _ => Verdict::Inconclusive,
        },
        State::Quantified => match rule {
            DecisionRule::Simple => {
                if c.value <= c.limit {
                    Verdict::Pass
                } else {
                    Verdict::Fail
                }
            }
            DecisionRule::Guarded => {
                let pct = c.uncertainty_pct.ok_or(VerdictError::NoUncertainty)?;
                guard_band(c.value, c.limit, pct).ok_or(VerdictError::Overflow)?
            }
        },
    })
}

/// The expanded uncertainty U (k = 2) of a result from its relative value
/// in %: |x| × U% / 100. None on overflow.
pub fn expanded_uncertainty(value: Decimal, uncertainty_pct: Decimal) -> Option<Decimal> {
    value
        .abs()
        .checked_mul(uncertainty_pct)?
        .checked_div(Decimal::ONE_HUNDRED)
}

/// U as reported: at most two significant figures (GUM, JCGM 100:2008,
/// 7.2.6), and never more than the result's own.
pub fn reported_uncertainty(u: Decimal, sig: u32) -> Decimal {
    crate::numeric::round_sig(u, sig.min(2))
}

/// ILAC-G8:09/2019 guard band with w = U (expanded uncertainty, k = 2):
/// pass up to L − U, conditional pass up to L, conditional fail up to L + U,
/// fail beyond.
pub fn guard_band(value: Decimal, limit: Decimal, uncertainty_pct: Decimal) -> Option<Verdict> {
    let u = expanded_uncertainty(value, uncertainty_pct)?;
    Some(if value <= limit.checked_sub(u)? {
        Verdict::Pass
    } else if value <= limit {
        Verdict::ConditionalPass
    } else if value <= limit.checked_add(u)? {
        Verdict::ConditionalFail
    } else {
        Verdict::Fail
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::str::FromStr;

    fn d(s: &str) -> Decimal {
        Decimal::from_str(s).unwrap()
    }

    // Boundaries: exactly at the MDL is detected, exactly at the LOQ quantified
    // (common practice, no source).
    #[test]
    fn states_at_the_boundaries() {
        let (mdl, loq) = (d("0.6"), d("2.0"));
        assert_eq!(state(d("0.5999"), mdl, loq, false), State::NotDetected);
        assert_eq!(state(d("0.6"), mdl, loq, false), State::DetectedBelowLoq);
        assert_eq!(state(d("1.9999"), mdl, loq, false), State::DetectedBelowLoq);
        assert_eq!(state(d("2.0"), mdl, loq, false), State::Quantified);
        assert_eq!(state(d("-0.3"), mdl, loq, false), State::NotDetected);
        assert_eq!(state(d("0.1"), mdl, loq, true), State::OverRange);
    }

    // ILAC-G8:09/2019, non-binary statement with guard band w = U (section number
    // from memory): pass / conditional pass / conditional fail / fail.
    // L = 90 and U = 10 % of the result.
    #[test]
    fn guard_band_zones() {
        let l = d("90");
        let pct = d("10");
        // 80 + 8 = 88 ≤ 90 → below L − U: pass
        assert_eq!(guard_band(d("80"), l, pct), Some(Verdict::Pass));
        // 86: U = 8.6, L − U = 81.4 < 86 ≤ 90 → conditional pass
        assert_eq!(guard_band(d("86"), l, pct), Some(Verdict::ConditionalPass));
        // exactly L → conditional pass (inside the band below the limit)
        assert_eq!(guard_band(d("90"), l, pct), Some(Verdict::ConditionalPass));
        // 94: U = 9.4, L + U = 99.4 → conditional fail
        assert_eq!(guard_band(d("94"), l, pct), Some(Verdict::ConditionalFail));
        // 110: U = 11, L + U = 101 < 110 → fail
        assert_eq!(guard_band(d("110"), l, pct), Some(Verdict::Fail));
        // Edge: C = L − U exactly (L = 88, C = 80, U = 8) is a pass.
        assert_eq!(guard_band(d("80"), d("88"), pct), Some(Verdict::Pass));
        // Edge: C = L + U exactly (L = 99, C = 110, U = 11) is a conditional fail.
        assert_eq!(
            guard_band(d("110"), d("99"), pct),
            Some(Verdict::ConditionalFail)
        );
        assert_eq!(guard_band(d("110.0001"), d("99"), pct), Some(Verdict::Fail));
    }

    // U = |x| × U% / 100; reported to two significant figures (JCGM 100:2008
    // GUM 7.2.6: "at most two significant digits"), round half to even.
    #[test]
    fn expanded_uncertainty_and_its_reported_digits() {
        assert_eq!(expanded_uncertainty(d("74.6"), d("12")), Some(d("8.952")));
        assert_eq!(expanded_uncertainty(d("-2.5"), d("10")), Some(d("0.25")));
        assert_eq!(reported_uncertainty(d("8.952"), 3).to_string(), "9.0");
        assert_eq!(reported_uncertainty(d("10.395"), 3).to_string(), "10");
        assert_eq!(reported_uncertainty(d("0.0125"), 3).to_string(), "0.012");
        // A lab reporting one significant figure gets U to one as well.
        assert_eq!(reported_uncertainty(d("8.952"), 1).to_string(), "9");
        assert_eq!(expanded_uncertainty(Decimal::MAX, d("200")), None);
    }

    fn cmp(state: State, value: &str) -> Comparison {
        Comparison {
            state,
            value: d(value),
            mdl: d("4"),
            loq: d("12"),
            upper: Some(d("2500")),
            limit: d("90"),
            uncertainty_pct: None,
        }
    }

    #[test]
    fn verdicts_by_state() {
        let simple = DecisionRule::Simple;
        assert_eq!(
            verdict(&cmp(State::NotDetected, "1"), simple),
            Ok(Verdict::Pass)
        );
        let mut c = cmp(State::NotDetected, "1");
        c.mdl = d("333");
        assert_eq!(verdict(&c, simple), Ok(Verdict::Inconclusive));
        assert_eq!(
            verdict(&cmp(State::DetectedBelowLoq, "5"), simple),
            Ok(Verdict::Pass)
        );
        let mut c = cmp(State::DetectedBelowLoq, "5");
        c.loq = d("91");
        assert_eq!(verdict(&c, simple), Ok(Verdict::Inconclusive));
        assert_eq!(
            verdict(&cmp(State::Quantified, "90"), simple),
            Ok(Verdict::Pass)
        );
        assert_eq!(
            verdict(&cmp(State::Quantified, "90.01"), simple),
            Ok(Verdict::Fail)
        );
        assert_eq!(
            verdict(&cmp(State::OverRange, "3000"), simple),
            Ok(Verdict::Fail)
        );
        let mut c = cmp(State::OverRange, "3000");
        c.upper = Some(d("50"));
        assert_eq!(verdict(&c, simple), Ok(Verdict::Inconclusive));
        assert_eq!(
            verdict(&cmp(State::Quantified, "50"), DecisionRule::Guarded),
            Err(VerdictError::NoUncertainty)
        );
    }

    // The words of the report CSV's state and verdict columns (README): a
    // renamed word would silently change every issued file.
    #[test]
    fn state_and_verdict_words_are_fixed() {
        let states: Vec<String> = State::ALL.iter().map(|s| s.to_string()).collect();
        assert_eq!(
            states,
            [
                "not-detected",
                "detected-below-loq",
                "quantified",
                "over-range"
            ]
        );
        let verdicts: Vec<String> = Verdict::ALL.iter().map(|v| v.to_string()).collect();
        assert_eq!(
            verdicts,
            [
                "pass",
                "conditional-pass",
                "conditional-fail",
                "fail",
                "inconclusive"
            ]
        );
        for s in State::ALL {
            assert_eq!(s.to_string(), s.name());
        }
        for v in Verdict::ALL {
            assert_eq!(format!("{v}"), v.name());
        }
    }
}
