use limen::Error;
use limen::ledger::{Verification, verify_file};
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct Args {
    /// An issued PDF or CSV.
    file: PathBuf,
    #[arg(long, value_name = "DIR")]
    workspace: Option<PathBuf>,
}

/// Exit 0 when the file is an issued one, 1 when it is not in the ledger.
pub fn run(a: Args) -> Result<i32, Error> {
    let bytes = limen::read::csvtable::read_file(&a.file)?;
    let (_, ledger) = super::ledger_workspace(a.workspace.as_deref())?;
    let v = verify_file(&ledger, &bytes)?;
    super::say(&format!("{}\n", v.describe(&a.file.display().to_string())))?;
    Ok(match v {
        Verification::NotIssued { .. } => limen::error::EXIT_NOT_ISSUED,
        Verification::Issued { .. } => limen::error::EXIT_OK,
    })
}
