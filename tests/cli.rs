//! The binary on fixture workspaces: exit codes, messages and report CSVs.

mod util;
use util::{TestDir, csv_column, csv_row, golden};

const LAB: &str = "name = \"Fixture Lab\"\naddress = \"1 Test Road\"\nsignatory = \"A. Analyst\"\n";
const LIMITS: &str = "analyte,matrix,method,unit,mdl,loq,effective_from,upper_range,upper_range_unit,study_id\n\
Pb,paint,6010D,ug/L,8,25,2025-01-01,5000,ug/L,S-OLD\n\
Pb,paint,6010D,ug/L,12,36,2026-11-16,5000,ug/L,S-NEW\n\
Pb,leachate,6020B,ug/L,0.5,1.5,2025-01-01,500,ug/L,S-LCH\n";
const SPECS: &str = "spec,analyte,matrix,limit,unit,citation,effective_from\n\
PAINT,Pb,paint,90,mg/kg,fixture limit,2009-01-01\n\
CUP,Pb,leachate,0.5,ug/mL,fixture limit,2000-01-01\n";
const BATCH: &str = "batch = \"B1\"\nreport = \"R-1\"\nclient_name = \"Client\"\nclient_address = \"Addr\"\nclient_contact = \"Contact\"\nreceived_on = 2026-11-10\nresults = \"results.csv\"\n";
const HEAD: &str = "lab_id,client_id,description,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec,uncertainty_pct\n";

fn fixture(name: &str, results: &str) -> TestDir {
    let t = TestDir::new(name);
    t.write("ws/lab.toml", LAB);
    // These fixtures test results, not QC: no QC kind is required.
    t.write("ws/qc.toml", "required = []\n");
    t.write("ws/limits.csv", LIMITS);
    t.write("ws/specs.csv", SPECS);
    t.write("ws/b1/batch.toml", BATCH);
    t.write("ws/b1/results.csv", results);
    t.signing_key("ws", "default");
    t
}

fn rows(body: &str) -> String {
    format!("{HEAD}{body}")
}

