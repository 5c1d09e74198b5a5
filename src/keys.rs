//! The workspace's `keys/` folder: each signatory's private key
//! (`<id>.key.pem`, PKCS#8, readable by its owner only) and certificate
//! chain (`<id>.cert.pem`, the signatory's certificate first). Keys are
//! never printed and never recorded in the ledger.

use crate::read::Signatory;
use crate::sign::Identity;
use crate::sign::cert;
use std::path::{Path, PathBuf};

pub const DIR: &str = "keys";

#[derive(Debug, thiserror::Error)]
pub enum KeyError {
    #[error("{path}: no signing key for signatory {signatory}")]
    Missing { path: String, signatory: String },
    #[error("{path}: cannot read: {source}")]
    Read {
        path: String,
        #[source]
        source: std::io::Error,
    },
    #[error("{path}: cannot write: {source}")]
    Write {
        path: String,
        #[source]
        source: std::io::Error,
    },
    #[error("{path}: not a usable private key: {why}")]
    BadKey { path: String, why: String },
    #[error("{path}: not a usable certificate: {why}")]
    BadCert { path: String, why: String },
    #[error("{key}: this key does not belong to the certificate {cert}")]
    Mismatch { key: String, cert: String },
    #[error("{path}: the certificate is valid from {from} to {until}, not on {at}")]
    OutOfDate {
        path: String,
        from: String,
        until: String,
        at: String,
    },
    #[error("{path}: already exists; a signing key is never overwritten")]
    Exists { path: String },
}

impl KeyError {
    pub fn hint(&self) -> String {
        match self {
            KeyError::Missing { signatory, .. } => format!(
                "create one with `limen keys new --signatory {signatory}`, or bring one issued by a certification authority with `limen keys import`"
            ),
            KeyError::Read { .. } | KeyError::Write { .. } => {
                "check that the keys folder exists and is readable and writable by you".into()
            }
            KeyError::BadKey { .. } => {
                "give an unencrypted ECDSA P-256 key in PEM (PKCS#8 `PRIVATE KEY` or SEC 1 `EC PRIVATE KEY`)".into()
            }
            KeyError::BadCert { .. } => {
                "give the X.509 certificate in PEM, the signatory's own certificate first".into()
            }
            KeyError::Mismatch { .. } => {
                "the key and the certificate must be a pair; import the key the certificate was issued for".into()
            }
            KeyError::OutOfDate { .. } => {
                "renew the certificate (`limen keys new` makes a new key and certificate once the old files are moved away)".into()
            }
            KeyError::Exists { .. } => {
                "move the old key and certificate out of keys/ first if they are to be replaced".into()
            }
        }
    }
}

pub fn key_path(root: &Path, id: &str) -> PathBuf {
    root.join(DIR).join(format!("{id}.key.pem"))
}

pub fn cert_path(root: &Path, id: &str) -> PathBuf {
    root.join(DIR).join(format!("{id}.cert.pem"))
}

fn read(path: &Path) -> Result<String, KeyError> {
    let bytes = std::fs::read(path).map_err(|source| KeyError::Read {
        path: path.display().to_string(),
        source,
    })?;
    String::from_utf8(bytes).map_err(|_| KeyError::BadCert {
        path: path.display().to_string(),
        why: "not text (PEM is expected)".into(),
    })
}

fn utc(epoch: i64) -> String {
    chrono::DateTime::from_timestamp(epoch, 0)
        .map(|t| t.format("%Y-%m-%dT%H:%M:%SZ").to_string())
        .unwrap_or_else(|| epoch.to_string())
}

/// A key and certificate chain from PEM text, checked as a pair and as
/// valid at `at` (seconds since 1970).
fn checked(
    key_text: &str,
    key_file: &Path,
    cert_text: &str,
    cert_file: &Path,
    at: i64,
) -> Result<Identity, KeyError> {
    let key = cert::parse_key(key_text).map_err(|why| KeyError::BadKey {
        path: key_file.display().to_string(),
        why,
    })?;
    let chain = cert::parse_certs(cert_text).map_err(|why| KeyError::BadCert {
        path: cert_file.display().to_string(),
        why,
    })?;
    if !cert::matches(&key, &chain[0]) {
        return Err(KeyError::Mismatch {
            key: key_file.display().to_string(),
            cert: cert_file.display().to_string(),
        });
    }
    let (from, until) = cert::validity(&chain[0]);
    if at < from || at > until {
        return Err(KeyError::OutOfDate {
            path: cert_file.display().to_string(),
            from: utc(from),
            until: utc(until),
            at: utc(at),
        });
    }
    Ok(Identity { key, chain })
}

