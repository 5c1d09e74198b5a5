//! Benchmarks, ignored by default. Run with
//! `cargo test --release --test bench -- --ignored --nocapture`
//! and record the figures in DEVELOPERS.md.

mod util;
use std::fmt::Write as _;
use std::time::Instant;
use util::TestDir;

fn big_batch(t: &TestDir, rows: usize) {
    t.demo_workspace("ws");
    let mut csv = String::with_capacity(rows * 120);
    csv.push_str("lab_id,client_id,description,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec,uncertainty_pct,spike_added\n");
    for analyte in ["Pb", "Cd"] {
        let _ = writeln!(
            csv,
            "MB-1,,Method blank,method-blank,{analyte},paint,6010D,0.2,µg/L,1,0.100,50,2026-11-13,,,"
        );
        let _ = writeln!(
            csv,
            "LCS-1,,LCS,lcs,{analyte},paint,6010D,49,µg/L,1,0.100,50,2026-11-13,,,25"
        );
    }
    for i in 0..rows {
        let analyte = if i % 2 == 0 { "Pb" } else { "Cd" };
        let spec = if i % 2 == 0 {
            "US-PAINT-PB"
        } else {
            "CLIENT-PAINT-CD"
        };
        let reading = (i * 7919) % 1900;
        let _ = writeln!(
            csv,
            "S{:07},C{},Paint chip {},sample,{analyte},paint,6010D,{}.{},µg/L,{},0.{:04},50,2026-11-{:02},{spec},,",
            i / 2,
            i / 2,
            i / 2,
            reading,
            i % 10,
            1 + i % 3,
            900 + i % 200,
            13 + i % 6
        );
    }
    t.write("ws/big/results.csv", csv);
    t.write(
        "ws/big/batch.toml",
        "batch='BIG'\nreport='BIG-1'\nclient_name='c'\nclient_address='a'\nclient_contact='p'\nreceived_on=2026-11-10\nresults='results.csv'\n",
    );
}

#[test]
#[ignore]
fn check_one_million_rows_to_csv() {
    let rows = 1_000_000;
    let t = TestDir::new("bench");
    big_batch(&t, rows);
    // check into CSV, to a file (the certificate of a million rows is not
    // what this measures).
    let sink = std::fs::File::create(t.path("big.csv")).unwrap();
    let start = Instant::now();
    let out = std::process::Command::new("/usr/bin/time")
        .arg("-v")
        .arg(env!("CARGO_BIN_EXE_limen"))
        .args(["check", "ws/big", "--format", "csv"])
        .current_dir(&t.root)
        .stdout(sink)
        .output()
        .unwrap();
    let secs = start.elapsed().as_secs_f64();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    let written = std::fs::metadata(t.path("big.csv")).unwrap().len();
    println!(
        "rows: {rows}, seconds: {secs:.2}, rows/s: {:.0}, report bytes: {written}",
        rows as f64 / secs
    );
    if let Some(line) = stderr
        .lines()
        .find(|l| l.contains("Maximum resident set size"))
    {
        println!("{}", line.trim());
    }
}

const ANALYTES: [&str; 8] = ["Pb", "Cd", "As", "Hg", "Cr", "Ba", "Sb", "Se"];

fn pdf_workspace(t: &TestDir) {
    t.write(
        "ws/lab.toml",
        "name='Bench Lab'\naddress='1 Bench Road'\nsignatory='B. Analyst'\n[qc]\nrequired=[]\n",
    );
    let mut limits = String::from(
        "analyte,matrix,method,unit,mdl,loq,effective_from,upper_range,upper_range_unit,study_id\n",
    );
    let mut specs = String::from("spec,analyte,matrix,limit,unit,citation,effective_from\n");
    for a in ANALYTES {
        limits.push_str(&format!(
            "{a},paint,6010D,ug/L,8,25,2025-01-01,5000,ug/L,S-{a}\n"
        ));
        specs.push_str(&format!(
            "L-{a},{a},paint,90,mg/kg,bench limit,2009-01-01\n"
        ));
    }
    t.write("ws/limits.csv", limits);
    t.write("ws/specs.csv", specs);
    t.signing_key("ws", "default");
}

