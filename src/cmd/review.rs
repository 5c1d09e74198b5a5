use super::run_info;
use limen::Error;
use limen::error::EXIT_OK;
use limen::ledger::Ledger;
use limen::read::Batch;
use limen::release::{Inputs, Refusal};
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct Args {
    /// The batch folder (holding batch.toml).
    batch: PathBuf,
    /// The reviewer: an id from lab.toml's [[signatory]].
    #[arg(long, value_name = "ID")]
    by: String,
    /// What the reviewer checked or wants on record.
    #[arg(long, value_name = "TEXT")]
    note: Option<String>,
    /// The workspace folder; default: searched upward from the batch for lab.toml.
    #[arg(long, value_name = "DIR")]
    workspace: Option<PathBuf>,
}

/// Records that a signatory reviewed the batch's exact inputs; a later
/// change to any of them voids the review.
pub fn run(a: Args) -> Result<i32, Error> {
    let run = run_info()?;
    let ws = super::workspace_for(&a.batch, a.workspace.as_deref())?;
    super::old_signatory_note(&ws);
    let batch = Batch::load(&a.batch)?;
    let reviewer = ws
        .lab
        .signatory_by_id(&a.by)
        .ok_or_else(|| Refusal::UnknownSignatory {
            id: a.by.trim().to_string(),
            ids: ws.lab.signatories.iter().map(|s| s.id.clone()).collect(),
        })?;
    // A review is of a batch that evaluates: input errors stop it here.
    let report = limen::report::build(&ws, &batch, 0, &run)?;
    let (mut ledger, notes) = Ledger::open(&ws.root)?;
    for n in notes {
        eprintln!("note: {n}");
    }
    let inputs = Inputs::of(&ws, &batch);
    let review = limen::release::review_record(
        &report,
        &batch,
        &inputs,
        reviewer,
        run.issued_at,
        a.note.as_deref().unwrap_or(""),
    );
    ledger.record_review(&review)?;
    if report.is_blocked() {
        eprintln!(
            "warning: {} is blocked ({} problem(s)); the review is recorded, but the batch cannot be issued until they are resolved",
            report.header.report,
            report.problems.len()
        );
    }
    super::say(&format!(
        "reviewed {} (batch {}) by {} ({}) at {}: {} input files recorded\n",
        report.header.report,
        report.header.batch,
        reviewer.id,
        reviewer.name,
        review.reviewed_at,
        inputs.0.len()
    ))?;
    Ok(EXIT_OK)
}
