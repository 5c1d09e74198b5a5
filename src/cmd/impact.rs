use super::run_info;
use limen::Error;
use limen::error::{EXIT_BLOCKED, EXIT_OK};
use limen::ledger::recompute::{Against, changes, recompute, stored};
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
    let mut affected = Vec::new();
    let mut checked = 0usize;
    let mut unreadable = Vec::new();
    for issued in ledger.latest_all(since)? {
        checked += 1;
        let snap = ledger.snapshot(issued.id)?;
        let report = match recompute(&issued.report, &snap, &against, issued.revision, &run) {
            Ok((_, _, r)) => r,
            Err(e) => {
                unreadable.push(format!("{}: {e}", issued.report));
                continue;
            }
        };
        let diff = changes(&ledger.results(issued.id)?, &stored(&report));
        let material: Vec<_> = diff.iter().filter(|c| c.material()).collect();
        let blocked = report.is_blocked();
        if !material.is_empty() || blocked {
            let count = |f: &dyn Fn(&limen::ledger::recompute::Change) -> bool| {
                material.iter().filter(|c| f(c)).count()
            };
            let states =
                count(&|c| c.old.as_ref().map(|o| &o.state) != c.new.as_ref().map(|n| &n.state));
            let verdicts = count(&|c| {
                c.old.as_ref().map(|o| &o.verdict) != c.new.as_ref().map(|n| &n.verdict)
            });
            let values = count(&|c| {
                c.old.as_ref().map(|o| &o.reported) != c.new.as_ref().map(|n| &n.reported)
            });
            affected.push((
                issued,
                material.len(),
                states,
                verdicts,
                values,
                blocked,
                material.iter().map(|c| c.describe()).collect::<Vec<_>>(),
            ));
        }
    }
    match a.format {
        Format::Csv => {
            let mut w = csv::WriterBuilder::new()
                .terminator(csv::Terminator::Any(b'\n'))
                .from_writer(std::io::stdout());
            let _ = w.write_record([
                "report",
                "revision",
                "issued_at",
                "changed_results",
                "state_changes",
                "verdict_changes",
                "value_changes",
                "now_blocked",
            ]);
            for (i, n, s, v, r, b, _) in &affected {
                let _ = w.write_record([
                    i.report.clone(),
                    i.revision.to_string(),
                    i.issued_at.clone(),
                    n.to_string(),
                    s.to_string(),
                    v.to_string(),
                    r.to_string(),
                    b.to_string(),
                ]);
            }
            let _ = w.flush();
        }
        Format::Table => {
            println!(
                "checked {checked} issued report(s) against {} and {}",
                ws.register.file, ws.specs.file
            );
            if affected.is_empty() {
                println!("no issued report would change");
            }
            for (i, n, s, v, r, b, lines) in &affected {
                println!(
                    "{} revision {} (issued {}): {n} result(s) would change: {s} state, {v} verdict, {r} reported value{}",
                    i.report,
                    i.revision,
                    &i.issued_at[..10.min(i.issued_at.len())],
                    if *b {
                        "; and it would now be blocked"
                    } else {
                        ""
                    }
                );
                for l in lines {
                    println!("    {l}");
                }
            }
            if !affected.is_empty() {
                println!(
                    "next: `limen reissue REPORT --reason \"...\" --out DIR` for each report listed"
                );
            }
        }
    }
    for u in &unreadable {
        eprintln!("warning: could not recompute {u}");
    }
    Ok(if affected.is_empty() && unreadable.is_empty() {
        EXIT_OK
    } else {
        EXIT_BLOCKED
    })
}
