//! The result strip: a small log-scale graphic beside each result that has
//! a limit, so a reader sees at a glance where the result, the MDL, the LOQ
//! and the limit sit.

use crate::classify::{State, Verdict};
use crate::layout::{BLACK, GREY, Item, LIGHT};
use crate::report::ReportRow;

pub const RED: (f32, f32, f32) = (0.78, 0.12, 0.12);
const GREEN: (f32, f32, f32) = (0.10, 0.55, 0.25);
const AMBER: (f32, f32, f32) = (0.85, 0.55, 0.05);
const BLUE: (f32, f32, f32) = (0.30, 0.42, 0.65);

fn verdict_color(v: Option<Verdict>) -> (f32, f32, f32) {
    match v {
        Some(Verdict::Pass) => GREEN,
        Some(Verdict::Fail) => RED,
        Some(_) => AMBER,
        None => BLACK,
    }
}

/// The log-scale strip: MDL and LOQ as thin marks, the limit as a red mark,
/// the result as a dot, or a bar for a "less than" or "above range" result.
pub fn strip(r: &ReportRow, width: f32, height: f32) -> Vec<Item> {
    let Some(limit) = r.spec_limit else {
        return Vec::new();
    };
    let f = |d: rust_decimal::Decimal| d.to_string().parse::<f64>().unwrap_or(f64::NAN);
    let (mdl, loq, lim, val) = (f(r.mdl), f(r.loq), f(limit), f(r.value_unrounded));
    let mut lo = mdl.min(lim);
    let mut hi = lim.max(loq);
    if val > 0.0 {
        lo = lo.min(val);
        hi = hi.max(val);
    }
    if !(lo > 0.0 && hi.is_finite()) {
        return Vec::new();
    }
    let (llo, lhi) = (
        (lo / 2.0).log10(),
        (hi * 2.0).log10().max((lo / 2.0).log10() + 1.0),
    );
    let x = |v: f64| -> f32 {
        if v <= 0.0 {
            return 0.0;
        }
        (((v.log10() - llo) / (lhi - llo)).clamp(0.0, 1.0) * width as f64) as f32
    };
    let mid = height / 2.0;
    let mut items = vec![Item::Line {
        x1: 0.0,
        y1: mid,
        x2: width,
        y2: mid,
        width: 0.4,
        color: LIGHT,
    }];
    let tick = |v: f64, h: f32, w: f32, color| Item::Line {
        x1: x(v),
        y1: mid - h / 2.0,
        x2: x(v),
        y2: mid + h / 2.0,
        width: w,
        color,
    };
    items.push(tick(mdl, height * 0.5, 0.5, GREY));
    items.push(tick(loq, height * 0.5, 0.5, GREY));
    let color = verdict_color(r.verdict);
    match r.state {
        State::NotDetected => items.push(Item::Rect {
            x: 0.0,
            y: mid - 1.2,
            w: x(mdl).max(1.0),
            h: 2.4,
            color: BLUE,
        }),
        State::OverRange => {
            let start = r
                .reported
                .trim_start_matches('>')
                .trim()
                .parse::<f64>()
                .map(x)
                .unwrap_or(width * 0.9);
            items.push(Item::Rect {
                x: start,
                y: mid - 1.2,
                w: (width - start).max(1.0),
                h: 2.4,
                color,
            });
        }
        State::DetectedBelowLoq | State::Quantified => {
            let cx = x(val);
            items.push(Item::Rect {
                x: cx - 2.0,
                y: mid - 2.0,
                w: 4.0,
                h: 4.0,
                color,
            });
        }
    }
    items.push(tick(lim, height, 1.4, RED));
    items
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::Unit;
    use rust_decimal::Decimal;
    use std::str::FromStr;

    fn row(state: State, value: &str, verdict: Verdict) -> ReportRow {
        let d = |s: &str| Decimal::from_str(s).unwrap();
        ReportRow {
            line: 2,
            lab_id: "S1".into(),
            client_id: String::new(),
            description: String::new(),
            analyte: "Pb".into(),
            matrix: "paint".into(),
            method: "6010D".into(),
            analyzed_on: chrono::NaiveDate::from_ymd_opt(2026, 11, 13).unwrap(),
            reported: value.into(),
            value: Some(d(value)),
            value_unrounded: d(value),
            unit: Unit::MgPerKg,
            state,
            mdl: d("4"),
            loq: d("12"),
            mdl_unrounded: d("4"),
            loq_unrounded: d("12"),
            dilution: d("1"),
            spec: Some("P".into()),
            spec_limit: Some(d("90")),
            spec_citation: "".into(),
            verdict: Some(verdict),
            uncertainty_pct: None,
            uncertainty: None,
            ld: None,
            beta_at_limit: None,
            weak_pass: false,
            qualifiers: Vec::new(),
            limits_row: "S".into(),
        }
    }

    /// x of the limit mark (the thickest line) and of the result dot or bar.
    fn marks(items: &[Item]) -> (f32, Option<(f32, f32)>) {
        let limit = items
            .iter()
            .filter_map(|i| match i {
                Item::Line { x1, width, .. } if *width > 1.0 => Some(*x1),
                _ => None,
            })
            .next()
            .unwrap();
        let result = items.iter().find_map(|i| match i {
            Item::Rect { x, w, .. } => Some((*x, *x + *w)),
            _ => None,
        });
        (limit, result)
    }

    #[test]
    fn the_strip_puts_the_result_on_the_right_side_of_the_limit() {
        let (limit, dot) = marks(&strip(
            &row(State::Quantified, "25", Verdict::Pass),
            80.0,
            9.0,
        ));
        assert!(dot.unwrap().1 < limit, "a pass sits left of the limit");
        let (limit, dot) = marks(&strip(
            &row(State::Quantified, "300", Verdict::Fail),
            80.0,
            9.0,
        ));
        assert!(dot.unwrap().0 > limit, "a fail sits right of the limit");
        for it in strip(&row(State::Quantified, "300", Verdict::Fail), 80.0, 9.0) {
            if let Item::Rect { x, w, .. } = it {
                assert!(x >= 0.0 - 2.0 && x + w <= 80.0 + 2.0, "inside the strip");
            }
        }
        // Not detected: a bar from the left edge up to the MDL, below the limit.
        let mut nd = row(State::NotDetected, "1", Verdict::Pass);
        nd.reported = "< 4.00".into();
        let (limit, bar) = marks(&strip(&nd, 80.0, 9.0));
        let (start, end) = bar.unwrap();
        assert_eq!(start, 0.0);
        assert!(end < limit);
        // No limit, no strip.
        let mut none = row(State::Quantified, "25", Verdict::Pass);
        none.spec_limit = None;
        assert!(strip(&none, 80.0, 9.0).is_empty());
    }
}
