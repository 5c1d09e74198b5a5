//! Every reader, fed arbitrary bytes and mutated valid files (truncated, a
//! byte flipped, two columns swapped, a cell replaced by a huge number,
//! `1e999`, NaN text, 10,000 characters, invalid UTF-8 or a NUL), ends in a
//! value or an error naming its file, never a panic, and writes nothing.
//!
//! CI runs a few cases per reader; the long run is ignored:
//! `LIMEN_FUZZ_CASES=1000000 cargo test --release --test fuzz -- --ignored --nocapture`

mod util;
use limen::ledger::Ledger;
use limen::read::{Batch, Workspace};
use limen::study::{baseline, calibration};
use proptest::prelude::*;
use proptest::test_runner::{Config, TestCaseError, TestRunner};
use std::path::{Path, PathBuf};
use util::{TestDir, repo};

/// One way of damaging a valid file.
#[derive(Debug, Clone)]
enum Damage {
    Truncate(usize),
    Flip(usize, u8),
    SwapColumns(usize, usize),
    Cell(usize, usize, &'static [u8]),
    LongCell(usize, usize),
    Insert(usize, Vec<u8>),
}

const NASTY: &[&[u8]] = &[
    b"79228162514264337593543950336",
    b"1e999",
    b"-1e-999",
    b"NaN",
    b"inf",
    b"-0",
    b"\xff\xfe",
    b"\x00",
    b"\"",
    b"=1+1",
    b"2026-02-30",
    b"",
];

fn damage() -> impl Strategy<Value = Damage> {
    prop_oneof![
        any::<usize>().prop_map(Damage::Truncate),
        (any::<usize>(), any::<u8>()).prop_map(|(i, b)| Damage::Flip(i, b)),
        (0usize..20, 0usize..20).prop_map(|(a, b)| Damage::SwapColumns(a, b)),
        (any::<usize>(), 0usize..20, proptest::sample::select(NASTY))
            .prop_map(|(l, c, v)| Damage::Cell(l, c, v)),
        (any::<usize>(), 0usize..20).prop_map(|(l, c)| Damage::LongCell(l, c)),
        (
            any::<usize>(),
            proptest::collection::vec(any::<u8>(), 1..16)
        )
            .prop_map(|(i, b)| Damage::Insert(i, b)),
    ]
}

/// Splits on commas outside quotes; good enough to damage a CSV or a TOML
/// line by "cells".
fn cells(line: &[u8]) -> Vec<Vec<u8>> {
    line.split(|&b| b == b',').map(<[u8]>::to_vec).collect()
}

fn apply(valid: &[u8], d: &Damage) -> Vec<u8> {
    let mut v = valid.to_vec();
    let lines =
        |v: &[u8]| -> Vec<Vec<u8>> { v.split(|&b| b == b'\n').map(<[u8]>::to_vec).collect() };
    let join = |ls: Vec<Vec<u8>>| ls.join(&b'\n');
    match d {
        Damage::Truncate(i) => v.truncate(i % (v.len() + 1)),
        Damage::Flip(i, b) => {
            if !v.is_empty() {
                let n = v.len();
                v[i % n] ^= b | 1;
            }
        }
        Damage::Insert(i, bytes) => {
            let at = i % (v.len() + 1);
            v.splice(at..at, bytes.iter().copied());
        }
        Damage::SwapColumns(a, b) => {
            let ls = lines(&v)
                .into_iter()
                .map(|l| {
                    let mut c = cells(&l);
                    if *a < c.len() && *b < c.len() {
                        c.swap(*a, *b);
                    }
                    c.join(&b',')
                })
                .collect();
            v = join(ls);
        }
        Damage::Cell(l, c, _) | Damage::LongCell(l, c) if !v.is_empty() => {
            let long = vec![b'9'; 10_000];
            let value: &[u8] = match d {
                Damage::Cell(_, _, value) => value,
                _ => &long,
            };
            let mut ls = lines(&v);
            let n = ls.len();
            let line = &mut ls[l % n];
            let mut cs = cells(line);
            let k = c % cs.len();
            cs[k] = value.to_vec();
            *line = cs.join(&b',');
            v = join(ls);
        }
        Damage::Cell(..) | Damage::LongCell(..) => {}
    }
    v
}

fn cases(ci: u32) -> u32 {
    std::env::var("LIMEN_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(ci)
}

/// Runs `check` on arbitrary bytes and on damaged copies of `valid`.
fn fuzz(
    name: &str,
    valid: &[u8],
    n: u32,
    check: &mut dyn FnMut(&[u8]) -> Result<(), TestCaseError>,
) {
    let started = std::time::Instant::now();
    let config = Config {
        cases: n,
        failure_persistence: None,
        ..Config::default()
    };
    let check = std::cell::RefCell::new(check);
    let mut runner = TestRunner::new(config.clone());
    let any_bytes = proptest::collection::vec(any::<u8>(), 0..400);
    runner
        .run(&any_bytes, |b| (check.borrow_mut())(&b))
        .unwrap_or_else(|e| panic!("{name}, arbitrary bytes: {e}"));
    let mut runner = TestRunner::new(config);
    runner
        .run(&proptest::collection::vec(damage(), 1..4), |ds| {
            let mut bytes = valid.to_vec();
            for d in &ds {
                bytes = apply(&bytes, d);
            }
            (check.borrow_mut())(&bytes)
        })
        .unwrap_or_else(|e| panic!("{name}, damaged valid file: {e}"));
    if n > 10_000 {
        eprintln!(
            "{name}: {} cases in {:.1} s, no failure",
            2 * n as u64,
            started.elapsed().as_secs_f64()
        );
    }
}

/// The files in a folder, with their bytes, to show nothing was written.
fn listing(dir: &Path) -> Vec<(PathBuf, Vec<u8>)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                let bytes = std::fs::read(&p).unwrap();
                out.push((p, bytes));
            }
        }
    }
    out.sort();
    out
}