fn pdf_batch(t: &TestDir, dir: &str, report: &str, samples: usize) {
    t.write(
        &format!("ws/{dir}/batch.toml"),
        format!("batch='{report}'\nreport='{report}'\nclient_name='Bench Client'\nclient_address='2 Client Street'\nclient_contact='C. Contact'\nreceived_on=2026-11-10\nresults='r.csv'\n"),
    );
    let mut csv = String::from(
        "lab_id,client_id,description,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec\n",
    );
    for i in 0..samples {
        for (k, a) in ANALYTES.iter().enumerate() {
            let _ = writeln!(
                csv,
                "S{i:05},C{i:05},Painted panel {i} from the bench series,sample,{a},paint,6010D,{}.{},ug/L,1,0.100,50,2026-11-13,L-{a}",
                (i * 37 + k * 11) % 400,
                k
            );
        }
    }
    t.write(&format!("ws/{dir}/r.csv"), csv);
}

fn timed_issue(t: &TestDir, args: &[&str]) -> (f64, String) {
    let start = Instant::now();
    let out = std::process::Command::new("/usr/bin/time")
        .arg("-v")
        .arg(env!("CARGO_BIN_EXE_limen"))
        .args(args)
        .current_dir(&t.root)
        .env("SOURCE_DATE_EPOCH", "1795000000")
        .output()
        .unwrap();
    let secs = start.elapsed().as_secs_f64();
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(out.status.success(), "{stderr}");
    let rss = stderr
        .lines()
        .find(|l| l.contains("Maximum resident set size"))
        .map(|l| l.trim().to_string())
        .unwrap_or_default();
    (secs, rss)
}

#[test]
#[ignore]
fn certificates_large_and_many() {
    let t = TestDir::new("bench-pdf");
    pdf_workspace(&t);
    pdf_batch(&t, "big", "BIG-PDF", 1000);
    let (secs, rss) = timed_issue(&t, &["issue", "ws/big", "--out", "out"]);
    let size = std::fs::metadata(t.path("out/BIG-PDF.pdf")).unwrap().len();
    let pages = pdfinfo_pages(&t.path("out/BIG-PDF.pdf")).expect("pdfinfo (poppler-utils)");
    println!(
        "1000 samples x 8 analytes: {pages} pages in {secs:.2} s ({:.0} pages/s), {size} bytes; {rss}",
        pages as f64 / secs
    );

    let mut dirs = Vec::new();
    for i in 0..500 {
        pdf_batch(&t, &format!("one{i:03}"), &format!("ONE-{i:03}"), 1);
        dirs.push(format!("ws/one{i:03}"));
    }
    let mut args = vec!["issue"];
    args.extend(dirs.iter().map(String::as_str));
    args.extend(["--out", "many"]);
    let (secs, rss) = timed_issue(&t, &args);
    let sizes: Vec<u64> = (0..500)
        .map(|i| {
            std::fs::metadata(t.path(&format!("many/ONE-{i:03}.pdf")))
                .unwrap()
                .len()
        })
        .collect();
    let pages: usize = (0..500)
        .map(|i| {
            pdfinfo_pages(&t.path(&format!("many/ONE-{i:03}.pdf")))
                .expect("pdfinfo (poppler-utils)")
        })
        .sum();
    println!(
        "500 single-sample reports: {pages} pages in {secs:.2} s ({:.0} pages/s), {} to {} bytes each; {rss}",
        pages as f64 / secs,
        sizes.iter().min().unwrap(),
        sizes.iter().max().unwrap()
    );
}

fn pdfinfo_pages(path: &std::path::Path) -> Option<usize> {
    let out = std::process::Command::new("pdfinfo")
        .arg(path)
        .output()
        .ok()?;
    String::from_utf8_lossy(&out.stdout)
        .lines()
        .find_map(|l| l.strip_prefix("Pages:").map(|v| v.trim().parse().ok()))?
}

