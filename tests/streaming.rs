//! The streamed `check --format csv` against the report model built in
//! memory, and the order of rows in the results file.

mod util;
use util::TestDir;

const HEAD: &str = "lab_id,client_id,description,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec,uncertainty_pct,spike_added,parent_id\n";

/// Samples and QC rows that fail in several ways: a high blank (qualifies
/// the low results), a low LCS for cadmium (holds them), a spike pair and a
/// duplicate on their parents, and a failed CCV between passing ones.
fn samples() -> Vec<String> {
    let mut rows = Vec::new();
    for i in 0..12 {
        let (a, spec) = if i % 2 == 0 {
            ("Pb", "US-PAINT-PB")
        } else {
            ("Cd", "CLIENT-PAINT-CD")
        };
        rows.push(format!(
            "S{:02},C{i},Chip {i},sample,{a},paint,6010D,{}.5,µg/L,1,0.100,50,2026-11-{:02},{spec},,,\n",
            i / 2,
            30 + i * 37,
            13 + i / 6
        ));
    }
    rows
}

fn qc_rows() -> Vec<String> {
    [
        "MB-1,,Method blank,method-blank,Pb,paint,6010D,20,µg/L,1,0.100,50,2026-11-13,,,,",
        "LCS-1,,LCS,lcs,Pb,paint,6010D,49,µg/L,1,0.100,50,2026-11-13,,,25,",
        "LCS-2,,LCS,lcs,Cd,paint,6010D,30,µg/L,1,0.100,50,2026-11-13,,,25,",
        "MS-1,,Spike,matrix-spike,Pb,paint,6010D,140,µg/L,1,0.100,50,2026-11-13,,,25,S02",
        "MSD-1,,Spike dup,matrix-spike-dup,Pb,paint,6010D,95,µg/L,1,0.100,50,2026-11-13,,,25,S02",
        "DUP-1,,Duplicate,duplicate,Pb,paint,6010D,400,µg/L,1,0.100,50,2026-11-13,,,,S04",
        // Run order is the analysis date, then the line: these CCVs fall
        // before and after every sample wherever they stand in the file.
        "CCV-1,,CCV,ccv,Pb,paint,6010D,100,µg/L,1,,,2026-11-12,,,100,",
        "CCV-2,,CCV,ccv,Pb,paint,6010D,70,µg/L,1,,,2026-11-12,,,100,",
        "CCV-3,,CCV,ccv,Pb,paint,6010D,101,µg/L,1,,,2026-11-15,,,100,",
    ]
    .iter()
    .map(|r| format!("{r}\n"))
    .collect()
}

fn batch(t: &TestDir, dir: &str, rows: &[String]) {
    t.write(
        &format!("ws/{dir}/results.csv"),
        format!("{HEAD}{}", rows.concat()),
    );
    t.write(
        &format!("ws/{dir}/batch.toml"),
        format!("batch='{dir}'\nreport='R-{dir}'\nclient_name='c'\nclient_address='a'\nclient_contact='p'\nreceived_on=2026-11-10\nresults='results.csv'\n"),
    );
}