fn names_file(message: &str, file: &str) -> Result<(), TestCaseError> {
    prop_assert!(
        message.contains(file),
        "the error must name {file}: {message}"
    );
    Ok(())
}

/// A workspace reader: writes `bytes` as `file` in a copy of the demo
/// workspace, loads the workspace (and a batch when `batch` is set) and
/// evaluates it.
fn workspace_reader(name: &str, file: &str, n: u32) {
    let t = TestDir::new(&format!("fuzz-{name}"));
    t.demo_workspace("ws");
    let ws_dir = t.path("ws");
    let target = ws_dir.join(file);
    if file == "qc.toml" {
        std::fs::write(&target, QC_SEED).unwrap();
    }
    let valid = std::fs::read(&target).unwrap_or_default();
    let batch_dir = ws_dir.join("furniture-jewellery-2611-041");
    let run = limen::RunInfo {
        issued_at: chrono::DateTime::from_timestamp(0, 0).unwrap(),
        tool_version: "t".into(),
    };
    fuzz(name, &valid, n, &mut |bytes| {
        std::fs::write(&target, bytes).unwrap();
        let before = listing(&ws_dir);
        let outcome = Workspace::load(&ws_dir)
            .map_err(limen::Error::from)
            .and_then(|ws| {
                let batch = Batch::load(&batch_dir)?;
                limen::report::build(&ws, &batch, 0, &run)?;
                Ok(())
            });
        prop_assert_eq!(listing(&ws_dir), before, "a reader wrote a file");
        if let Err(e) = outcome {
            // The damaged file, or (when the damage shows as a clash with
            // another file, e.g. a unit that no longer fits a spec) that
            // other file and its line.
            let text = e.to_string();
            let file_name = Path::new(file).file_name().unwrap().to_string_lossy();
            let other = [
                "lab.toml",
                "qc.toml",
                "limits.csv",
                "specs.csv",
                "batch.toml",
                "results.csv",
            ]
            .iter()
            .any(|f| {
                text.contains(&format!("{f}:"))
                    && text
                        .split(':')
                        .nth(1)
                        .is_some_and(|l| l.parse::<u64>().is_ok())
            });
            prop_assert!(
                text.contains(file_name.as_ref()) || other,
                "the error must name {file_name}, or another file and line: {text}"
            );
            prop_assert!(!e.hint().is_empty());
        }
        Ok(())
    });
    std::fs::write(&target, &valid).unwrap();
}

