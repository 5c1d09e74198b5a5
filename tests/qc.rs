//! Batch QC through the binary: windows, qualifiers, bracketing, holds and
//! the --accept-qc path.

mod util;
use util::{TestDir, csv_row};

const LAB: &str = "name = \"Fixture Lab\"\naddress = \"1 Test Road\"\nsignatory = \"A. Analyst\"\n";
const LIMITS: &str = "analyte,matrix,method,unit,mdl,loq,effective_from,upper_range,upper_range_unit,study_id\n\
Pb,paint,6010D,ug/L,8,25,2025-01-01,5000,ug/L,S-PB\n";
const SPECS: &str = "spec,analyte,matrix,limit,unit,citation,effective_from\n\
PAINT,Pb,paint,90,mg/kg,fixture limit,2009-01-01\n";
const BATCH: &str = "batch = \"B1\"\nreport = \"R-1\"\nclient_name = \"Client\"\nclient_address = \"Addr\"\nclient_contact = \"Contact\"\nreceived_on = 2026-11-10\nresults = \"results.csv\"\n";
const HEAD: &str = "lab_id,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec,spike_added,parent_id\n";

/// A solid paint row: reading in µg/L at 0.100 g in 50 mL, so mg/kg = reading / 2.
fn row(id: &str, kind: &str, reading: &str, extra: &str) -> String {
    format!("{id},{kind},Pb,paint,6010D,{reading},ug/L,1,0.100,50,2026-11-13,{extra}\n")
}

fn sample(id: &str, reading: &str) -> String {
    row(id, "sample", reading, "PAINT,,")
}

/// Method blank and LCS that pass, so a test can vary one thing.
fn base_qc() -> String {
    row("MB-1", "method-blank", "0.5", ",,") + &row("LCS-1", "lcs", "100", ",50,")
}

fn fixture(name: &str, body: &str) -> TestDir {
    let t = TestDir::new(name);
    t.write("ws/lab.toml", LAB);
    t.write("ws/limits.csv", LIMITS);
    t.write("ws/specs.csv", SPECS);
    t.write("ws/b1/batch.toml", BATCH);
    t.write("ws/b1/results.csv", format!("{HEAD}{body}"));
    t.signing_key("ws", "default");
    t
}

fn qc_line<'a>(stdout: &'a str, needle: &str) -> &'a str {
    stdout
        .lines()
        .find(|l| l.contains(needle))
        .unwrap_or_else(|| panic!("no QC line with {needle} in\n{stdout}"))
}

// LCS recovery = measured / added × 100; window 80–120 %, both edges pass
// (EPA SW-846 6010D window, from memory; edges: common practice, no source).
#[test]
fn lcs_window_edges() {
    for (reading, pass) in [
        ("80", true),
        ("120", true),
        ("79.9", false),
        ("120.2", false),
    ] {
        // LCS spiked at 50 mg/kg: reading R µg/L -> R / 2 mg/kg, recovery (R / 2) / 50 × 100 = R %.
        let body = row("MB-1", "method-blank", "0.5", ",,")
            + &row("LCS-1", "lcs", reading, ",50,")
            + &sample("S1", "50");
        let t = fixture("lcs-edge", &body);
        let r = t.limen(&["check", "ws/b1"]);
        let line = qc_line(&r.stdout, "LCS recovery");
        if pass {
            assert_eq!(r.code, 0, "{reading}: {}", r.stdout);
            assert!(line.ends_with("pass"), "{line}");
        } else {
            assert_eq!(r.code, 3, "{reading}: {}", r.stdout);
            assert!(line.contains("fail"), "{line}");
            assert!(r.stdout.contains("LCS recovery"), "{}", r.stdout);
        }
    }
}

