//! Standard output: a closed pipe ends quietly with status 141, any other
//! failed write is an input-class error (exit 2) with a message, and the
//! help lists every exit code.

mod util;
use std::io::Read;
use std::process::{Command, Stdio};
use util::TestDir;

/// The demo workspace with a batch of 2,000 results, so the CSV (about
/// 350 KB) is larger than any pipe buffer and the writer must block.
fn large_batch() -> TestDir {
    let t = TestDir::new("stdout-large");
    t.demo_workspace("ws");
    let head = "lab_id,client_id,description,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec,uncertainty_pct\n";
    let mut body = String::from(head);
    for i in 0..2000 {
        body.push_str(&format!(
            "L{i:05},C{i},Paint chip,sample,Pb,paint,6010D,{}.5,ug/L,1,0.25,50,2026-11-13,,\n",
            i % 900
        ));
    }
    t.write("ws/big/results.csv", body);
    t.write(
        "ws/big/batch.toml",
        "batch = \"BIG\"\nreport = \"R-BIG\"\nclient_name = \"Client\"\nclient_address = \"Addr\"\nclient_contact = \"Contact\"\nreceived_on = 2026-11-10\nresults = \"results.csv\"\n",
    );
    t.write("ws/qc.toml", "required = []\n");
    t
}

#[test]
fn a_closed_pipe_ends_quietly_with_status_141() {
    let t = large_batch();
    for format in ["csv", "table"] {
        let mut child = Command::new(env!("CARGO_BIN_EXE_limen"))
            .args(["check", "ws/big", "--format", format])
            .current_dir(&t.root)
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        // Read a little, then close: the rest of the output meets a closed pipe.
        let mut stdout = child.stdout.take().unwrap();
        let mut first = [0u8; 100];
        stdout.read_exact(&mut first).unwrap();
        drop(stdout);
        let mut stderr = String::new();
        child
            .stderr
            .take()
            .unwrap()
            .read_to_string(&mut stderr)
            .unwrap();
        let status = child.wait().unwrap();
        assert_eq!(status.code(), Some(141), "{format}: {stderr}");
        assert!(!stderr.contains("error"), "{format}: quiet, got {stderr}");
        assert!(!stderr.contains("panicked"), "{format}: {stderr}");
    }
}

#[test]
fn a_full_disk_is_an_error() {
    if !std::path::Path::new("/dev/full").exists() {
        return;
    }
    let t = large_batch();
    for format in ["csv", "table"] {
        let out = Command::new(env!("CARGO_BIN_EXE_limen"))
            .args(["check", "ws/big", "--format", format])
            .current_dir(&t.root)
            .stdout(std::fs::File::create("/dev/full").unwrap())
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{format}: {stderr}");
        assert!(
            stderr.contains("error: cannot write to standard output"),
            "{format}: {stderr}"
        );
        assert!(stderr.contains("hint:"), "{format}: {stderr}");
    }
}

#[test]
fn help_lists_every_exit_code() {
    let t = TestDir::new("help");
    let r = t.limen(&["--help"]);
    assert_eq!(r.code, 0);
    let text = r.stdout.split_whitespace().collect::<Vec<_>>().join(" ");
    for code in [
        "0 ok",
        "1 from `verify`",
        "2 input error",
        "3 blocked",
        "141 when standard output is closed",
    ] {
        assert!(text.contains(code), "help lacks `{code}`: {text}");
    }
}