/// The same readers through their parsers on bytes in memory, for the long
/// run (the file round trip above dominates the time otherwise). Text files
/// that are not UTF-8 are refused by `Workspace::load` before parsing.
fn workspace_reader_in_memory(name: &str, file: &str, n: u32) {
    let demo = repo().join("demo-batches");
    let read = |f: &str| std::fs::read(demo.join(f)).unwrap_or_default();
    let batch_dir = "furniture-jewellery-2611-041";
    let files = [
        "lab.toml".to_string(),
        "qc.toml".to_string(),
        "limits.csv".to_string(),
        "specs.csv".to_string(),
        format!("{batch_dir}/batch.toml"),
        format!("{batch_dir}/results.csv"),
    ];
    let mut originals: Vec<Vec<u8>> = files.iter().map(|f| read(f)).collect();
    if file == "qc.toml" {
        originals[1] = QC_SEED.to_vec();
    }
    let k = files.iter().position(|f| f == file).unwrap();
    let run = limen::RunInfo {
        issued_at: chrono::DateTime::from_timestamp(0, 0).unwrap(),
        tool_version: "t".into(),
    };
    fuzz(name, &originals[k], n, &mut |bytes| {
        let mut texts = originals.clone();
        texts[k] = bytes.to_vec();
        let text = |i: usize| String::from_utf8(texts[i].clone());
        let outcome = (|| -> Result<(), limen::Error> {
            let bad = |f: &str| {
                limen::read::ReadError::field(
                    limen::read::Loc::file(f),
                    "not valid UTF-8 text",
                    "save the file as UTF-8",
                )
            };
            let lab_text = text(0).map_err(|_| bad("lab.toml"))?;
            let qc_text = if texts[1].is_empty() {
                None
            } else {
                Some(text(1).map_err(|_| bad("qc.toml"))?)
            };
            let lab = limen::read::lab_from(
                "lab.toml",
                &lab_text,
                qc_text.as_deref().map(|t| ("qc.toml", t)),
            )?;
            let ws = Workspace {
                root: ".".into(),
                lab_text,
                qc_text,
                lab,
                register: limen::read::Register::parse("limits.csv", &texts[2])?,
                specs: limen::read::Specs::parse("specs.csv", &texts[3])?,
                register_sha256: limen::read::sha256_hex(&texts[2]),
                specs_sha256: limen::read::sha256_hex(&texts[3]),
            };
            let manifest_text = text(4).map_err(|_| bad("batch.toml"))?;
            let manifest = limen::read::Manifest::parse("batch.toml", &manifest_text)?;
            let batch = Batch {
                dir: ".".into(),
                manifest_file: "batch.toml".into(),
                manifest_text,
                manifest,
                results_file: "results.csv".into(),
                results_bytes: texts[5].clone(),
                results_on_disk: None,
            };
            limen::report::build(&ws, &batch, 0, &run)?;
            Ok(())
        })();
        if let Err(e) = outcome {
            let text = e.to_string();
            let file_name = Path::new(file).file_name().unwrap().to_string_lossy();
            prop_assert!(
                text.contains(file_name.as_ref())
                    || text
                        .split(':')
                        .nth(1)
                        .is_some_and(|l| l.trim().parse::<u64>().is_ok()),
                "the error must name {file_name}, or another file and line: {text}"
            );
        }
        Ok(())
    });
}

/// A valid qc.toml to damage (the demo keeps its windows at the defaults).
const QC_SEED: &[u8] = b"required = [\"method-blank\", \"lcs\"]\nlcs_recovery_pct = [80, 120]\nrpd_max_pct = 20\n[methods.\"6010D\"]\nccv_recovery_pct = [90, 110]\n";

fn run_all(n: u32) {
    if n > 10_000 {
        workspace_reader_in_memory("lab", "lab.toml", n);
        workspace_reader_in_memory("qc", "qc.toml", n);
        workspace_reader_in_memory("limits", "limits.csv", n);
        workspace_reader_in_memory("specs", "specs.csv", n);
        workspace_reader_in_memory("batch", "furniture-jewellery-2611-041/batch.toml", n);
        workspace_reader_in_memory("results", "furniture-jewellery-2611-041/results.csv", n);
        study_readers(n);
        ledger_and_verify(n);
        return;
    }
    workspace_reader("lab", "lab.toml", n);
    workspace_reader("qc", "qc.toml", n);
    workspace_reader("limits", "limits.csv", n);
    workspace_reader("specs", "specs.csv", n);
    workspace_reader("batch", "furniture-jewellery-2611-041/batch.toml", n);
    workspace_reader("results", "furniture-jewellery-2611-041/results.csv", n);
    study_readers(n);
    ledger_and_verify(n);
}

