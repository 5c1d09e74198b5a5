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
    let time = std::path::Path::new("/usr/bin/time");
    let start = Instant::now();
    let out = if time.exists() {
        std::process::Command::new(time)
            .arg("-v")
            .arg(env!("CARGO_BIN_EXE_limen"))
            .args(["issue", "ws/big", "--out", "out"])
            .current_dir(&t.root)
            .output()
            .unwrap()
    } else {
        std::process::Command::new(env!("CARGO_BIN_EXE_limen"))
            .args(["issue", "ws/big", "--out", "out"])
            .current_dir(&t.root)
            .output()
            .unwrap()
    };
    let secs = start.elapsed().as_secs_f64();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    let written = std::fs::metadata(t.path("out/BIG-1.csv")).unwrap().len();
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
