use clap::{Parser, Subcommand};
use limen::error::{EXIT_BLOCKED, EXIT_OK};
use limen::read::{Batch, Workspace};
use limen::{Error, RunInfo};
use std::io::IsTerminal;
use std::path::Path;

mod check;
mod demo;
mod history;
mod impact;
mod init;
mod issue;
mod keys;
mod progress;
mod reissue;
mod review;
mod study;
mod verify;

#[derive(Parser)]
#[command(
    name = "limen",
    version,
    about = "Limit-aware trace-metal results and certificates of analysis",
    long_about = "limen turns instrument readings into results checked against the MDL and LOQ in force \
                  and the regulatory or client limit, and issues the report.\n\n\
                  Exit codes: 0 ok; 1 from `verify` when the file is not an issued report or was \
                  altered; 2 input error; 3 blocked (or, from `impact`, reports would change); \
                  141 when standard output is closed early."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Evaluate a batch and show every client result and what blocks it.
    Check(check::Args),
    /// Record that a signatory reviewed a batch's exact inputs before release.
    Review(review::Args),
    /// Issue the report files for one or more batches.
    Issue(issue::Args),
    /// Create, import or list the signatories' signing keys and certificates.
    Keys(keys::Args),
    /// Re-issue a report as a new revision after a limit or detail changes.
    Reissue(Box<reissue::Args>),
    /// List the issued reports whose results change under today's register and specs.
    Impact(impact::Args),
    /// Say whether a PDF or CSV is an issued report, and whether it is current.
    Verify(verify::Args),
    /// List every revision of a report.
    History(history::Args),
    /// Create a starter workspace that `limen check` accepts as is.
    Init(init::Args),
    /// Compute MDL, IDL and LOQ from a limit study and update the register.
    Study(Box<study::Args>),
    /// Run the job on the embedded demo workspace.
    Demo(demo::Args),
}

pub fn run() -> i32 {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Check(a) => check::run(a),
        Command::Review(a) => review::run(a),
        Command::Issue(a) => issue::run(a),
        Command::Init(a) => init::run(a),
        Command::Keys(a) => keys::run(a),
        Command::Reissue(a) => reissue::run(*a),
        Command::Impact(a) => impact::run(a),
        Command::Verify(a) => verify::run(a),
        Command::History(a) => history::run(a),
        Command::Study(a) => study::run(*a),
        Command::Demo(a) => demo::run(a),
    };
    match result {
        Ok(code) => code,
        Err(Error::BrokenPipe) => limen::error::EXIT_BROKEN_PIPE,
        Err(e) => {
            eprintln!("error: {e}");
            eprintln!("hint: {}", e.hint());
            e.exit_code()
        }
    }
}

/// The workspace for a batch: --workspace, else the nearest folder upward
/// holding lab.toml.
pub fn workspace_for(batch_dir: &Path, explicit: Option<&Path>) -> Result<Workspace, Error> {
    let root = match explicit {
        Some(dir) => dir.to_path_buf(),
        None => Workspace::find(batch_dir)?,
    };
    Ok(Workspace::load(&root)?)
}

/// The workspace and the batch, its results left on disk to be read in passes.
pub fn load(batch_dir: &Path, explicit: Option<&Path>) -> Result<(Workspace, Batch), Error> {
    let ws = workspace_for(batch_dir, explicit)?;
    let batch = Batch::open(batch_dir)?;
    Ok((ws, batch))
}

/// The workspace (--workspace, else upward from the current folder) and its
/// ledger, after any recovery of an interrupted issue, which is reported.
pub fn ledger_workspace(
    explicit: Option<&Path>,
) -> Result<(Workspace, limen::ledger::Ledger), Error> {
    let root = match explicit {
        Some(d) => d.to_path_buf(),
        None => Workspace::find(Path::new("."))?,
    };
    let ws = Workspace::load(&root)?;
    let (ledger, notes) = limen::ledger::Ledger::open(&ws.root)?;
    for n in notes {
        eprintln!("note: {n}");
    }
    Ok((ws, ledger))
}

/// The older single `signatory = "..."` still works; say once that the
/// tables replace it.
pub fn old_signatory_note(ws: &Workspace) {
    if ws.lab.signatory_is_old_form {
        eprintln!(
            "note: {}: `signatory = \"...\"` is the older form; list each person who may authorise as [[signatory]] with id, name, role and scope",
            ws.root.join("lab.toml").display()
        );
    }
}

/// Now, or SOURCE_DATE_EPOCH when set, so builds of a report reproduce.
pub fn run_info() -> Result<RunInfo, Error> {
    let secs = match std::env::var("SOURCE_DATE_EPOCH") {
        Ok(v) => v.trim().parse::<i64>().map_err(|_| Error::Usage {
            message: format!("SOURCE_DATE_EPOCH=`{v}` is not a whole number of seconds"),
            hint: "set it to seconds since 1970-01-01 UTC, or unset it".into(),
        })?,
        Err(_) => std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.as_secs() as i64)
            .unwrap_or(0),
    };
    let issued_at = chrono::DateTime::from_timestamp(secs, 0).ok_or_else(|| Error::Usage {
        message: format!("SOURCE_DATE_EPOCH={secs} is out of range"),
        hint: "set it to seconds since 1970-01-01 UTC".into(),
    })?;
    Ok(RunInfo {
        issued_at,
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
    })
}

/// Writes text to standard output, reporting a failed write.
pub fn say(text: &str) -> Result<(), Error> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(Error::stdout)
}

/// LIMEN_FAULT names a point at which `issue` stops the process, for the
/// tests that prove an interrupted issue leaves a consistent ledger. Only a
/// build with the `fault-injection` feature (the one the tests run) reads
/// it; the shipped binary has no way to stop itself mid-issue.
#[cfg(not(feature = "fault-injection"))]
pub fn fault() -> Result<Option<limen::issue::Fault>, Error> {
    Ok(None)
}

#[cfg(feature = "fault-injection")]
pub fn fault() -> Result<Option<limen::issue::Fault>, Error> {
    match std::env::var("LIMEN_FAULT") {
        Err(_) => Ok(None),
        Ok(v) => limen::issue::Fault::parse(&v)
            .map(Some)
            .ok_or_else(|| Error::Usage {
                message: format!("LIMEN_FAULT=`{v}` is not a fault point"),
                hint: "unset LIMEN_FAULT; it is for limen's own tests".into(),
            }),
    }
}

pub fn colour_stdout() -> bool {
    std::io::stdout().is_terminal() && std::env::var_os("NO_COLOR").is_none()
}

pub fn blocked_code(blocked: bool) -> i32 {
    if blocked { EXIT_BLOCKED } else { EXIT_OK }
}