fn study_readers(n: u32) {
    let valid = std::fs::read(repo().join("demo-batches/studies/cd-paint-2611.csv")).unwrap();
    fuzz("study", &valid, n, &mut |bytes| {
        let outcome = limen::study::parse_study("study.csv", bytes)
            .and_then(|rows| limen::study::groups("study.csv", rows))
            .map(|groups| {
                for g in &groups {
                    let _ = limen::study::mdl::compute(g, &Default::default());
                }
            });
        if let Err(e) = outcome {
            names_file(&e.to_string(), "study.csv")?;
        }
        Ok(())
    });
    let cal = b"level,response\n1,2.1\n2,3.9\n3,6.2\n4,7.8\n5,10.0\n";
    fuzz("calibration", cal, n, &mut |bytes| {
        for sigma in [calibration::Sigma::Residual, calibration::Sigma::Intercept] {
            if let Err(e) = calibration::compute("cal.csv", bytes, sigma) {
                names_file(&e.to_string(), "cal.csv")?;
            }
        }
        Ok(())
    });
    let mut trace = String::from("x,signal\n");
    for x in 0..30 {
        trace.push_str(&format!("{x},{}\n", 10 + x % 3));
    }
    fuzz("trace", trace.as_bytes(), n, &mut |bytes| {
        if let Err(e) = baseline::compute(
            "trace.csv",
            bytes,
            (0.0, 14.0),
            Some((18.0, 22.0)),
            Some(2.0),
        ) {
            names_file(&e.to_string(), "trace.csv")?;
        }
        Ok(())
    });
}

/// A damaged ledger is refused without being changed; any bytes given to
/// `verify` get an answer.
fn ledger_and_verify(n: u32) {
    let t = TestDir::new("fuzz-ledger");
    t.demo_workspace("ws");
    let r = t.limen(&[
        "issue",
        "--by",
        "ivale",
        "ws/ceramics-2611-052",
        "--out",
        "out",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let ws_dir = t.path("ws");
    let ledger_path = ws_dir.join("ledger.sqlite");
    let valid_ledger = std::fs::read(&ledger_path).unwrap();
    let pdf = std::fs::read(t.path("out/COA-2611-052.pdf")).unwrap();
    // The zero padding after the signature's DER in /Contents: the only
    // bytes a change to which leaves the signature valid.
    let found = limen::sign::pdf::locate(&pdf).unwrap().unwrap();
    let hex = &pdf[found.hole.0 + 1..found.hole.1 - 1];
    let used = hex.iter().rposition(|&c| c != b'0').map_or(0, |p| p + 1);
    let padding = found.hole.0 + 1 + used.next_multiple_of(2)..found.hole.1 - 1;
    {
        let (ledger, _) = Ledger::open(&ws_dir).unwrap();
        fuzz("verify", &pdf, n.min(2_000).max(n / 50), &mut |bytes| {
            let v = limen::ledger::verify_file(&ledger, bytes);
            prop_assert!(v.is_ok(), "{:?}", v.err());
            if let limen::sign::Check::Valid { .. } = limen::sign::check_pdf(bytes) {
                let same_outside = bytes.len() == pdf.len()
                    && (0..pdf.len()).all(|i| padding.contains(&i) || bytes[i] == pdf[i]);
                prop_assert!(same_outside, "a damaged certificate still checks valid");
            }
            Ok(())
        });
    }
    // SQLite work per case is slow: a share of the cases.
    fuzz("ledger", &valid_ledger, (n / 20).max(8), &mut |bytes| {
        std::fs::write(&ledger_path, bytes).unwrap();
        let _ = std::fs::remove_file(ws_dir.join("ledger.sqlite-journal"));
        match Ledger::open(&ws_dir) {
            Err(e) => {
                names_file(&e.to_string(), "ledger.sqlite")?;
                let after = std::fs::read(&ledger_path).unwrap();
                prop_assert!(after == bytes, "a refused ledger was changed");
            }
            Ok((ledger, _)) => {
                // Whatever still opens answers queries or says it cannot.
                let _ = ledger.latest_all(None);
                let _ = ledger.history("COA-2611-052");
                let _ = limen::ledger::verify_file(&ledger, &pdf);
            }
        }
        Ok(())
    });
}

#[test]
fn every_reader_survives_damage() {
    run_all(cases(24));
}

#[test]
#[ignore = "long: a million cases per reader"]
fn every_reader_survives_a_million_cases() {
    run_all(cases(1_000_000));
}