/// The signing identity of signatory `id`, checked for use at `at`.
pub fn load(root: &Path, id: &str, at: i64) -> Result<Identity, KeyError> {
    let (kp, cp) = (key_path(root, id), cert_path(root, id));
    for p in [&kp, &cp] {
        if !p.is_file() {
            return Err(KeyError::Missing {
                path: p.display().to_string(),
                signatory: id.to_string(),
            });
        }
    }
    checked(&read(&kp)?, &kp, &read(&cp)?, &cp, at)
}

/// Writes `contents` to a new file; a key file gets mode 0600 on Unix
/// from the moment it exists.
fn write_new(path: &Path, contents: &str, private: bool) -> Result<(), KeyError> {
    use std::io::Write;
    let err = |source| KeyError::Write {
        path: path.display().to_string(),
        source,
    };
    let mut o = std::fs::OpenOptions::new();
    o.write(true).create_new(true);
    #[cfg(unix)]
    if private {
        use std::os::unix::fs::OpenOptionsExt;
        o.mode(0o600);
    }
    #[cfg(not(unix))]
    let _ = private;
    let mut f = o.open(path).map_err(|source| {
        if source.kind() == std::io::ErrorKind::AlreadyExists {
            KeyError::Exists {
                path: path.display().to_string(),
            }
        } else {
            err(source)
        }
    })?;
    f.write_all(contents.as_bytes()).map_err(err)?;
    f.sync_all().map_err(err)
}

fn free(root: &Path, id: &str) -> Result<(PathBuf, PathBuf), KeyError> {
    let dir = root.join(DIR);
    std::fs::create_dir_all(&dir).map_err(|source| KeyError::Write {
        path: dir.display().to_string(),
        source,
    })?;
    let (kp, cp) = (key_path(root, id), cert_path(root, id));
    for p in [&kp, &cp] {
        if p.exists() {
            return Err(KeyError::Exists {
                path: p.display().to_string(),
            });
        }
    }
    Ok((kp, cp))
}

/// A new key and self-signed certificate for `who`, valid from `from` for
/// `days` days. Returns the two paths.
pub fn create(
    root: &Path,
    who: &Signatory,
    organisation: &str,
    from: i64,
    days: u32,
) -> Result<(PathBuf, PathBuf), KeyError> {
    let (kp, cp) = free(root, &who.id)?;
    let key = cert::new_key();
    let subject = cert::Subject {
        name: &who.name,
        role: &who.role,
        organisation,
    };
    let bad = |e: crate::sign::SignError| KeyError::BadCert {
        path: cp.display().to_string(),
        why: e.to_string(),
    };
    let c = cert::self_signed(&key, &subject, from, days).map_err(bad)?;
    let key_text = cert::key_pem(&key).map_err(bad)?;
    let cert_text = cert::cert_pem(&c).map_err(bad)?;
    write_new(&kp, &key_text, true)?;
    write_new(&cp, &cert_text, false)?;
    Ok((kp, cp))
}

/// Copies a key and certificate chain issued elsewhere into keys/ for
/// signatory `id`, after checking them as a pair valid at `at`.
pub fn import(
    root: &Path,
    id: &str,
    key_file: &Path,
    cert_file: &Path,
    at: i64,
) -> Result<(PathBuf, PathBuf), KeyError> {
    let key_text = read(key_file)?;
    let cert_text = read(cert_file)?;
    let identity = checked(&key_text, key_file, &cert_text, cert_file, at)?;
    let (kp, cp) = free(root, id)?;
    // Re-encoded, so keys/ holds one form whatever the source used.
    let bad = |e: crate::sign::SignError| KeyError::BadKey {
        path: key_file.display().to_string(),
        why: e.to_string(),
    };
    let key_out = cert::key_pem(&identity.key).map_err(bad)?;
    let mut cert_out = String::new();
    for c in &identity.chain {
        cert_out.push_str(&cert::cert_pem(c).map_err(bad)?);
    }
    write_new(&kp, &key_out, true)?;
    write_new(&cp, &cert_out, false)?;
    Ok((kp, cp))
}

/// The signatory ids and certificate fingerprints (SHA-256 of the DER)
/// of every certificate in keys/: the lab's own signers.
pub fn lab_certificates(root: &Path) -> Vec<(String, String)> {
    let mut out = Vec::new();
    let Ok(dir) = std::fs::read_dir(root.join(DIR)) else {
        return out;
    };
    for e in dir.flatten() {
        let name = e.file_name().to_string_lossy().into_owned();
        let Some(id) = name.strip_suffix(".cert.pem") else {
            continue;
        };
        let Ok(text) = std::fs::read_to_string(e.path()) else {
            continue;
        };
        if let Ok(chain) = cert::parse_certs(&text) {
            out.push((id.to_string(), cert::fingerprint(&chain[0])));
        }
    }
    out.sort();
    out
}
