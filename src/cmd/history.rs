use limen::Error;
use limen::error::EXIT_OK;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct Args {
    report: String,
    #[arg(long, value_name = "DIR")]
    workspace: Option<PathBuf>,
}

pub fn run(a: Args) -> Result<i32, Error> {
    let (_, ledger) = super::ledger_workspace(a.workspace.as_deref())?;
    let revisions = ledger.history(&a.report)?;
    if revisions.is_empty() {
        return Err(limen::ledger::LedgerError::Unknown { report: a.report }.into());
    }
    let mut text = format!("{}\n", a.report);
    for r in &revisions {
        text.push_str(&format!(
            "  revision {}  issued {} ({})  by {}{}  limen {}  {} result(s) changed{}\n",
            r.revision,
            r.issued_at,
            r.local_offset,
            r.signatory,
            if r.reviewed_by.is_empty() {
                String::new()
            } else {
                format!("  reviewed by {} at {}", r.reviewed_by, r.reviewed_at)
            },
            r.tool_version,
            r.changed_count,
            if r.reason.is_empty() {
                String::new()
            } else {
                format!("  reason: {}", r.reason)
            }
        ));
    }
    super::say(&text)?;
    Ok(EXIT_OK)
}