#[test]
fn a_failed_lcs_holds_the_batch_until_accepted() {
    let body = row("MB-1", "method-blank", "0.5", ",,")
        + &row("LCS-1", "lcs", "140", ",50,")
        + &sample("S1", "50")
        + &sample("S2", "2");
    let t = fixture("lcs-fail", &body);
    let r = t.limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 3);
    assert!(
        r.stdout
            .contains("LCS recovery 140 % is outside 80–120 %; 2 result(s) of Pb / 6010D are held"),
        "{}",
        r.stdout
    );
    let r = t.limen(&["issue", "ws/b1", "--out", "out"]);
    assert_eq!(r.code, 3);
    assert!(!t.exists("out/R-1.csv"));
    let r = t.limen(&[
        "issue",
        "ws/b1",
        "--out",
        "out",
        "--accept-qc",
        "LCS high bias; client informed; results; all below limit",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let csv = t.read("out/R-1.csv");
    for id in ["S1", "S2"] {
        assert_eq!(
            csv_row(&csv, id, "Pb")["qualifiers"],
            "qc-exception (LCS high bias, client informed, results, all below limit)"
        );
    }
    // An empty reason is refused.
    let t2 = fixture("lcs-fail-empty", &body);
    let r = t2.limen(&["issue", "ws/b1", "--out", "out", "--accept-qc", "  "]);
    assert_eq!(r.code, 2);
}

// Matrix spike recovery = (spiked − unspiked) / added × 100 (EPA SW-846 Chapter One, from memory):
// parent 20.0 mg/kg, spiked 65.0 mg/kg, added 50 mg/kg -> 90.0 %.
#[test]
fn matrix_spike_recovery_and_the_four_times_rule() {
    let body = base_qc()
        + &sample("S1", "40")
        + &row("MS-1", "matrix-spike", "130", ",50,S1")
        + &sample("S2", "60")
        + &row("MS-2", "matrix-spike", "100", ",50,S2");
    let t = fixture("ms", &body);
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_eq!(csv_row(&r.stdout, "S1", "Pb")["qualifiers"], "");
    // S2: 30 mg/kg, spiked 50 -> (50 − 30) / 50 = 40 %: matrix effect on the parent.
    assert_eq!(
        csv_row(&r.stdout, "S2", "Pb")["qualifiers"],
        "matrix-effect"
    );
    let table = t.limen(&["check", "ws/b1"]).stdout;
    assert!(qc_line(&table, "MS-1 on S1").contains("90.0 %"), "{table}");
    assert!(qc_line(&table, "MS-2 on S2").contains("40.0 %"), "{table}");

    // Parent 250 mg/kg > 4 × 50 added: not evaluated, and never a qualifier.
    let body = base_qc() + &sample("S3", "500") + &row("MS-3", "matrix-spike", "500", ",50,S3");
    let t = fixture("ms-4x", &body);
    let r = t.limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 0);
    assert!(
        qc_line(&r.stdout, "MS-3 on S3")
            .contains("not evaluated (sample is more than 4 × the amount added)")
    );
    // Exactly 4 ×: evaluated.
    let body = base_qc() + &sample("S4", "400") + &row("MS-4", "matrix-spike", "500", ",50,S4");
    let r = fixture("ms-4x-edge", &body).limen(&["check", "ws/b1"]);
    assert!(
        qc_line(&r.stdout, "MS-4 on S4").contains("100 %"),
        "{}",
        r.stdout
    );
}

#[test]
fn duplicates_use_rpd_above_five_loq_and_difference_below() {
    // LOQ_s = 25 µg/L × 50 / 0.1 / 1000 = 12.5 mg/kg; 5 × LOQ = 62.5 mg/kg.
    // 100 vs 80 mg/kg: RPD = 20 / 90 = 22.2 % > 20 % -> imprecise.
    let body = base_qc() + &sample("S1", "200") + &row("D1", "duplicate", "160", ",,S1")
        // 20 vs 30 mg/kg (below 5 × LOQ): |Δ| = 10 ≤ 12.5 passes although RPD is 40 %.
        + &sample("S2", "40") + &row("D2", "duplicate", "60", ",,S2");
    let t = fixture("dup", &body);
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    assert_eq!(csv_row(&r.stdout, "S1", "Pb")["qualifiers"], "imprecise");
    assert_eq!(csv_row(&r.stdout, "S2", "Pb")["qualifiers"], "");
    let table = t.limen(&["check", "ws/b1"]).stdout;
    assert!(qc_line(&table, "S1 / D1").contains("22.2 %"), "{table}");
    assert!(
        qc_line(&table, "S2 / D2").contains("duplicate difference"),
        "{table}"
    );
}

