//! The progress bar: on stderr when stderr is a terminal and the run is
//! long, never on stdout, never when stderr is piped.

mod util;
use std::process::Command;
use util::TestDir;

/// Rows enough for the bar to be drawn while it moves (it is told every
/// 8192 rows, and redraws at most twenty times a second).
const ROWS: usize = 60_000;

fn long_batch() -> TestDir {
    let t = TestDir::new("progress");
    t.demo_workspace("ws");
    let mut body = String::from(
        "lab_id,client_id,description,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec,uncertainty_pct\n",
    );
    for i in 0..ROWS {
        body.push_str(&format!(
            "L{i:06},C{i},Paint chip,sample,Pb,paint,6010D,{}.5,ug/L,1,0.25,50,2026-11-13,US-PAINT-PB,\n",
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

fn run_piped(t: &TestDir) -> util::Run {
    let out = Command::new(env!("CARGO_BIN_EXE_limen"))
        .args(["check", "ws/big", "--format", "csv"])
        .current_dir(&t.root)
        .env("SOURCE_DATE_EPOCH", "1795000000")
        .env("LIMEN_PROGRESS", "now")
        .output()
        .unwrap();
    util::Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8(out.stdout).unwrap(),
        stderr: String::from_utf8(out.stderr).unwrap(),
    }
}

/// `check --format csv > out.csv` on a pseudo-terminal (`script`, from
/// util-linux), so stderr alone is the terminal; what the terminal showed.
fn on_a_terminal(t: &TestDir, setting: &str) -> String {
    let inner = format!(
        "'{}' check ws/big --format csv > out.csv",
        env!("CARGO_BIN_EXE_limen")
    );
    let out = Command::new("script")
        .args(["-qfec", &inner, "typescript"])
        .current_dir(&t.root)
        .env("SOURCE_DATE_EPOCH", "1795000000")
        .env("NO_COLOR", "1")
        .env("LIMEN_PROGRESS", setting)
        .stdin(std::process::Stdio::null())
        .output()
        .expect("script (util-linux) is installed; .ci/run makes sure");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    std::fs::read_to_string(t.path("typescript")).unwrap()
}

#[test]
fn off_means_no_bar_even_on_a_terminal() {
    let t = long_batch();
    let terminal = on_a_terminal(&t, "off");
    assert!(!terminal.contains("rows checked"), "{terminal}");
    assert!(!terminal.contains("results written"), "{terminal}");
}

#[test]
fn the_bar_goes_to_a_terminal_stderr_only_and_never_into_the_csv() {
    let t = long_batch();
    // LIMEN_PROGRESS=now skips the second a run must last before the bar
    // shows, so the test does not hang on the build's speed.
    let piped = run_piped(&t);
    assert_eq!(piped.code, 0, "{}", piped.stderr);
    assert_eq!(piped.stderr, "", "stderr is a pipe: no bar");
    assert!(piped.stdout.starts_with("report,revision,lab_id"));
    let terminal = on_a_terminal(&t, "now");
    assert!(terminal.contains("rows checked"), "{terminal}");
    let whole = format!("{ROWS}")
        .as_bytes()
        .rchunks(3)
        .rev()
        .map(|c| std::str::from_utf8(c).unwrap())
        .collect::<Vec<_>>()
        .join(",");
    assert!(
        terminal.contains(&format!("/{whole} results written")),
        "{terminal}"
    );
    let csv = std::fs::read_to_string(t.path("out.csv")).unwrap();
    assert_eq!(
        csv, piped.stdout,
        "the CSV is the same with a bar on stderr"
    );
}