/// The CSV and the table of the report model built in memory, through the
/// library.
fn in_memory(t: &TestDir, dir: &str) -> Option<(String, String)> {
    let ws = limen::read::Workspace::load(&t.path("ws")).unwrap();
    let batch = limen::read::Batch::load(&t.path(&format!("ws/{dir}"))).unwrap();
    let run = limen::RunInfo {
        issued_at: chrono::DateTime::from_timestamp(1_795_000_000, 0).unwrap(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
    };
    let report = limen::report::build(&ws, &batch, 0, &run).ok()?;
    Some((
        String::from_utf8(limen::render::csv::Csv.bytes(&report)).unwrap(),
        limen::render::table::render(&report, false),
    ))
}

#[test]
fn streamed_and_in_memory_csv_and_table_are_the_same_bytes_on_every_batch() {
    let t = TestDir::new("stream-same");
    t.demo_workspace("ws");
    let mut all = samples();
    all.extend(qc_rows());
    batch(&t, "qc-mix", &all);
    let mut dirs = vec!["qc-mix".to_string()];
    for e in std::fs::read_dir(t.path("ws")).unwrap().flatten() {
        if e.path().join("batch.toml").is_file() {
            dirs.push(e.file_name().to_string_lossy().into_owned());
        }
    }
    assert!(dirs.len() >= 4, "{dirs:?}");
    for dir in &dirs {
        let r = t.limen(&["check", &format!("ws/{dir}"), "--format", "csv"]);
        let (csv, table) = in_memory(&t, dir).unwrap();
        assert_eq!(r.stdout, csv, "{dir}");
        assert!(r.code == 0 || r.code == 3, "{dir}: {}", r.stderr);
        let r = t.limen(&["check", &format!("ws/{dir}")]);
        // The library was given absolute paths, the binary relative ones.
        let table = table.replace(&format!("{}/", t.root.display()), "");
        assert_eq!(r.stdout, table, "{dir}");
    }
    // The mixed batch exercises the QC rules that qualify rows.
    let r = t.limen(&["check", "ws/qc-mix", "--format", "csv"]);
    for q in ["blank-affected", "matrix-effect", "imprecise"] {
        assert!(r.stdout.contains(q), "{q}: {}", r.stdout);
    }
    assert_eq!(r.code, 3);
    assert!(r.stderr.contains("LCS recovery"), "{}", r.stderr);
    assert!(r.stderr.contains("CCV recovery"), "{}", r.stderr);
}

#[test]
fn qc_rows_after_the_samples_and_spikes_before_parents_give_the_same_result() {
    let t = TestDir::new("stream-order");
    t.demo_workspace("ws");
    let (s, q) = (samples(), qc_rows());
    // QC rows first (the spikes and duplicate before their parents)...
    batch(&t, "qc-first", &[q.clone(), s.clone()].concat());
    // ...and QC rows after every sample.
    batch(&t, "qc-last", &[s.clone(), q.clone()].concat());
    let first = t.limen(&["check", "ws/qc-first", "--format", "csv"]);
    let last = t.limen(&["check", "ws/qc-last", "--format", "csv"]);
    assert_eq!(first.code, 3);
    assert_eq!(first.code, last.code);
    let strip = |s: &str, dir: &str| s.replace(&format!("R-{dir}"), "R");
    assert_eq!(
        strip(&first.stdout, "qc-first"),
        strip(&last.stdout, "qc-last")
    );
    assert!(first.stdout.contains("matrix-effect"), "{}", first.stdout);
    // The same problems, but for the lines they point at.
    let problems = |s: &str| -> Vec<String> {
        s.lines()
            .filter(|l| l.starts_with("blocked:"))
            .map(|l| {
                l.split_once(": ")
                    .map_or(l, |x| x.1)
                    .split_once(": ")
                    .map_or(l, |x| x.1)
                    .to_string()
            })
            .collect()
    };
    assert_eq!(problems(&first.stderr), problems(&last.stderr));
    assert!(!problems(&first.stderr).is_empty());
}

#[test]
fn an_error_on_the_last_of_100000_rows_names_it_and_writes_nothing() {
    let t = TestDir::new("stream-last-error");
    t.demo_workspace("ws");
    let mut rows: Vec<String> = (0..100_000)
        .map(|i| {
            format!(
                "S{i:06},C{i},Chip,sample,Pb,paint,6010D,{}.5,µg/L,1,0.100,50,2026-11-13,US-PAINT-PB,,,\n",
                i % 900
            )
        })
        .collect();
    rows.push(
        "S999999,C,Chip,sample,Pb,paint,6010D,12,µg/L,1,0.100,50,2026-11-31,US-PAINT-PB,,,\n"
            .into(),
    );
    batch(&t, "big", &rows);
    let r = t.limen(&["check", "ws/big", "--format", "csv"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert_eq!(r.stdout, "");
    // Header on line 1, so the last of 100,001 data rows is line 100,002.
    assert!(
        r.stderr.contains("results.csv:100002") && r.stderr.contains("analyzed_on"),
        "{}",
        r.stderr
    );
}

/// The QC mix and enough further samples that the classified rows pass
/// the few megabytes kept in memory and go to the temporary file.
/// A batch whose spooled rows (about 6.7 MB, 84 bytes a row) pass the 4 MB
/// the spool holds in memory; the test without a usable TMPDIR shows they
/// do.
fn spilling(t: &TestDir) {
    t.demo_workspace("ws");
    let mut rows = samples();
    rows.extend(qc_rows());
    for i in 0..80_000 {
        rows.push(format!(
            "X{i:05},C{i},Chip {i},sample,Pb,paint,6010D,{}.5,µg/L,{},0.100,50,2026-11-13,US-PAINT-PB,10,,\n",
            (i * 37) % 1900,
            1 + i % 3
        ));
    }
    batch(t, "long", &rows);
}

#[test]
fn rows_kept_in_the_temporary_file_give_the_same_bytes_as_in_memory() {
    let t = TestDir::new("stream-spill");
    spilling(&t);
    let (csv, table) = in_memory(&t, "long").unwrap();
    let r = t.limen(&["check", "ws/long", "--format", "csv"]);
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert_eq!(r.stdout.lines().count(), 80_013);
    assert_eq!(r.stdout, csv);
    assert!(r.stdout.contains("blank-affected"));
    let r = t.limen(&["check", "ws/long"]);
    let table = table.replace(&format!("{}/", t.root.display()), "");
    assert_eq!(r.stdout, table);
}

#[test]
fn no_room_for_the_temporary_file_is_an_error_before_any_output() {
    let t = TestDir::new("stream-no-tmp");
    spilling(&t);
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_limen"))
        .args(["check", "ws/long", "--format", "csv"])
        .current_dir(&t.root)
        .env("SOURCE_DATE_EPOCH", "1795000000")
        .env("TMPDIR", t.path("no-such-folder"))
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(out.stdout.is_empty());
    assert!(
        stderr.contains("no-such-folder") && stderr.contains("hint: "),
        "{stderr}"
    );
    assert!(stderr.contains("TMPDIR"), "{stderr}");
}