#[test]
fn blank_hit_qualifies_results_below_ten_times_the_blank() {
    // Blank 11 µg/L -> 5.50 mg/kg ≥ 5 % of 90 = 4.5 mg/kg: fails.
    // Detected results below 10 × 5.5 = 55 mg/kg are blank-affected.
    let body = row("MB-1", "method-blank", "11", ",,")
        + &row("LCS-1", "lcs", "100", ",50,")
        + &sample("S1", "20") // 10 mg/kg: affected
        + &sample("S2", "108") // 54 mg/kg: affected
        + &sample("S3", "112") // 56 mg/kg: not affected
        + &sample("S4", "2"); // 1 mg/kg: not detected, not affected
    let t = fixture("blank", &body);
    let r = t.limen(&["check", "ws/b1", "--format", "csv"]);
    assert_eq!(
        r.code, 0,
        "a blank hit qualifies, it does not hold: {}",
        r.stderr
    );
    let q = |id: &str| csv_row(&r.stdout, id, "Pb")["qualifiers"].clone();
    assert_eq!(
        (
            q("S1").as_str(),
            q("S2").as_str(),
            q("S3").as_str(),
            q("S4").as_str()
        ),
        ("blank-affected", "blank-affected", "", "")
    );
    // Blank 6 µg/L = 3.00 mg/kg < max(MDL 4.00, 4.5): passes.
    let body = row("MB-1", "method-blank", "6", ",,")
        + &row("LCS-1", "lcs", "100", ",50,")
        + &sample("S1", "20");
    let r = fixture("blank-ok", &body).limen(&["check", "ws/b1"]);
    assert!(
        qc_line(&r.stdout, "method blank").ends_with("pass"),
        "{}",
        r.stdout
    );
}

fn cal(id: &str, kind: &str, reading: &str, date: &str, truth: &str) -> String {
    format!("{id},{kind},Pb,paint,6010D,{reading},ug/L,1,,,{date},,{truth},\n")
}

fn sample_on(id: &str, date: &str) -> String {
    format!("{id},sample,Pb,paint,6010D,50,ug/L,1,0.100,50,{date},PAINT,,\n")
}

#[test]
fn a_failing_ccv_holds_the_results_it_brackets() {
    let d = "2026-11-13";
    let body = base_qc()
        + &cal("CCV-1", "ccv", "500", d, "500")
        + &sample_on("S1", d)
        + &sample_on("S2", d)
        + &cal("CCV-2", "ccv", "560", d, "500") // 112 %: fails
        + &sample_on("S3", d)
        + &cal("CCV-3", "ccv", "505", d, "500")
        + &sample_on("S4", d)
        // Analysed on a later day, even though it stands earlier in no file order.
        + &sample_on("S5", "2026-11-14");
    let t = fixture("ccv", &body);
    let r = t.limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 3);
    assert!(r.stdout.contains("CCV recovery 112 % is outside 90–110 %; results run since the last passing check are held: S1, S2, S3"), "{}", r.stdout);
    let r = t.limen(&[
        "issue",
        "ws/b1",
        "--out",
        "out",
        "--accept-qc",
        "re-run not possible: sample consumed",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let csv = t.read("out/R-1.csv");
    // The certificate states the exception, its reason and the legend.
    let out = std::process::Command::new("pdftotext")
        .args(["-enc", "UTF-8"])
        .arg(t.path("out/R-1.pdf"))
        .arg("-")
        .output()
        .expect("pdftotext");
    let text = String::from_utf8_lossy(&out.stdout).replace('\n', " ");
    assert!(
        text.contains("Deviation: quality-control exception"),
        "{text}"
    );
    assert!(
        text.contains("Reason: re-run not possible: sample consumed"),
        "{text}"
    );
    assert!(
        text.contains("X: issued under an accepted quality-control exception"),
        "{text}"
    );
    assert!(text.contains("Quality control summary"));
    for (id, held) in [
        ("S1", true),
        ("S2", true),
        ("S3", true),
        ("S4", false),
        ("S5", false),
    ] {
        let q = csv_row(&csv, id, "Pb")["qualifiers"].clone();
        assert_eq!(q.starts_with("qc-exception"), held, "{id}: {q}");
    }
}

#[test]
fn a_ccb_at_or_above_the_loq_fails() {
    let d = "2026-11-13";
    // LOQ at reading level is the register's 25 µg/L.
    let body = base_qc()
        + &cal("CCB-1", "ccb", "24.9", d, "")
        + &sample_on("S1", d)
        + &cal("CCB-2", "ccb", "25", d, "");
    let r = fixture("ccb", &body).limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 3);
    assert!(
        qc_line(&r.stdout, "CCB-1").ends_with("pass"),
        "{}",
        r.stdout
    );
    assert!(
        qc_line(&r.stdout, "CCB-2").contains("fail (held: S1)"),
        "{}",
        r.stdout
    );
}

