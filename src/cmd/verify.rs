use limen::Error;
use limen::error::{EXIT_NOT_ISSUED, EXIT_OK};
use limen::ledger::{Verification, verify_file};
use limen::read::{ReadError, Workspace};
use limen::sign::Check;
use std::path::{Path, PathBuf};

#[derive(clap::Args)]
pub struct Args {
    /// An issued PDF or CSV.
    file: PathBuf,
    #[arg(long, value_name = "DIR")]
    workspace: Option<PathBuf>,
}

/// Exit 0 when the file is an issued one; 1 when it is not in the ledger,
/// or its signature is broken (checked without the ledger, so a client
/// can check a certificate anywhere).
pub fn run(a: Args) -> Result<i32, Error> {
    let bytes = limen::read::csvtable::read_file(&a.file)?;
    let name = a.file.display().to_string();
    let signature = bytes
        .starts_with(b"%PDF")
        .then(|| limen::sign::check_pdf(&bytes));
    let found = match &a.workspace {
        Some(d) => Some(d.clone()),
        None => match Workspace::find(Path::new(".")) {
            Ok(root) => Some(root),
            // Outside any workspace the signature alone is checked.
            Err(ReadError::NoWorkspace { .. }) if signature.is_some() => None,
            Err(e) => return Err(e.into()),
        },
    };
    let mut text = String::new();
    let mut issued = None;
    let mut lab_certs = None;
    if let Some(root) = found {
        let (ws, ledger) = super::ledger_workspace(Some(&root))?;
        let v = verify_file(&ledger, &bytes)?;
        text.push_str(&v.describe(&name));
        text.push('\n');
        issued = Some(matches!(v, Verification::Issued { .. }));
        lab_certs = Some(limen::keys::lab_certificates(&ws.root));
    }
    let mut broken = false;
    if let Some(check) = &signature {
        if issued.is_none() {
            text.push_str(&format!(
                "{name}: no workspace here, so the lab's ledger was not consulted\n"
            ));
        }
        text.push_str(&check.describe(lab_certs.as_deref()));
        broken = matches!(check, Check::Broken { .. });
    }
    super::say(&text)?;
    let ok = !broken
        && match issued {
            Some(i) => i,
            None => matches!(signature, Some(Check::Valid { .. })),
        };
    Ok(if ok { EXIT_OK } else { EXIT_NOT_ISSUED })
}