#[test]
fn demo_issues_the_two_clean_batches_and_holds_the_blocked_one() {
    let t = TestDir::new("demo");
    let r = t.limen(&["demo", "--out", "out"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        r.stdout
            .contains("R01 Pb: reading 6200 µg/L is above the calibrated range"),
        "{}",
        r.stdout
    );
    assert!(r.stdout.contains("R02 Sb: no limits"), "{}", r.stdout);
    assert!(
        r.stdout.contains("no method-blank for Pb / 6010D"),
        "{}",
        r.stdout
    );
    assert!(t.exists("out/reports/COA-2611-041.csv"));
    assert!(t.exists("out/reports/COA-2611-052.csv"));
    assert!(!t.exists("out/reports/COA-2611-058.csv"));
    // The register update re-issues the furniture report, and only it.
    assert!(t.exists("out/reports/COA-2611-041-r1.pdf"));
    assert!(!t.exists("out/reports/COA-2611-052-r1.pdf"));
    assert!(r.stdout.contains("REPLACED by revision 1"), "{}", r.stdout);
    assert!(
        r.stdout.contains("current: this is the latest revision"),
        "{}",
        r.stdout
    );
    golden("COA-2611-041.csv", &t.read("out/reports/COA-2611-041.csv"));
    golden("COA-2611-052.csv", &t.read("out/reports/COA-2611-052.csv"));
    // A second run replaces the demo's own folder rather than failing.
    let again = t.limen(&["demo", "--out", "out"]);
    assert_eq!(again.code, 0, "{}", again.stderr);
    // But never a folder that is not the demo's.
    t.write("mine/notes.txt", "keep me");
    let refused = t.limen(&["demo", "--out", "mine"]);
    assert_eq!(refused.code, 2);
    assert_eq!(t.read("mine/notes.txt"), "keep me");
}

#[test]
fn demo_covers_every_state_and_verdict() {
    let t = TestDir::new("demo-cover");
    t.demo_workspace("ws");
    let mut states = std::collections::BTreeSet::new();
    let mut verdicts = std::collections::BTreeSet::new();
    for b in [
        "furniture-jewellery-2611-041",
        "ceramics-2611-052",
        "rescreen-2611-058",
    ] {
        let r = t.limen(&["check", &format!("ws/{b}"), "--format", "csv"]);
        states.extend(csv_column(&r.stdout, "state"));
        verdicts.extend(csv_column(&r.stdout, "verdict"));
        // The value pair agrees with the state: an over-range result has no
        // number, a not-detected one no rounded value.
        let rows = csv_column(&r.stdout, "state")
            .into_iter()
            .zip(csv_column(&r.stdout, "value"))
            .zip(csv_column(&r.stdout, "value_unrounded"))
            .zip(csv_column(&r.stdout, "reported"));
        for (((state, value), exact), reported) in rows {
            match state.as_str() {
                "over-range" => {
                    assert_eq!((value.as_str(), exact.as_str()), ("", ""), "{reported}");
                    assert!(reported.starts_with("> ") || reported == "over range");
                }
                "not-detected" => assert!(value.is_empty() && !exact.is_empty()),
                _ => assert!(!value.is_empty() && !exact.is_empty(), "{state}"),
            }
        }
    }
    for s in [
        "not-detected",
        "detected-below-loq",
        "quantified",
        "over-range",
    ] {
        assert!(states.contains(s), "{s} missing from {states:?}");
    }
    for v in [
        "pass",
        "fail",
        "inconclusive",
        "conditional-pass",
        "conditional-fail",
    ] {
        assert!(verdicts.contains(v), "{v} missing from {verdicts:?}");
    }
}

#[test]
fn check_csv_equals_the_issued_csv_and_blocked_goes_to_stderr() {
    let t = TestDir::new("check-csv");
    t.demo_workspace("ws");
    let r = t.limen(&["check", "ws/ceramics-2611-052", "--format", "csv"]);
    assert_eq!(r.code, 0);
    golden("COA-2611-052.csv", &r.stdout);
    let r = t.limen(&["check", "ws/rescreen-2611-058", "--format", "csv"]);
    assert_eq!(r.code, 3);
    assert!(
        r.stderr
            .contains("R01 Pb: reading 6200 µg/L is above the calibrated range"),
        "{}",
        r.stderr
    );
    assert!(r.stderr.contains("R02 Sb: no limits"), "{}", r.stderr);
    assert!(r.stdout.starts_with("report,revision,lab_id,"));
}

#[test]
fn check_table_shows_results_then_problems() {
    let t = TestDir::new("check-table");
    t.demo_workspace("ws");
    let r = t.limen(&["check", "ws/rescreen-2611-058"]);
    assert_eq!(r.code, 3);
    let table_at = r.stdout.find("R01     Pb").expect("row for R01");
    let problems_at = r.stdout.find("BLOCKED").expect("problems");
    assert!(table_at < problems_at);
    assert!(r.stdout.contains("> 2490"), "{}", r.stdout);
    // No colour codes when stdout is not a terminal.
    assert!(!r.stdout.contains('\x1b'));
}

// Worked example (digest to sample): 50 µg/L, 50 mL, 0.100 g, dilution 1 -> 25.0 mg/kg;
// MDL_s = 8 µg/L × 50 / 0.100 / 1000 = 4.00 mg/kg, LOQ_s = 12.5 mg/kg.
#[test]
fn issue_writes_the_report_once() {
    let t = fixture(
        "issue",
        &rows("S1,C1,Chip,sample,Pb,paint,6010D,50,ug/L,1,0.100,50,2026-11-13,PAINT,\n"),
    );
    let r = t.limen(&["issue", "ws/b1", "--out", "out"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let csv = t.read("out/R-1.csv");
    let row = csv_row(&csv, "S1", "Pb");
    assert_eq!(row["reported"], "25.0");
    assert_eq!(row["value"], "25.0");
    assert_eq!(row["value_unrounded"], "25");
    assert_eq!(row["unit"], "mg/kg");
    assert_eq!(row["mdl"], "4.00");
    assert_eq!(row["loq"], "12.5");
    assert_eq!(row["state"], "quantified");
    assert_eq!(row["verdict"], "pass");
    assert_eq!(row["spec_limit"], "90");
    assert_eq!(row["limits_row"], "S-OLD");
    assert_eq!(row["revision"], "0");
    let again = t.limen(&["issue", "ws/b1", "--out", "out"]);
    assert_eq!(again.code, 2);
    assert!(
        again.stderr.contains("report R-1 is already in the ledger"),
        "{}",
        again.stderr
    );
    assert!(
        again
            .stderr
            .contains("hint: an issued report never changes: use `limen reissue R-1")
    );
    assert_eq!(t.read("out/R-1.csv"), csv);
    // A file already under the name is never overwritten either.
    let t2 = fixture(
        "issue-exists",
        &rows("S1,C1,Chip,sample,Pb,paint,6010D,50,ug/L,1,0.100,50,2026-11-13,PAINT,\n"),
    );
    t2.write("out/R-1.pdf", "someone else's file");
    let r = t2.limen(&["issue", "ws/b1", "--out", "out"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("already exists"), "{}", r.stderr);
    assert_eq!(t2.read("out/R-1.pdf"), "someone else's file");
    assert!(!t2.exists("out/R-1.csv"));
}

#[test]
fn blocked_batch_is_not_issued() {
    let t = fixture(
        "blocked",
        &rows("S1,C1,Chip,sample,Pb,paint,6010D,6000,ug/L,1,0.100,50,2026-11-13,PAINT,\n"),
    );
    let r = t.limen(&["issue", "ws/b1", "--out", "out"]);
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert!(!t.exists("out/R-1.csv"));
    assert!(r.stderr.contains("above the calibrated range"));
}

#[test]
fn the_register_row_in_force_on_the_analysis_date_is_used() {
    // Same reading, analysed the day before and the day the new MDL takes effect.
    let t = fixture(
        "date-rule",
        &rows(
            "S1,,,sample,Pb,paint,6010D,10,ug/L,1,0.100,50,2026-11-15,PAINT,\n\
             S2,,,sample,Pb,paint,6010D,10,ug/L,1,0.100,50,2026-11-16,PAINT,\n",
        ),
    );
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let before = csv_row(&r.stdout, "S1", "Pb");
    let after = csv_row(&r.stdout, "S2", "Pb");
    // 10 µg/L -> 5.00 mg/kg; old MDL_s 4.00 (detected), new MDL_s 6.00 (not detected).
    assert_eq!(
        (before["state"].as_str(), before["limits_row"].as_str()),
        ("detected-below-loq", "S-OLD")
    );
    assert_eq!(
        (after["state"].as_str(), after["limits_row"].as_str()),
        ("not-detected", "S-NEW")
    );
    assert_eq!(after["reported"], "< 6.00");
    assert_eq!(after["value"], "");
}

#[test]
fn liquids_use_the_reading_unit_and_convert_the_limit() {
    let t = fixture(
        "liquid",
        &rows("L1,,,sample,Pb,leachate,6020B,61,ug/L,10,,,2026-11-18,CUP,\n"),
    );
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let row = csv_row(&r.stdout, "L1", "Pb");
    assert_eq!(row["value"], "610");
    assert_eq!(row["unit"], "µg/L");
    assert_eq!(row["mdl"], "5.00");
    // 0.5 µg/mL = 500 µg/L (SI)
    assert_eq!(row["spec_limit"], "500");
    assert_eq!(row["verdict"], "fail");
}

#[test]
fn guarded_rule_needs_uncertainty() {
    let t = fixture(
        "guarded",
        &rows("S1,,,sample,Pb,paint,6010D,170,ug/L,1,0.100,50,2026-11-13,PAINT,\n"),
    );
    t.write(
        "ws/b1/batch.toml",
        format!("{BATCH}decision_rule = \"guarded\"\n"),
    );
    let r = t.limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("results.csv:2: field `uncertainty_pct`"),
        "{}",
        r.stderr
    );
    // 170 µg/L -> 85.0 mg/kg; U = 10 % = 8.5; 85 > 90 − 8.5 -> conditional pass (ILAC-G8).
    t.write(
        "ws/b1/results.csv",
        rows("S1,,,sample,Pb,paint,6010D,170,ug/L,1,0.100,50,2026-11-13,PAINT,10\n"),
    );
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_eq!(
        csv_row(&r.stdout, "S1", "Pb")["verdict"],
        "conditional-pass"
    );
}

#[test]
fn reported_comparison_uses_the_rounded_value() {
    // 180.1 µg/L -> 90.05 mg/kg: fails unrounded, rounds to 90.0 (half to even) and passes reported.
    let body = rows("S1,,,sample,Pb,paint,6010D,180.1,ug/L,1,0.100,50,2026-11-13,PAINT,\n");
    let t = fixture("compare", &body);
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    assert_eq!(csv_row(&r.stdout, "S1", "Pb")["verdict"], "fail");
    t.write("ws/lab.toml", format!("{LAB}compare = \"reported\"\n"));
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    let row = csv_row(&r.stdout, "S1", "Pb");
    assert_eq!(
        (row["value"].as_str(), row["verdict"].as_str()),
        ("90.0", "pass")
    );
}

#[test]
fn nd_style_prints_nd() {
    let t = fixture(
        "nd",
        &rows("S1,,,sample,Pb,paint,6010D,1,ug/L,1,0.100,50,2026-11-13,PAINT,\n"),
    );
    t.write("ws/lab.toml", format!("{LAB}not_detected_style = \"nd\"\n"));
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    assert_eq!(csv_row(&r.stdout, "S1", "Pb")["reported"], "ND");
}

#[test]
fn formula_text_is_neutralised_but_numbers_are_not() {
    let t = fixture(
        "neutral",
        &rows(
            "S1,=HYPERLINK(\"x\"),+cmd,sample,Pb,paint,6010D,-2,ug/L,1,0.100,50,2026-11-13,PAINT,\n",
        ),
    );
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    let row = csv_row(&r.stdout, "S1", "Pb");
    assert_eq!(row["client_id"], "'=HYPERLINK(\"x\")");
    assert_eq!(row["description"], "'+cmd");
    assert_eq!(row["value_unrounded"], "-1");
}

#[test]
fn workspace_is_found_upward_or_given() {
    let t = fixture(
        "find",
        &rows("S1,,,sample,Pb,paint,6010D,50,ug/L,1,0.100,50,2026-11-13,PAINT,\n"),
    );
    std::fs::rename(t.path("ws/b1"), t.path("b1")).unwrap();
    let r = t.limen(&["check", "b1"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("no lab.toml"), "{}", r.stderr);
    let r = t.limen(&["check", "b1", "--workspace", "ws"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
}

#[test]
fn init_gives_a_workspace_that_checks() {
    let t = TestDir::new("init");
    let r = t.limen(&["init", "lab"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let r = t.limen(&["check", "lab/example-batch"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("S001"));
    assert_eq!(
        t.read("lab/templates/cautions.hbs"),
        std::fs::read_to_string(util::repo().join("report-templates/cautions.hbs")).unwrap()
    );
    // A new lab has no signing key until it makes one.
    let r = t.limen(&["issue", "lab/example-batch", "--out", "out"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr.contains("keys new --signatory signatory-1"),
        "{}",
        r.stderr
    );
    assert!(!t.exists("out/COA-EXAMPLE-001.pdf"));
    t.signing_key("lab", "signatory-1");
    let r = t.limen(&["issue", "lab/example-batch", "--out", "out"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(t.exists("out/COA-EXAMPLE-001.pdf"));
    let r = t.limen(&["init", "lab"]);
    assert_eq!(r.code, 2, "init must not overwrite");
}

/// Runs check on a batch whose results file is `results`, expecting an
/// input error that names `location`.
fn assert_input_error(name: &str, results: &[u8], location: &str) {
    let t = fixture(name, "");
    t.write("ws/b1/results.csv", results);
    let r = t.limen(&["issue", "ws/b1", "--out", "out"]);
    assert_eq!(r.code, 2, "{name}: {}", r.stderr);
    assert!(
        r.stderr.contains(location),
        "{name}: expected `{location}` in {}",
        r.stderr
    );
    assert!(
        r.stderr.contains("\nhint: "),
        "{name}: no hint in {}",
        r.stderr
    );
    assert!(!t.exists("out"), "{name}: something was written");
}

#[test]
fn bad_input_names_file_line_and_field() {
    let good = "S1,,,sample,Pb,paint,6010D,50,ug/L,1,0.100,50,2026-11-13,PAINT,\n";
    assert_input_error(
        "missing-col",
        b"lab_id,kind,analyte,matrix,method,reading,dilution,mass_g,volume_ml,analyzed_on\n",
        "results.csv:1: missing column(s): reading_unit",
    );
    assert_input_error(
        "unknown-col",
        HEAD.replace("spec,", "specification,").as_bytes(),
        "results.csv:1: unknown column(s): specification",
    );
    let cases = [
        (
            "lt-reading",
            good.replace(",50,ug/L", ",<0.5,ug/L"),
            "results.csv:2: field `reading`",
        ),
        (
            "nd-reading",
            good.replace(",50,ug/L", ",ND,ug/L"),
            "results.csv:2: field `reading`",
        ),
        (
            "zero-mass",
            good.replace("0.100", "0"),
            "results.csv:2: field `mass_g`",
        ),
        (
            "neg-mass",
            good.replace("0.100", "-0.1"),
            "results.csv:2: field `mass_g`",
        ),
        (
            "zero-dilution",
            good.replace("ug/L,1,", "ug/L,0,"),
            "results.csv:2: field `dilution`",
        ),
        (
            "unit",
            good.replace("ug/L", "ug/dL"),
            "results.csv:2: field `reading_unit`: unknown unit",
        ),
        (
            "dup",
            format!("{good}{good}"),
            "results.csv:3: field `lab_id`",
        ),
    ];
    for (name, body, loc) in cases {
        assert_input_error(name, rows(&body).as_bytes(), loc);
    }
    assert_input_error("empty", b"", "results.csv: the file is empty");
}

#[test]
fn bom_and_crlf_are_accepted() {
    let body = rows(
        "S1,,,sample,Pb,paint,6010D,50,ug/L,1,0.100,50,2026-11-13,PAINT,\nS2,,,sample,Pb,paint,6010D,bad,ug/L,1,0.100,50,2026-11-13,PAINT,\n",
    );
    let crlf = format!("\u{feff}{}", body.replace('\n', "\r\n"));
    let t = fixture("crlf", &crlf);
    let r = t.limen(&["check", "ws/b1"]);
    // The second row is bad: its line number must still be right under CRLF.
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("results.csv:3: field `reading`"),
        "{}",
        r.stderr
    );
    t.write(
        "ws/b1/results.csv",
        format!(
            "\u{feff}{}",
            rows("S1,,,sample,Pb,paint,6010D,50,ug/L,1,0.100,50,2026-11-13,PAINT,\n")
                .replace('\n', "\r\n")
        ),
    );
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_eq!(csv_row(&r.stdout, "S1", "Pb")["value"], "25.0");
}

#[test]
fn missing_limits_block_with_the_reason() {
    let t = fixture(
        "no-limits",
        &rows(
            "S1,,,sample,Cd,paint,6010D,5,ug/L,1,0.100,50,2026-11-13,,\n\
             S2,,,sample,Pb,paint,6010D,5,ug/L,1,0.100,50,2024-06-30,,\n\
             S3,,,sample,Pb,paint,6010D,5,ug/L,1,0.100,50,2026-11-13,NOSUCH,\n",
        ),
    );
    let r = t.limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert!(
        r.stdout
            .contains("results.csv:2: field `analyte`: S1 Cd: no limits"),
        "{}",
        r.stdout
    );
    assert!(r.stdout.contains("results.csv:3: field `analyzed_on`: S2 Pb: analysed 2024-06-30, before the first limits"), "{}", r.stdout);
    assert!(
        r.stdout
            .contains("results.csv:4: field `spec`: S3 Pb: spec `NOSUCH` is not in"),
        "{}",
        r.stdout
    );
}

#[test]
fn bad_register_and_specs_are_input_errors() {
    let t = fixture(
        "bad-register",
        &rows("S1,,,sample,Pb,paint,6010D,50,ug/L,1,0.100,50,2026-11-13,PAINT,\n"),
    );
    t.write(
        "ws/limits.csv",
        format!("{LIMITS}Pb,paint,6010D,ug/L,9,25,2025-01-01,5000,ug/L,S-DUP\n"),
    );
    let r = t.limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("limits.csv:5: field `effective_from`"),
        "{}",
        r.stderr
    );
    t.write("ws/limits.csv", LIMITS);
    t.write(
        "ws/specs.csv",
        format!("{SPECS}X,Pb,paint,90,furlongs,c,2020-01-01\n"),
    );
    let r = t.limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("specs.csv:4: field `unit`"),
        "{}",
        r.stderr
    );
    t.write("ws/specs.csv", SPECS);
    t.write("ws/lab.toml", "name = \"x\"\n");
    let r = t.limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.starts_with("error: ") && r.stderr.contains("lab.toml"),
        "{}",
        r.stderr
    );
}

#[test]
fn a_workspace_is_not_a_batch() {
    let t = TestDir::new("not-a-batch");
    t.demo_workspace("ws");
    let r = t.limen(&["check", "ws"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr
            .contains("ws is not a batch folder (no batch.toml)"),
        "{}",
        r.stderr
    );
    assert!(
        r.stderr
            .contains("hint: batch folders here: ws/ceramics-2611-052"),
        "{}",
        r.stderr
    );
}

#[test]
fn extreme_numbers_are_errors_not_panics() {
    for reading in [
        "79228162514264337593543950335",
        "-79228162514264337593543950335",
        "7.9e27",
    ] {
        let t = fixture(
            "extreme",
            &rows(&format!(
                "S1,,,sample,Pb,paint,6010D,{reading},ug/L,1000,0.0000001,50,2026-11-13,PAINT,\n"
            )),
        );
        let r = t.limen(&["check", "ws/b1"]);
        assert_eq!(r.code, 2, "{reading}: {}{}", r.stdout, r.stderr);
        assert!(
            r.stderr.contains("results.csv:2: field `reading`"),
            "{}",
            r.stderr
        );
        assert!(!r.stderr.contains("panicked"), "{}", r.stderr);
    }
}

/// P09 of the demo: a cadmium not-detected pass whose MDL is close to the
/// limit (β ≈ 0.079 > the lab's 0.01).
#[test]
fn a_pass_with_little_detection_power_is_qualified_or_made_inconclusive() {
    let t = TestDir::new("power");
    t.demo_workspace("ws");
    let b = "ws/furniture-jewellery-2611-041";
    let r = t.limen(&["check", b, "--format", "csv"]);
    let p09 = csv_row(&r.stdout, "P09", "Cd");
    assert_eq!(p09["verdict"], "pass");
    assert_eq!(p09["qualifiers"], "low-power");
    // MDL_s = 50.0 mg/kg, s_s = 0.62 µg/L scaled like the MDL = 15.5 mg/kg,
    // limit 75: β = F_t6((50 − 75) / 15.5) = F_t6(−1.613) = 0.0789 (by hand
    // from the t distribution; statrs agrees). L_D = (3.143 + 3.143) × 15.5
    // = 97.4 mg/kg (40 CFR 136 App. B t table, α = β = 0.01).
    assert_eq!(p09["beta_at_limit"], "0.0789");
    assert_eq!(p09["ld"], "97.4");
    // A strong pass is not touched: P01's MDL is far below its limit.
    let p01 = csv_row(&r.stdout, "P01", "Cd");
    assert_eq!(p01["beta_at_limit"], "0.0000");
    assert!(!p01["qualifiers"].contains("low-power"));

    // The lab may make such a pass inconclusive instead.
    let lab = t.read("ws/lab.toml") + "\n[detection_power]\nweak_pass = \"inconclusive\"\n";
    t.write("ws/lab.toml", lab);
    let r = t.limen(&["check", b, "--format", "csv"]);
    let p09 = csv_row(&r.stdout, "P09", "Cd");
    assert_eq!(p09["verdict"], "inconclusive");
    assert_eq!(p09["qualifiers"], "");
    // A looser β: the same result is a plain pass.
    let lab = t
        .read("ws/lab.toml")
        .replace("weak_pass = \"inconclusive\"", "beta = 0.10");
    t.write("ws/lab.toml", lab);
    let r = t.limen(&["check", b, "--format", "csv"]);
    let p09 = csv_row(&r.stdout, "P09", "Cd");
    assert_eq!(
        (p09["verdict"].as_str(), p09["qualifiers"].as_str()),
        ("pass", "")
    );
    // A nonsense β is an input error at its line.
    let lab = t.read("ws/lab.toml").replace("beta = 0.10", "beta = 1.5");
    t.write("ws/lab.toml", lab);
    let r = t.limen(&["check", b]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("lab.toml:") && r.stderr.contains("beta"),
        "{}",
        r.stderr
    );
}

#[test]
fn a_register_without_the_study_sd_behaves_as_before() {
    let t = TestDir::new("power-none");
    t.demo_workspace("ws");
    let limits = t.read("ws/limits.csv");
    let stripped: String = limits
        .lines()
        .map(|l| {
            let cells: Vec<&str> = l.split(',').collect();
            cells[..cells.len() - 2].join(",")
        })
        .collect::<Vec<_>>()
        .join("\n");
    t.write("ws/limits.csv", stripped + "\n");
    let r = t.limen(&[
        "check",
        "ws/furniture-jewellery-2611-041",
        "--format",
        "csv",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        csv_column(&r.stdout, "beta_at_limit")
            .iter()
            .all(String::is_empty)
    );
    assert!(csv_column(&r.stdout, "ld").iter().all(String::is_empty));
    let p09 = csv_row(&r.stdout, "P09", "Cd");
    assert_eq!(
        (p09["verdict"].as_str(), p09["qualifiers"].as_str()),
        ("pass", "")
    );
    // sd without n is refused at its cell.
    let half = t
        .read("ws/limits.csv")
        .replace("study_id,note", "study_id,note,sd")
        .replacen(
            "initial study on 0.1 g paint chips in 50 mL",
            "initial study on 0.1 g paint chips in 50 mL,2.5",
            1,
        );
    t.write("ws/limits.csv", half);
    let r = t.limen(&["check", "ws/furniture-jewellery-2611-041"]);
    assert_eq!(r.code, 2, "{}", r.stdout);
    assert!(r.stderr.contains("limits.csv:2: field `n`"), "{}", r.stderr);
}