#[test]
fn missing_required_qc_holds_and_bad_qc_rows_are_input_errors() {
    let r = fixture("missing", &sample("S1", "50")).limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 3);
    assert!(
        r.stdout.contains("no method-blank for Pb / 6010D"),
        "{}",
        r.stdout
    );
    assert!(r.stdout.contains("no lcs for Pb / 6010D"), "{}", r.stdout);

    let r = fixture(
        "no-spike",
        &(row("MB-1", "method-blank", "0.5", ",,")
            + &row("LCS-1", "lcs", "100", ",,")
            + &sample("S1", "50")),
    )
    .limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("results.csv:3: field `spike_added`"),
        "{}",
        r.stderr
    );

    let r = fixture(
        "no-parent",
        &(base_qc() + &sample("S1", "50") + &row("D1", "duplicate", "50", ",,S9")),
    )
    .limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr
            .contains("results.csv:5: field `parent_id`: S9 has no Pb sample"),
        "{}",
        r.stderr
    );
}

#[test]
fn windows_come_from_the_workspace() {
    let body = base_qc().replace(
        "LCS-1,lcs,Pb,paint,6010D,100",
        "LCS-1,lcs,Pb,paint,6010D,88",
    ) + &sample("S1", "50");
    let t = fixture("windows", &body);
    assert_eq!(
        t.limen(&["check", "ws/b1"]).code,
        0,
        "88 % is inside the default 80–120 %"
    );
    t.write(
        "ws/lab.toml",
        format!("{LAB}[qc]\n[qc.methods.\"6010D\"]\nlcs_recovery_pct = [90, 110]\n"),
    );
    let r = t.limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 3, "{}", r.stdout);
    assert!(qc_line(&r.stdout, "LCS recovery").contains("90–110 %"));
    t.write("ws/qc.toml", "rpd_max_pct = 10\n");
    let r = t.limen(&["check", "ws/b1"]);
    assert_eq!(r.code, 2, "QC windows in two places are refused");
}

#[test]
fn a_spike_on_a_sample_without_limits_is_held_not_an_input_error() {
    // The parent has no register row: its own problem holds the batch, and
    // the spike on it is not mistaken for a spike without a parent.
    let t = TestDir::new("qc-blocked-parent");
    t.demo_workspace("ws");
    let path = "ws/furniture-jewellery-2611-041/results.csv";
    let text = t.read(path);
    let parent = text
        .lines()
        .find(|l| l.contains(",matrix-spike,"))
        .and_then(|l| l.split(',').nth(16))
        .expect("the demo has a matrix spike")
        .to_string();
    // Move the parent sample's rows to a method the register does not know.
    let changed: String = text
        .lines()
        .map(|l| {
            if l.starts_with(&format!("{parent},")) && l.contains(",sample,") {
                l.replace(",6010D,", ",6010X,")
            } else {
                l.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    t.write(path, changed + "\n");
    let r = t.limen(&["check", "ws/furniture-jewellery-2611-041"]);
    assert_eq!(r.code, 3, "{}\n{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("no limits"), "{}", r.stdout);
    assert!(!r.stderr.contains("has no"), "{}", r.stderr);
}
