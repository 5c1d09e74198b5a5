use super::progress::Progress;
use super::run_info;
use limen::Error;
use limen::error::{EXIT_BLOCKED, EXIT_OK};
use limen::ledger::recompute::{Against, Impact, impact};
use std::path::PathBuf;

#[derive(clap::ValueEnum, Clone, Copy)]
pub enum Format {
    Table,
    Csv,
}

#[derive(clap::Args)]
pub struct Args {
    #[arg(long, value_name = "DIR")]
    workspace: Option<PathBuf>,
    /// Only reports issued on or after this date.
    #[arg(long, value_name = "DATE")]
    since: Option<String>,
    #[arg(long, value_enum, default_value = "table")]
    format: Format,
}

/// The impact listing as a terminal table.
pub fn table(checked: usize, affected: &[Impact], register: &str, specs: &str) -> String {
    let mut out = format!("checked {checked} issued report(s) against {register} and {specs}\n");
    if affected.is_empty() {
        out.push_str("no issued report would change\n");
    }
    for i in affected {
        out.push_str(&format!(
            "{} revision {} (issued {}): {} result(s) would change: {} state, {} verdict, {} reported value, {} MDL/LOQ, {} limit applied{}\n",
            i.issued.report,
            i.issued.revision,
            i.issued.issued_at.get(..10).unwrap_or(""),
            i.changes.len(),
            i.state_changes,
            i.verdict_changes,
            i.value_changes,
            i.limits_changes,
            i.spec_changes,
            if i.now_blocked { "; and it would now be blocked" } else { "" }
        ));
        for c in &i.changes {
            out.push_str(&format!("    {}\n", c.describe()));
        }
    }
    if !affected.is_empty() {
        out.push_str(
            "next: `limen reissue REPORT --reason \"...\" --out DIR` for each report listed\n",
        );
    }
    out
}

pub fn run(a: Args) -> Result<i32, Error> {
    let since = match &a.since {
        None => None,
        Some(s) => Some(
            limen::read::csvtable::parse_date(s).ok_or_else(|| Error::Usage {
                message: format!("--since `{s}` is not a date"),
                hint: "write it as 2026-11-01".into(),
            })?,
        ),
    };
    let run = run_info()?;
    let (ws, ledger) = super::ledger_workspace(a.workspace.as_deref())?;
    let against = Against {
        root: &ws.root,
        register: &ws.register,
        specs: &ws.specs,
        lab: None,
        manifest: None,
    };
    let progress = Progress::counting();
    // The count is known from the first report on.
    let found = impact(&ledger, &against, since, &run, &mut |n, of| {
        if n == 0 {
            progress.phase(of as u64, "reports recomputed");
        }
        progress.at(n as u64);
    });
    progress.finish();
    let (checked, affected, failed) = found?;
    match a.format {
        Format::Csv => impact_csv(&affected).map_err(Error::stdout)?,
        Format::Table => super::say(&table(
            checked,
            &affected,
            &ws.register.file,
            &ws.specs.file,
        ))?,
    }
    for f in &failed {
        eprintln!("warning: could not recompute {f}");
    }
    Ok(if affected.is_empty() && failed.is_empty() {
        EXIT_OK
    } else {
        EXIT_BLOCKED
    })
}

/// The impact listing as CSV on standard output.
fn impact_csv(affected: &[Impact]) -> std::io::Result<()> {
    let mut w = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(std::io::stdout().lock());
    let io = |e: csv::Error| match e.into_kind() {
        csv::ErrorKind::Io(e) => e,
        other => std::io::Error::other(format!("{other:?}")),
    };
    w.write_record([
        "report",
        "revision",
        "issued_at",
        "changed_results",
        "state_changes",
        "verdict_changes",
        "value_changes",
        "now_blocked",
        "limits_changes",
        "spec_changes",
    ])
    .map_err(io)?;
    for i in affected {
        w.write_record([
            i.issued.report.clone(),
            i.issued.revision.to_string(),
            i.issued.issued_at.clone(),
            i.changes.len().to_string(),
            i.state_changes.to_string(),
            i.verdict_changes.to_string(),
            i.value_changes.to_string(),
            i.now_blocked.to_string(),
            i.limits_changes.to_string(),
            i.spec_changes.to_string(),
        ])
        .map_err(io)?;
    }
    w.flush()
}
