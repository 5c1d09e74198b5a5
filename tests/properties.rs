//! Properties of the core rules over many generated results.

use limen::classify::{self, Comparison, State, Verdict};
use limen::read::{DecisionRule, Kind, Lab, Register, ResultRow, Specs, Workspace};
use limen::resolve::{Resolution, resolve};
use limen::units::Unit;
use proptest::prelude::*;
use rust_decimal::Decimal;

fn workspace() -> Workspace {
    Workspace {
        root: ".".into(),
        lab_text: String::new(),
        qc_text: None,
        lab: Lab::parse("lab.toml", "name='L'\naddress='A'\nsignatory='S'\n").unwrap(),
        register: Register::parse(
            "limits.csv",
            b"analyte,matrix,method,unit,mdl,loq,effective_from,nominal_mass_g,nominal_volume_ml,upper_range,upper_range_unit\n\
              Pb,paint,6010D,ug/L,8,25,2025-01-01,,,5000,ug/L\n\
              Pb,alloy,6010D,mg/kg,5,15,2025-01-01,0.25,50,10000,ug/L\n",
        )
        .unwrap(),
        specs: Specs::parse("specs.csv", b"spec,analyte,limit,unit,effective_from\n").unwrap(),
        register_sha256: String::new(),
        specs_sha256: String::new(),
    }
}

fn row(matrix: &str, reading: Decimal, dilution: Decimal, mass: Decimal) -> ResultRow {
    ResultRow {
        file: "r.csv".into(),
        line: 2,
        lab_id: "S".into(),
        client_id: String::new(),
        description: String::new(),
        kind: Kind::Sample,
        analyte: "Pb".into(),
        matrix: matrix.into(),
        method: "6010D".into(),
        reading,
        reading_unit: Unit::UgPerL,
        dilution,
        mass_g: Some(mass),
        volume_ml: Some(Decimal::new(50, 0)),
        analyzed_on: chrono::NaiveDate::from_ymd_opt(2026, 1, 1).unwrap(),
        spec: None,
        uncertainty_pct: None,
        spike_added: None,
        parent_id: None,
    }
}

fn resolved(ws: &Workspace, r: &ResultRow) -> (State, Decimal) {
    match resolve(r, ws).unwrap() {
        Resolution::Resolved(x) => (classify::state(x.value, x.mdl, x.loq, x.over_range), x.mdl),
        Resolution::Blocked(p) => panic!("{p}"),
    }
}

fn dec(milli: i64) -> Decimal {
    Decimal::new(milli, 3)
}

proptest! {
    #[test]
    fn state_never_goes_down_as_the_reading_goes_up(
        a in -10_000i64..8_000_000, b in -10_000i64..8_000_000,
        dil in 1i64..1000, mass in 5i64..500, alloy in any::<bool>(),
    ) {
        let ws = workspace();
        let matrix = if alloy { "alloy" } else { "paint" };
        let (lo, hi) = (a.min(b), a.max(b));
        let s_lo = resolved(&ws, &row(matrix, dec(lo), Decimal::new(dil, 1), dec(mass))).0;
        let s_hi = resolved(&ws, &row(matrix, dec(hi), Decimal::new(dil, 1), dec(mass))).0;
        prop_assert!(s_lo <= s_hi, "{lo} -> {s_lo:?}, {hi} -> {s_hi:?}");
    }

    #[test]
    fn sample_mdl_is_proportional_to_dilution(
        dil in 1i64..10_000, k in 2i64..100, mass in 5i64..500, alloy in any::<bool>(),
    ) {
        let ws = workspace();
        let matrix = if alloy { "alloy" } else { "paint" };
        let d1 = Decimal::new(dil, 1);
        let (_, m1) = resolved(&ws, &row(matrix, Decimal::ONE, d1, dec(mass)));
        let (_, mk) = resolved(&ws, &row(matrix, Decimal::ONE, d1 * Decimal::from(k), dec(mass)));
        let expected = m1 * Decimal::from(k);
        // Equal to within the last of 28 digits (one division each side).
        prop_assert!((mk - expected).abs() <= expected * Decimal::new(1, 20), "{mk} vs {expected}");
    }

    #[test]
    fn a_quantified_result_above_its_limit_is_never_a_pass(
        limit in 1i64..1_000_000, excess in 1i64..1_000_000, pct in 0i64..500, guarded in any::<bool>(),
    ) {
        let limit = dec(limit);
        let value = limit + dec(excess);
        let c = Comparison {
            state: State::Quantified,
            value,
            mdl: Decimal::new(1, 3),
            loq: Decimal::new(1, 3),
            upper: None,
            limit,
            uncertainty_pct: Some(Decimal::new(pct, 1)),
        };
        let rule = if guarded { DecisionRule::Guarded } else { DecisionRule::Simple };
        let v = classify::verdict(&c, rule).unwrap();
        prop_assert!(v != Verdict::Pass && v != Verdict::ConditionalPass, "{value} > {limit} gave {v:?}");
    }
}
