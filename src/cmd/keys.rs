use super::run_info;
use limen::Error;
use limen::error::EXIT_OK;
use limen::release::Refusal;
use limen::sign::cert;
use std::path::{Path, PathBuf};

#[derive(clap::Args)]
pub struct Args {
    #[command(subcommand)]
    action: Action,
}

#[derive(clap::Subcommand)]
enum Action {
    /// Create a signatory's private key and a self-signed certificate in keys/.
    New {
        /// The signatory: an id from lab.toml's [[signatory]].
        #[arg(long, value_name = "ID")]
        signatory: String,
        /// How long the certificate is valid, from now.
        #[arg(long, value_name = "DAYS", default_value_t = 1095)]
        days: u32,
        #[arg(long, value_name = "DIR")]
        workspace: Option<PathBuf>,
    },
    /// Bring in a key and certificate (PEM) issued by a certification authority.
    Import {
        #[arg(long, value_name = "ID")]
        signatory: String,
        /// The certificate in PEM, the signatory's own first, then any chain.
        #[arg(long, value_name = "FILE")]
        cert: PathBuf,
        /// The unencrypted ECDSA P-256 private key in PEM.
        #[arg(long, value_name = "FILE")]
        key: PathBuf,
        #[arg(long, value_name = "DIR")]
        workspace: Option<PathBuf>,
    },
    /// List each signatory's certificate: subject, validity and fingerprint.
    List {
        #[arg(long, value_name = "DIR")]
        workspace: Option<PathBuf>,
    },
}

fn workspace(explicit: Option<&Path>) -> Result<limen::read::Workspace, Error> {
    let root = match explicit {
        Some(d) => d.to_path_buf(),
        None => limen::read::Workspace::find(Path::new("."))?,
    };
    Ok(limen::read::Workspace::load(&root)?)
}

fn signatory<'w>(
    ws: &'w limen::read::Workspace,
    id: &str,
) -> Result<&'w limen::read::Signatory, Error> {
    ws.lab.signatory_by_id(id).ok_or_else(|| {
        Refusal::UnknownSignatory {
            id: id.trim().to_string(),
            ids: ws.lab.signatories.iter().map(|s| s.id.clone()).collect(),
        }
        .into()
    })
}

pub fn run(a: Args) -> Result<i32, Error> {
    let now = run_info()?.issued_at.timestamp();
    match a.action {
        Action::New {
            signatory: id,
            days,
            workspace: w,
        } => {
            let ws = workspace(w.as_deref())?;
            let who = signatory(&ws, &id)?;
            if days == 0 {
                return Err(Error::Usage {
                    message: "--days must be at least 1".into(),
                    hint: "give how many days the certificate is valid, e.g. --days 1095".into(),
                });
            }
            let (kp, cp) = limen::keys::create(&ws.root, who, &ws.lab.name, now, days)?;
            super::say(&format!(
                "created {} (private: keep it to {}, never send it)\ncreated {} (self-signed certificate, valid {days} days)\n",
                kp.display(),
                who.name,
                cp.display()
            ))?;
        }
        Action::Import {
            signatory: id,
            cert: c,
            key: k,
            workspace: w,
        } => {
            let ws = workspace(w.as_deref())?;
            signatory(&ws, &id)?;
            let (kp, cp) = limen::keys::import(&ws.root, &id, &k, &c, now)?;
            super::say(&format!("imported {} and {}\n", kp.display(), cp.display()))?;
        }
        Action::List { workspace: w } => {
            let ws = workspace(w.as_deref())?;
            let mut out = String::new();
            for s in &ws.lab.signatories {
                let cp = limen::keys::cert_path(&ws.root, &s.id);
                let line = match std::fs::read_to_string(&cp)
                    .ok()
                    .and_then(|t| cert::parse_certs(&t).ok())
                {
                    None => "no certificate".to_string(),
                    Some(chain) => {
                        let (from, until) = cert::validity(&chain[0]);
                        let day = |t: i64| {
                            chrono::DateTime::from_timestamp(t, 0)
                                .map(|d| d.format("%Y-%m-%d").to_string())
                                .unwrap_or_default()
                        };
                        let state = if now > until {
                            " EXPIRED"
                        } else if now < from {
                            " not yet valid"
                        } else {
                            ""
                        };
                        format!(
                            "{} valid {} to {}{state}; SHA-256 {}",
                            cert::common_name(&chain[0]),
                            day(from),
                            day(until),
                            cert::fingerprint(&chain[0])
                        )
                    }
                };
                out.push_str(&format!("{}: {line}\n", s.id));
            }
            super::say(&out)?;
        }
    }
    Ok(EXIT_OK)
}
