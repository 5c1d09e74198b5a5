//! Helpers for integration tests: a fresh folder per test and a way to run
//! the built binary in it.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::atomic::{AtomicUsize, Ordering};

static NEXT: AtomicUsize = AtomicUsize::new(0);

pub struct TestDir {
    pub root: PathBuf,
}

pub struct Run {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

impl TestDir {
    pub fn new(name: &str) -> TestDir {
        let n = NEXT.fetch_add(1, Ordering::SeqCst);
        let root = std::env::temp_dir()
            .join("limen-tests")
            .join(format!("{name}-{}-{n}", std::process::id()));
        let _ = std::fs::remove_dir_all(&root);
        std::fs::create_dir_all(&root).unwrap();
        TestDir { root }
    }

    pub fn path(&self, rel: &str) -> PathBuf {
        self.root.join(rel)
    }

    pub fn write(&self, rel: &str, contents: impl AsRef<[u8]>) {
        let p = self.root.join(rel);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, contents).unwrap();
    }

    pub fn read(&self, rel: &str) -> String {
        std::fs::read_to_string(self.root.join(rel)).unwrap()
    }

    pub fn exists(&self, rel: &str) -> bool {
        self.root.join(rel).exists()
    }

    /// Gives signatory `id` of the workspace at `ws` a signing key and a
    /// self-signed certificate valid from 2020-09-13 for 60 years, so
    /// tests at any moment can issue.
    pub fn signing_key(&self, ws: &str, id: &str) {
        let r = self.limen_at(
            1_600_000_000,
            &[
                "keys",
                "new",
                "--signatory",
                id,
                "--days",
                "21900",
                "--workspace",
                ws,
            ],
        );
        assert_eq!(r.code, 0, "keys new: {}", r.stderr);
    }

    /// Neither a file in out/ nor a ledger record of `report` in ws/.
    pub fn nothing_issued(&self, report: &str) {
        let files = std::fs::read_dir(self.path("out"))
            .map(|d| d.count())
            .unwrap_or(0);
        assert_eq!(files, 0, "no report file is written");
        let h = self.limen(&["history", report, "--workspace", "ws"]);
        assert_eq!(h.code, 2, "nothing recorded: {}", h.stdout);
    }

    /// Copies the repository's demo workspace into this folder.
    pub fn demo_workspace(&self, rel: &str) {
        copy_tree(&repo().join("demo-batches"), &self.root.join(rel));
    }

    pub fn limen(&self, args: &[&str]) -> Run {
        self.limen_at(1795000000, args)
    }

    /// As `limen`, at another moment (seconds since 1970, UTC).
    pub fn limen_at(&self, epoch: i64, args: &[&str]) -> Run {
        let out = Command::new(env!("CARGO_BIN_EXE_limen"))
            .args(args)
            .current_dir(&self.root)
            .env("SOURCE_DATE_EPOCH", epoch.to_string())
            .env("NO_COLOR", "1")
            .output()
            .expect("run limen");
        Run {
            code: out.status.code().unwrap_or(-1),
            stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
            stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
        }
    }
}

impl Drop for TestDir {
    fn drop(&mut self) {
        if !std::thread::panicking() {
            let _ = std::fs::remove_dir_all(&self.root);
        }
    }
}

pub fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

pub fn copy_tree(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let target = to.join(entry.file_name());
        if entry.file_type().unwrap().is_dir() {
            copy_tree(&entry.path(), &target);
        } else {
            std::fs::copy(entry.path(), target).unwrap();
        }
    }
}

/// Compares with a golden file; `UPDATE_GOLDEN=1` rewrites it instead.
pub fn golden(name: &str, actual: &str) {
    let path = repo().join("tests/golden").join(name);
    if std::env::var_os("UPDATE_GOLDEN").is_some() {
        std::fs::write(&path, actual).unwrap();
        return;
    }
    let expected = std::fs::read_to_string(&path)
        .unwrap_or_else(|_| panic!("missing golden file {}", path.display()));
    assert_eq!(actual, expected, "output differs from {}", path.display());
}

/// The cell of `column` in each CSV data row.
pub fn csv_column(text: &str, column: &str) -> Vec<String> {
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let idx = r
        .headers()
        .unwrap()
        .iter()
        .position(|h| h == column)
        .unwrap_or_else(|| panic!("no column {column}"));
    r.records()
        .map(|rec| rec.unwrap()[idx].to_string())
        .collect()
}

/// The CSV row for lab id + analyte, as (column -> cell).
pub fn csv_row(
    text: &str,
    lab_id: &str,
    analyte: &str,
) -> std::collections::HashMap<String, String> {
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let headers: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    for rec in r.records() {
        let rec = rec.unwrap();
        let row: std::collections::HashMap<String, String> = headers
            .iter()
            .cloned()
            .zip(rec.iter().map(String::from))
            .collect();
        if row["lab_id"] == lab_id && row["analyte"] == analyte {
            return row;
        }
    }
    panic!("no row {lab_id} {analyte}");
}
