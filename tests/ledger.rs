//! The ledger through the binary: traceable issue, re-issue, impact,
//! verification, interrupted issues and concurrent ones.

mod util;
use std::process::Command;
use util::{TestDir, csv_column};

fn pdf_text(path: &std::path::Path) -> String {
    let out = Command::new("pdftotext")
        .args(["-enc", "UTF-8"])
        .arg(path)
        .arg("-")
        .output()
        .expect("pdftotext");
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// The demo workspace with both clean batches issued into `out`.
fn issued(name: &str) -> TestDir {
    let t = TestDir::new(name);
    t.demo_workspace("ws");
    let r = t.limen(&[
        "issue",
        "--by",
        "ivale",
        "ws/furniture-jewellery-2611-041",
        "ws/ceramics-2611-052",
        "--out",
        "out",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    t
}

/// A register update from a new cadmium study, in force before the batches
/// were analysed (as when a limit is found wrong).
fn update_register(t: &TestDir) {
    let r = t.limen(&[
        "study",
        "ws/studies/cd-paint-2611.csv",
        "--register",
        "ws/limits.csv",
        "--effective",
        "2026-11-01",
        "--study-id",
        "MDL-FIX",
    ]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
}

fn ws(t: &TestDir, args: &[&str]) -> util::Run {
    let mut a = args.to_vec();
    a.extend(["--workspace", "ws"]);
    t.limen(&a)
}

#[test]
fn impact_reissue_verify_and_history() {
    let t = issued("ledger-cycle");
    let r = ws(&t, &["impact"]);
    assert_eq!(r.code, 0, "nothing changed yet: {}", r.stdout);
    update_register(&t);
    // Exactly the report with paint cadmium results is affected.
    let r = ws(&t, &["impact", "--format", "csv"]);
    assert_eq!(r.code, 3);
    assert_eq!(csv_column(&r.stdout, "report"), vec!["COA-2611-041"]);
    // P01 and P05 to P09: the printed "< MDL" moves with the cadmium MDL.
    assert_eq!(csv_column(&r.stdout, "value_changes"), vec!["6"]);

    let r = ws(
        &t,
        &[
            "reissue",
            "--by",
            "ivale",
            "COA-2611-041",
            "--reason",
            "cadmium MDL corrected",
            "--out",
            "out",
        ],
    );
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("P01 Cd: < 0.979 mg/kg"), "{}", r.stdout);
    assert!(t.exists("out/COA-2611-041-r1.pdf") && t.exists("out/COA-2611-041-r1.csv"));
    let text = pdf_text(&t.path("out/COA-2611-041-r1.pdf"));
    assert!(text.contains("Revised certificate: revision 1"), "{text}");
    assert!(
        text.contains("replaces COA-2611-041 revision 0, issued 2026-11-18"),
        "{text}"
    );
    assert!(text.contains("Reason for revision: cadmium MDL corrected"));
    assert!(text.contains("P01 Cd: < 0.979 mg/kg"));
    assert!(text.contains("Report COA-2611-041 · Revision 1"));
    assert_eq!(
        csv_column(&t.read("out/COA-2611-041-r1.csv"), "revision")[0],
        "1"
    );
    // The old files are untouched and the report is now current.
    let r = ws(&t, &["impact"]);
    assert_eq!(r.code, 0, "{}", r.stdout);

    // Nothing changed: refused, unless forced.
    let r = ws(
        &t,
        &[
            "reissue",
            "--by",
            "ivale",
            "COA-2611-041",
            "--reason",
            "again",
            "--out",
            "out",
        ],
    );
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert!(!t.exists("out/COA-2611-041-r2.pdf"));
    // A corrected client detail is a change of its own.
    let manifest = t
        .read("ws/furniture-jewellery-2611-041/batch.toml")
        .replace("Priya Odell", "Priya O'Dell");
    t.write("fixed-batch.toml", manifest);
    let r = ws(
        &t,
        &[
            "reissue",
            "--by",
            "ivale",
            "COA-2611-041",
            "--reason",
            "contact name misspelt",
            "--out",
            "out",
            "--manifest",
            "fixed-batch.toml",
        ],
    );
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    assert!(pdf_text(&t.path("out/COA-2611-041-r2.pdf")).contains("Priya O'Dell"));

    let r = ws(&t, &["history", "COA-2611-041"]);
    assert_eq!(r.code, 0);
    for needle in [
        "revision 0",
        "revision 1",
        "revision 2",
        "reason: cadmium MDL corrected",
        "9 result(s) changed",
    ] {
        assert!(r.stdout.contains(needle), "{needle}: {}", r.stdout);
    }
    // One line for the report, then one per revision.
    let lines: Vec<&str> = r.stdout.lines().collect();
    assert_eq!(lines.len(), 4, "{}", r.stdout);
    assert!(lines[2].starts_with("  revision 1 ") && lines[2].contains("9 result(s) changed"));

    let r = ws(&t, &["verify", "out/COA-2611-041.pdf"]);
    assert_eq!(r.code, 0);
    assert!(
        r.stdout
            .contains("issued as COA-2611-041 revision 0 on 2026-11-18"),
        "{}",
        r.stdout
    );
    assert!(r.stdout.contains("REPLACED by revision 2"), "{}", r.stdout);
    let r = ws(&t, &["verify", "out/COA-2611-041-r2.csv"]);
    assert_eq!(r.code, 0);
    assert!(r.stdout.contains("current"), "{}", r.stdout);
    let r = ws(&t, &["verify", "out/COA-2611-052.csv"]);
    assert!(r.stdout.contains("current"), "{}", r.stdout);
    // One byte changed: not ours.
    let mut bytes = std::fs::read(t.path("out/COA-2611-052.csv")).unwrap();
    let at = bytes.len() / 2;
    bytes[at] ^= 1;
    t.write("altered.csv", bytes);
    let r = ws(&t, &["verify", "altered.csv"]);
    assert_eq!(r.code, 1);
    assert!(
        r.stdout
            .contains("not in this lab's ledger: altered, or not issued here")
    );
}

#[test]
fn the_certificate_carries_the_csv_verification_code() {
    let t = issued("ledger-code");
    let csv = std::fs::read(t.path("out/COA-2611-052.csv")).unwrap();
    let code = &limen::ledger::sha256_hex(&csv)[..16];
    let text = pdf_text(&t.path("out/COA-2611-052.pdf"));
    assert!(
        text.contains(&format!("Verification code: {code}")),
        "{code} not in\n{text}"
    );
}

const LAB: &str = "name='Fault Lab'\naddress='1 Road'\nsignatory='S. Signer'\n[qc]\nrequired=[]\n";

fn small_ws(t: &TestDir, reports: usize) {
    t.write("ws/lab.toml", LAB);
    t.write("ws/limits.csv", "analyte,matrix,method,unit,mdl,loq,effective_from,study_id\nPb,paint,6010D,ug/L,8,25,2025-01-01,S1\n");
    t.write("ws/specs.csv", "spec,analyte,matrix,limit,unit,citation,effective_from\nP,Pb,paint,90,mg/kg,c,2009-01-01\n");
    for i in 0..reports {
        t.write(
            &format!("ws/b{i}/batch.toml"),
            format!("batch='B{i}'\nreport='R-{i}'\nclient_name='C'\nclient_address='A'\nclient_contact='P'\nreceived_on=2026-11-10\nresults='r.csv'\n"),
        );
        t.write(
            &format!("ws/b{i}/r.csv"),
            format!("lab_id,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec\nS{i},sample,Pb,paint,6010D,{},ug/L,1,0.100,50,2026-11-13,P\n", 40 + i),
        );
    }
    t.signing_key("ws", "default");
}

fn tmp_files(t: &TestDir) -> Vec<String> {
    std::fs::read_dir(t.path("out"))
        .map(|d| {
            d.flatten()
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .filter(|n| n.ends_with(".limen-tmp"))
                .collect()
        })
        .unwrap_or_default()
}

#[test]
fn an_interrupted_issue_leaves_a_whole_record_or_none() {
    for (fault, complete) in [
        ("after-stage", false),
        ("after-record", false),
        ("after-publish", true),
        ("after-complete", true),
    ] {
        let t = TestDir::new(&format!("ledger-fault-{fault}"));
        small_ws(&t, 1);
        let out = Command::new(env!("CARGO_BIN_EXE_limen"))
            .args(["issue", "ws/b0", "--out", "out"])
            .current_dir(&t.root)
            .env("LIMEN_FAULT", fault)
            .env("SOURCE_DATE_EPOCH", "1795000000")
            .output()
            .unwrap();
        assert!(
            !out.status.success(),
            "{fault}: the process should have stopped"
        );
        // The next command settles what the interrupted one left.
        let h = ws(&t, &["history", "R-0"]);
        let finals = [t.exists("out/R-0.csv"), t.exists("out/R-0.pdf")];
        if complete {
            assert_eq!(h.code, 0, "{fault}: {}", h.stderr);
            assert_eq!(finals, [true, true], "{fault}");
            assert_eq!(ws(&t, &["verify", "out/R-0.pdf"]).code, 0, "{fault}");
            assert_eq!(ws(&t, &["verify", "out/R-0.csv"]).code, 0, "{fault}");
        } else {
            assert_eq!(h.code, 2, "{fault}: {}", h.stdout);
            assert!(
                h.stderr.contains("not in the ledger"),
                "{fault}: {}",
                h.stderr
            );
            assert_eq!(finals, [false, false], "{fault}");
        }
        // Issuing again completes the job or is refused as a duplicate, and
        // leaves no temporary file behind.
        let again = t.limen(&["issue", "ws/b0", "--out", "out"]);
        assert_eq!(
            again.code,
            if complete { 2 } else { 0 },
            "{fault}: {}",
            again.stderr
        );
        if !complete && fault == "after-stage" {
            assert!(
                again.stderr.contains("left in out by an interrupted run"),
                "{fault}: {}",
                again.stderr
            );
        }
        assert!(tmp_files(&t).is_empty(), "{fault}: {:?}", tmp_files(&t));
        assert_eq!(ws(&t, &["verify", "out/R-0.pdf"]).code, 0, "{fault}");
    }
}

#[test]
fn an_interrupted_run_of_several_reports_leaves_all_or_none() {
    // The files of every report are synced together and the records of all
    // are written, and completed, in one transaction each.
    for (fault, complete) in [
        ("after-stage", false),
        ("after-record", false),
        ("after-publish", true),
        ("after-complete", true),
    ] {
        let t = TestDir::new(&format!("ledger-fault-many-{fault}"));
        small_ws(&t, 3);
        let out = Command::new(env!("CARGO_BIN_EXE_limen"))
            .args(["issue", "ws/b0", "ws/b1", "ws/b2", "--out", "out"])
            .current_dir(&t.root)
            .env("LIMEN_FAULT", fault)
            .env("SOURCE_DATE_EPOCH", "1795000000")
            .output()
            .unwrap();
        assert!(
            !out.status.success(),
            "{fault}: the process should have stopped"
        );
        for i in 0..3 {
            let h = ws(&t, &["history", &format!("R-{i}")]);
            let files = [
                t.exists(&format!("out/R-{i}.csv")),
                t.exists(&format!("out/R-{i}.pdf")),
            ];
            assert_eq!(
                h.code,
                if complete { 0 } else { 2 },
                "{fault} R-{i}: {}",
                h.stderr
            );
            assert_eq!(files, [complete, complete], "{fault} R-{i}");
            if complete {
                let v = ws(&t, &["verify", &format!("out/R-{i}.pdf")]);
                assert_eq!(v.code, 0, "{fault} R-{i}: {}", v.stdout);
                assert!(v.stdout.contains("signature: valid"), "{}", v.stdout);
            }
        }
        let again = t.limen(&["issue", "ws/b0", "ws/b1", "ws/b2", "--out", "out"]);
        assert_eq!(
            again.code,
            if complete { 2 } else { 0 },
            "{fault}: {}",
            again.stderr
        );
        assert!(tmp_files(&t).is_empty(), "{fault}: {:?}", tmp_files(&t));
    }
}

#[test]
fn eight_issues_at_once_all_land() {
    let t = TestDir::new("ledger-concurrent");
    small_ws(&t, 8);
    // Create the ledger first so the eight race on rows, not on the schema.
    assert_eq!(ws(&t, &["impact"]).code, 0);
    let children: Vec<_> = (0..8)
        .map(|i| {
            Command::new(env!("CARGO_BIN_EXE_limen"))
                .args(["issue", &format!("ws/b{i}"), "--out", "out"])
                .current_dir(&t.root)
                .env("SOURCE_DATE_EPOCH", "1795000000")
                .stdout(std::process::Stdio::piped())
                .stderr(std::process::Stdio::piped())
                .spawn()
                .unwrap()
        })
        .collect();
    for (i, c) in children.into_iter().enumerate() {
        let out = c.wait_with_output().unwrap();
        assert!(
            out.status.success(),
            "issue {i}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    for i in 0..8 {
        let h = ws(&t, &["history", &format!("R-{i}")]);
        assert_eq!(h.code, 0, "R-{i}: {}", h.stderr);
        assert!(h.stdout.contains("revision 0"));
        for ext in ["csv", "pdf"] {
            let v = ws(&t, &["verify", &format!("out/R-{i}.{ext}")]);
            assert_eq!(v.code, 0, "R-{i}.{ext}: {}", v.stdout);
            assert!(v.stdout.contains(&format!("issued as R-{i} revision 0")));
        }
    }
}

#[test]
fn a_newer_or_corrupt_ledger_is_refused_and_left_alone() {
    let t = TestDir::new("ledger-schema");
    small_ws(&t, 1);
    assert_eq!(t.limen(&["issue", "ws/b0", "--out", "out"]).code, 0);
    let path = t.path("ws/ledger.sqlite");
    {
        let conn = rusqlite::Connection::open(&path).unwrap();
        conn.execute_batch("PRAGMA wal_checkpoint(TRUNCATE); PRAGMA user_version = 7;")
            .unwrap();
    }
    let before = std::fs::read(&path).unwrap();
    let r = ws(&t, &["history", "R-0"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr
            .contains("written by a newer limen (ledger schema 7"),
        "{}",
        r.stderr
    );
    assert_eq!(std::fs::read(&path).unwrap(), before);

    let t = TestDir::new("ledger-corrupt");
    small_ws(&t, 1);
    t.write("ws/ledger.sqlite", "not a database: a page of someone's notes, long enough to look like a header of some sort......");
    let before = t.read("ws/ledger.sqlite");
    let r = t.limen(&["issue", "ws/b0", "--out", "out"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("not a readable ledger"), "{}", r.stderr);
    assert_eq!(t.read("ws/ledger.sqlite"), before);
    assert!(!t.exists("out/R-0.csv"));
}

#[test]
fn impact_since_a_date_looks_only_at_later_issues() {
    let t = TestDir::new("ledger-since");
    t.demo_workspace("ws");
    let at = |epoch: &str, batch: &str| {
        Command::new(env!("CARGO_BIN_EXE_limen"))
            .args(["issue", "--by", "ivale", batch, "--out", "out"])
            .current_dir(&t.root)
            .env("SOURCE_DATE_EPOCH", epoch)
            .output()
            .unwrap()
    };
    // 2026-11-18 and 2026-11-25.
    assert!(
        at("1795000000", "ws/furniture-jewellery-2611-041")
            .status
            .success()
    );
    assert!(at("1795600000", "ws/ceramics-2611-052").status.success());
    update_register(&t);
    let r = ws(&t, &["impact", "--format", "csv"]);
    assert_eq!(csv_column(&r.stdout, "report"), vec!["COA-2611-041"]);
    // Only the ceramics report was issued on or after 2026-11-20, and it is unaffected.
    let r = ws(&t, &["impact", "--since", "2026-11-20"]);
    assert_eq!(r.code, 0, "{}", r.stdout);
    assert!(
        r.stdout.contains("checked 1 issued report(s)"),
        "{}",
        r.stdout
    );
    let r = ws(&t, &["impact", "--since", "2026-11-18", "--format", "csv"]);
    assert_eq!(
        (r.code, csv_column(&r.stdout, "report")),
        (3, vec!["COA-2611-041".to_string()])
    );
}

/// (lab id, analyte) of each change row printed by `impact` or `reissue`:
/// lines "    P01 Cd: old → new [kinds]".
fn changed_rows(text: &str) -> Vec<String> {
    text.lines()
        .map(str::trim)
        .filter(|l| l.contains(" → ") && l.ends_with(']'))
        .filter_map(|l| l.split(':').next().map(String::from))
        .collect()
}

/// `impact` and the re-issue it announces count and list the same changes.
fn impact_matches_reissue(t: &TestDir, report: &str) -> Vec<String> {
    let csv = ws(t, &["impact", "--format", "csv"]);
    assert_eq!(csv.code, 3, "{}", csv.stdout);
    let reports = csv_column(&csv.stdout, "report");
    let k = reports.iter().position(|r| r == report).expect("listed");
    let count: usize = csv_column(&csv.stdout, "changed_results")[k]
        .parse()
        .unwrap();
    let table = ws(t, &["impact"]);
    let listed = changed_rows(&table.stdout);
    let r = ws(
        t,
        &[
            "reissue",
            "--by",
            "ivale",
            report,
            "--reason",
            "limit corrected",
            "--out",
            "out",
        ],
    );
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    let changed = changed_rows(&r.stdout);
    assert!(count > 0);
    assert_eq!(changed.len(), count, "impact said {count}: {}", r.stdout);
    assert_eq!(listed, changed, "the same rows");
    assert!(
        r.stdout.contains(&format!("{count} result(s) changed")),
        "{}",
        r.stdout
    );
    let h = ws(t, &["history", report]);
    assert!(
        h.stdout.contains(&format!("{count} result(s) changed")),
        "{}",
        h.stdout
    );
    changed
}

#[test]
fn impact_counts_what_the_reissue_changes_after_a_register_correction() {
    let t = issued("ledger-same-count");
    update_register(&t);
    let rows = impact_matches_reissue(&t, "COA-2611-041");
    // Every paint cadmium result: those whose printed value changed and those
    // whose printed MDL and LOQ alone changed.
    assert_eq!(rows.len(), 9, "{rows:?}");
    assert!(rows.contains(&"P02 Cd".to_string()), "{rows:?}");
}

#[test]
fn impact_counts_what_the_reissue_changes_after_a_spec_change() {
    let t = issued("ledger-spec-change");
    // The cup limit is lowered: no register row changes, every cup result's
    // limit applied does, and a verdict may.
    let specs = t.read("ws/specs.csv").replace(
        "FDA-CUP-PB,Pb,ceramic-leachate,0.5,µg/mL",
        "FDA-CUP-PB,Pb,ceramic-leachate,0.05,µg/mL",
    );
    t.write("ws/specs.csv", specs);
    let rows = impact_matches_reissue(&t, "COA-2611-052");
    assert!(!rows.is_empty());
    let text = t.read("out/COA-2611-052-r1.csv");
    let limits = csv_column(&text, "spec_limit");
    let spec = csv_column(&text, "spec");
    for (s, l) in spec.iter().zip(&limits) {
        if s == "FDA-CUP-PB" {
            assert_eq!(l, "50", "0.05 µg/mL = 50 µg/L");
        }
    }
}
