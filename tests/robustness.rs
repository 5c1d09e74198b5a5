//! Whatever numbers a results file holds, evaluation ends in a result or an
//! error naming the row, never a panic.

use limen::read::{Batch, Lab, Manifest, Register, Specs, Workspace};
use proptest::prelude::*;
use proptest::test_runner::TestCaseError;
use std::sync::atomic::{AtomicUsize, Ordering};

static RENDERED: AtomicUsize = AtomicUsize::new(0);

/// Mostly plausible positive numbers, sometimes negative, sometimes huge.
fn number() -> impl Strategy<Value = String> {
    prop_oneof![
        6 => (Just(false), proptest::collection::vec(0u8..10, 1..4), proptest::collection::vec(0u8..10, 0..4)),
        1 => (any::<bool>(), proptest::collection::vec(0u8..10, 1..30), proptest::collection::vec(0u8..10, 0..30)),
    ]
    .prop_map(
        |(neg, int, frac)| {
            let digits = |v: &[u8]| v.iter().map(|d| (b'0' + d) as char).collect::<String>();
            let mut s = if neg { "-".to_string() } else { String::new() };
            s.push_str(&digits(&int));
            if !frac.is_empty() {
                s.push('.');
                s.push_str(&digits(&frac));
            }
            s
        },
    )
}

fn workspace() -> Workspace {
    workspace_at(3)
}

fn workspace_at(figures: u32) -> Workspace {
    Workspace {
        root: ".".into(),
        lab_text: String::new(),
        qc_text: None,
        lab: Lab::parse("lab.toml", &format!("name='L'\naddress='A'\nsignatory='S'\ndecision_rule='guarded'\nsignificant_figures={figures}\n[qc]\nrequired=[]\n")).unwrap(),
        register: Register::parse(
            "limits.csv",
            b"analyte,matrix,method,unit,mdl,loq,effective_from,nominal_mass_g,nominal_volume_ml,upper_range,upper_range_unit\n\
              Pb,paint,6010D,ug/L,8,25,2025-01-01,,,5000,ug/L\n\
              Pb,alloy,6010D,%,0.0005,0.0015,2025-01-01,0.25,50,10000,mg/L\n",
        )
        .unwrap(),
        specs: Specs::parse(
            "specs.csv",
            b"spec,analyte,matrix,limit,unit,effective_from\nP,Pb,,0.009,%,2009-01-01\n",
        )
        .unwrap(),
        register_sha256: String::new(),
        specs_sha256: String::new(),
    }
}

fn batch(csv: String) -> Batch {
    let manifest = "batch='B'\nreport='R'\nclient_name='c'\nclient_address='a'\nclient_contact='p'\nreceived_on=2026-11-10\nresults='r.csv'\n";
    Batch {
        dir: ".".into(),
        manifest_file: "batch.toml".into(),
        manifest_text: manifest.into(),
        manifest: Manifest::parse("batch.toml", manifest).unwrap(),
        results_file: "r.csv".into(),
        results_bytes: csv.into_bytes(),
        results_on_disk: None,
    }
}

fn run() -> limen::RunInfo {
    limen::RunInfo {
        issued_at: chrono::DateTime::from_timestamp(0, 0).unwrap(),
        tool_version: "t".into(),
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]
    #[test]
    fn any_numbers_give_a_result_or_a_named_error(
        reading in number(), dilution in number(), mass in number(), volume in number(),
        pct in number(), spike in number(), alloy in any::<bool>(), liquid in any::<bool>(),
    ) {
        let matrix = if alloy { "alloy" } else { "paint" };
        let (m, v) = if liquid { (String::new(), String::new()) } else { (mass, volume) };
        let csv = format!(
            "lab_id,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec,uncertainty_pct,spike_added,parent_id\n\
             S1,sample,Pb,{matrix},6010D,{reading},ug/L,{dilution},{m},{v},2026-11-13,P,{pct},,\n\
             D1,duplicate,Pb,{matrix},6010D,{reading},ug/L,{dilution},{m},{v},2026-11-13,,,,S1\n\
             MS1,matrix-spike,Pb,{matrix},6010D,{reading},ug/L,{dilution},{m},{v},2026-11-13,,,{spike},S1\n"
        );
        match limen::report::build(&workspace(), &batch(csv), 0, &run()) {
            Ok(report) => {
                // Both files render for whatever came out.
                let templates = limen::templates::Templates::load(None).unwrap();
                let (files, _) = limen::issue::render(&report, &templates).map_err(|e| TestCaseError::fail(e.to_string()))?;
                prop_assert!(files[1].bytes.starts_with(b"%PDF-"));
                RENDERED.fetch_add(1, Ordering::SeqCst);
            }
            Err(e) => {
                let text = e.to_string();
                prop_assert!(
                    ["r.csv:", "specs.csv:", "limits.csv:"].iter().any(|f| text.starts_with(f)),
                    "an error must name its file and line: {text}"
                );
            }
        }
    }
}

#[test]
fn the_generator_reaches_rendering() {
    // Guards the property above against testing only the error path.
    any_numbers_give_a_result_or_a_named_error();
    assert!(
        RENDERED.load(Ordering::SeqCst) > 10,
        "only {} cases rendered",
        RENDERED.load(Ordering::SeqCst)
    );
}

// A result at the top of the decimal range, rounded to few figures, would
// round past the range (7.9e28 to one figure is 8e28): it is refused as
// overflow on its row, at every number of figures a lab may choose, and a
// result just below is evaluated.
#[test]
fn results_at_the_end_of_the_decimal_range_are_refused_not_rounded_over() {
    let row = |reading: &str| {
        format!(
            "lab_id,kind,analyte,matrix,method,reading,reading_unit,dilution,analyzed_on\n\
             S1,sample,Pb,paint,6010D,{reading},ug/L,1,2026-11-13\n"
        )
    };
    let huge = [
        "79228162514264337593543950335",
        "75000000000000000000000000000",
    ];
    for figures in 1..=10 {
        let ws = workspace_at(figures);
        for reading in huge {
            let e = limen::report::build(&ws, &batch(row(reading)), 0, &run())
                .err()
                .unwrap_or_else(|| panic!("{reading} at {figures} figures was reported"));
            assert!(
                e.to_string()
                    .starts_with("r.csv:2: field `reading`: arithmetic overflow"),
                "{e}"
            );
        }
        let below = row("69999999999999999999999999999");
        let report = limen::report::build(&ws, &batch(below), 0, &run())
            .unwrap_or_else(|e| panic!("{figures} figures: {e}"));
        assert_eq!(report.rows.len(), 1);
    }
}