/// A ledger of 20,000 issued reports (10 results each), written through the
/// library as `limen issue` would record them, then `limen impact` over all.
#[test]
#[ignore]
fn impact_over_twenty_thousand_reports() {
    let t = TestDir::new("bench-impact");
    t.write(
        "ws/lab.toml",
        "name='Bench Lab'\naddress='1 Bench Road'\nsignatory='B. Analyst'\n[qc]\nrequired=[]\n",
    );
    t.write(
        "ws/limits.csv",
        "analyte,matrix,method,unit,mdl,loq,effective_from,study_id\nPb,paint,6010D,ug/L,8,25,2025-01-01,S1\nCd,paint,6010D,ug/L,2,6,2025-01-01,S2\n",
    );
    t.write(
        "ws/specs.csv",
        "spec,analyte,matrix,limit,unit,citation,effective_from\nP,Pb,paint,90,mg/kg,c,2009-01-01\nC,Cd,paint,75,mg/kg,c,2009-01-01\n",
    );
    let ws = limen::read::Workspace::load(&t.path("ws")).unwrap();
    let (mut ledger, _) = limen::ledger::Ledger::open(&ws.root).unwrap();
    let run = limen::RunInfo {
        issued_at: chrono::DateTime::from_timestamp(1_795_000_000, 0).unwrap(),
        tool_version: "bench".into(),
    };
    let n = 20_000;
    let start = Instant::now();
    for i in 0..n {
        let manifest = format!(
            "batch='B{i}'\nreport='R-{i:05}'\nclient_name='C'\nclient_address='A'\nclient_contact='P'\nreceived_on=2026-11-10\nresults='r.csv'\n"
        );
        let mut csv = String::from(
            "lab_id,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec\n",
        );
        // Half the batches were run before the corrected cadmium row takes
        // effect (2026-11-01), so only the other half is affected.
        let day = if i % 2 == 0 {
            "2026-11-13"
        } else {
            "2026-10-20"
        };
        for k in 0..5 {
            let _ = writeln!(
                csv,
                "S{i}-{k},sample,Pb,paint,6010D,{}.{k},ug/L,1,0.100,50,{day},P",
                (i + k * 7) % 200
            );
            let _ = writeln!(
                csv,
                "S{i}-{k},sample,Cd,paint,6010D,{}.{k},ug/L,1,0.100,50,{day},C",
                (i + k * 3) % 40
            );
        }
        let batch = limen::read::Batch {
            dir: t.path(&format!("ws/b{i}")),
            manifest_file: "batch.toml".into(),
            manifest_text: manifest.clone(),
            manifest: limen::read::Manifest::parse("batch.toml", &manifest).unwrap(),
            results_file: "r.csv".into(),
            results_bytes: csv.into_bytes(),
            results_on_disk: None,
        };
        let report = limen::report::build(&ws, &batch, 0, &run).unwrap();
        let id = ledger
            .begin(&limen::ledger::NewRecord {
                report: &report,
                local_offset: "+00:00".into(),
                reason: String::new(),
                changed: Vec::new(),
                out_dir: t.path("out"),
                snapshot: limen::ledger::recompute::snapshot(&ws, &batch, &report),
                files: Vec::new(),
            })
            .unwrap();
        ledger.complete(id).unwrap();
    }
    println!(
        "wrote {n} ledger records in {:.1} s",
        start.elapsed().as_secs_f64()
    );
    drop(ledger);
    // A corrected cadmium MDL, in force from 2026-11-01.
    let mut limits = t.read("ws/limits.csv");
    limits.push_str("Cd,paint,6010D,ug/L,3,9,2026-11-01,S3\n");
    t.write("ws/limits.csv", limits);
    let start = Instant::now();
    let out = std::process::Command::new("/usr/bin/time")
        .args([
            "-v",
            env!("CARGO_BIN_EXE_limen"),
            "impact",
            "--workspace",
            "ws",
            "--format",
            "csv",
        ])
        .current_dir(&t.root)
        .output()
        .unwrap();
    let secs = start.elapsed().as_secs_f64();
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(3), "{stderr}");
    let affected = stdout.lines().count() - 1;
    let rss = stderr
        .lines()
        .find(|l| l.contains("Maximum resident set size"))
        .unwrap_or("")
        .trim();
    println!("impact over {n} reports: {affected} affected, {secs:.2} s; {rss}");
    // Every cadmium result of a batch run since the correction now comes
    // from the new register row: a changed result by `changes`.
    assert_eq!(affected, n / 2);
}
