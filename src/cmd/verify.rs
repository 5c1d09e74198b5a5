use limen::Error;
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
    let sha = limen::ledger::sha256_hex(&bytes);
    match ledger.find_file(&sha)? {
        None => {
            println!(
                "{}: not in this lab's ledger: altered, or not issued here",
                a.file.display()
            );
            println!("  sha256 {sha}");
            Ok(1)
        }
        Some((issued, name)) => {
            println!(
                "{}: issued as {} revision {} on {} by {} (file {name})",
                a.file.display(),
                issued.report,
                issued.revision,
                issued.issued_at,
                issued.signatory
            );
            match ledger.latest(&issued.report)? {
                Some(latest) if latest.revision > issued.revision => println!(
                    "  REPLACED by revision {} issued {}: {}",
                    latest.revision, latest.issued_at, latest.reason
                ),
                _ => println!("  current: this is the latest revision"),
            }
            Ok(0)
        }
    }
}
