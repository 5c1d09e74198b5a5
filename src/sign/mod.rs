//! Digital signatures on issued certificates: PAdES baseline B-B (ETSI EN
//! 319 142-1) with ECDSA P-256 over SHA-256. Signing and checking work on
//! bytes only; the keys module reads the keys folder.

pub mod cert;
pub mod cms;
pub mod pdf;

pub use pdf::Fields;
use sha2::{Digest, Sha256};

#[derive(Debug, thiserror::Error)]
pub enum SignError {
    #[error("cannot build the signature: {0}")]
    Crypto(String),
    #[error("cannot place a signature in the certificate PDF: {0}")]
    Pdf(String),
}

impl SignError {
    fn der(e: der::Error) -> SignError {
        SignError::Crypto(e.to_string())
    }

    pub fn hint(&self) -> String {
        "this is a fault in limen, not in the inputs; please report it with the batch".into()
    }
}

/// A signing key with its certificate chain, the key's own first.
#[derive(Clone)]
pub struct Identity {
    pub key: p256::ecdsa::SigningKey,
    pub chain: Vec<x509_cert::Certificate>,
}

/// `pdf` with one signature by `id` appended as an incremental update. The
/// same bytes, key and fields give the same output (RFC 6979 nonces, no
/// signing-time attribute).
pub fn sign_pdf(pdf: &[u8], id: &Identity, f: &Fields<'_>) -> Result<Vec<u8>, SignError> {
    // The CMS's length is known but for the DER signature, which is at
    // most 72 bytes; the hole is sized for that.
    let room = cms::max_len(&id.chain).map_err(SignError::der)? * 2;
    let mut prepared = pdf::prepare(pdf, room, f).map_err(SignError::Pdf)?;
    let mut h = Sha256::new();
    for part in prepared.signed() {
        h.update(part);
    }
    let der = cms::sign(&id.key, &id.chain, &h.finalize().into()).map_err(SignError::der)?;
    if !prepared.fill(&der) {
        return Err(SignError::Pdf(
            "the signature is larger than its space".into(),
        ));
    }
    Ok(prepared.bytes)
}

/// What a file's embedded signature shows.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Check {
    Unsigned,
    /// There is a signature and it does not hold: the file was altered
    /// after signing, or the signature was damaged.
    Broken {
        why: String,
    },
    Valid {
        /// The signer certificate's common name.
        signer: String,
        /// SHA-256 of the signer's certificate.
        fingerprint: String,
        /// The signature dictionary's /M, as written.
        at: Option<String>,
    },
}

/// Checks the last signature in `pdf`: the byte range must be the whole
/// file but its /Contents (ISO 32000-1, 12.8.1), and the CMS must verify
/// over those bytes.
pub fn check_pdf(pdf: &[u8]) -> Check {
    let broken = |why: &str| Check::Broken { why: why.into() };
    let found = match pdf::locate(pdf) {
        Ok(None) => return Check::Unsigned,
        Ok(Some(f)) => f,
        Err(why) => return broken(&why),
    };
    let [a, b, c, d] = found.range;
    if a != 0 || b != found.hole.0 as u64 || c != found.hole.1 as u64 {
        return broken("the signed byte range is not the file around the signature");
    }
    let len = pdf.len() as u64;
    match c.checked_add(d) {
        Some(end) if end == len => {}
        Some(end) if end < len => {
            return broken(&format!(
                "{} bytes were added after the signed part",
                len - end
            ));
        }
        _ => return broken("the signed byte range runs past the end of the file"),
    }
    let mut h = Sha256::new();
    h.update(&pdf[..found.hole.0]);
    h.update(&pdf[found.hole.1..]);
    match cms::check(&found.cms, &h.finalize().into()) {
        Ok(cert) => Check::Valid {
            signer: cert::common_name(&cert),
            fingerprint: cert::fingerprint(&cert),
            at: found.at,
        },
        Err(why) => broken(&why),
    }
}

impl Check {
    /// The check in words, as `limen verify` prints it: who signed, whether
    /// the signed bytes are the whole file, and whether the certificate is
    /// one of the lab's (`lab_certs`: id and fingerprint; None when no
    /// workspace is at hand).
    pub fn describe(&self, lab_certs: Option<&[(String, String)]>) -> String {
        match self {
            Check::Unsigned => "  signature: none (this PDF carries no digital signature)\n".into(),
            Check::Broken { why } => format!(
                "  signature: BROKEN: {why}; the file was altered after it was signed, or its signature was damaged\n"
            ),
            Check::Valid {
                signer,
                fingerprint,
                at,
            } => {
                let whose = match lab_certs {
                    None => "compare the fingerprint with the one the lab publishes".to_string(),
                    Some(certs) => match certs.iter().find(|(_, f)| f == fingerprint) {
                        Some((id, _)) => {
                            format!("the certificate is this lab's (keys/{id}.cert.pem)")
                        }
                        None => {
                            "the certificate is NOT one of this lab's keys/ certificates".into()
                        }
                    },
                };
                let when = at
                    .as_deref()
                    .map(|m| format!(" at {}", pdf_date(m)))
                    .unwrap_or_default();
                format!(
                    "  signature: valid, signed by {signer}{when}; the signed bytes cover the whole file\n  certificate SHA-256 {fingerprint}: {whose}\n"
                )
            }
        }
    }
}

/// `D:20260921141320Z` as `2026-09-21T14:13:20Z`; anything else as given.
fn pdf_date(m: &str) -> String {
    let d = m.strip_prefix("D:").unwrap_or(m);
    match (
        d.get(..4),
        d.get(4..6),
        d.get(6..8),
        d.get(8..10),
        d.get(10..12),
        d.get(12..14),
    ) {
        (Some(y), Some(mo), Some(da), Some(h), Some(mi), Some(s))
            if d.len() == 15 && d.ends_with('Z') =>
        {
            format!("{y}-{mo}-{da}T{h}:{mi}:{s}Z")
        }
        _ => m.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    use super::pdf::tests::tiny;

    fn identity() -> Identity {
        let key = p256::ecdsa::SigningKey::from_bytes(&[11; 32].into()).unwrap();
        let subject = cert::Subject {
            name: "Signer",
            role: "Role",
            organisation: "Lab",
        };
        let c = cert::self_signed(&key, &subject, 1_767_225_600, 365).unwrap();
        Identity {
            key,
            chain: vec![c],
        }
    }

    const FIELDS: Fields<'static> = Fields {
        name: "Signer",
        reason: "release",
        location: "Lab",
        at: 1_767_225_600,
    };

    #[test]
    fn a_signed_file_checks_and_any_change_outside_the_padding_breaks_it() {
        let signed = sign_pdf(&tiny(), &identity(), &FIELDS).unwrap();
        let Check::Valid { signer, at, .. } = check_pdf(&signed) else {
            panic!("{:?}", check_pdf(&signed));
        };
        assert_eq!(signer, "Signer");
        assert_eq!(at.as_deref(), Some("D:20260101000000Z"));
        let found = pdf::locate(&signed).unwrap().unwrap();
        let der_end = found.hole.0 + 1 + 2 * cms_len(&found.cms);
        for i in 0..signed.len() {
            if (der_end..found.hole.1 - 1).contains(&i) {
                continue;
            }
            let mut bad = signed.clone();
            bad[i] ^= 0x01;
            assert!(
                matches!(check_pdf(&bad), Check::Broken { .. }),
                "byte {i} ({:?}) changed and the signature still holds",
                signed[i] as char
            );
        }
        assert_eq!(check_pdf(&tiny()), Check::Unsigned);
        assert!(matches!(
            check_pdf(&signed[..signed.len() - 1]),
            Check::Broken { .. }
        ));
    }

    fn cms_len(der: &[u8]) -> usize {
        // ContentInfo SEQUENCE with a two-byte long-form length (0x82).
        assert_eq!(&der[..2], &[0x30, 0x82]);
        4 + usize::from(der[2]) * 256 + usize::from(der[3])
    }

    #[test]
    fn signing_is_reproducible_and_time_goes_in_m() {
        let a = sign_pdf(&tiny(), &identity(), &FIELDS).unwrap();
        let b = sign_pdf(&tiny(), &identity(), &FIELDS).unwrap();
        assert_eq!(a, b);
        let later = Fields {
            at: FIELDS.at + 1,
            ..FIELDS
        };
        assert_ne!(sign_pdf(&tiny(), &identity(), &later).unwrap(), a);
    }

    #[test]
    fn dates_print_as_iso_8601() {
        assert_eq!(pdf_date("D:20260921141320Z"), "2026-09-21T14:13:20Z");
        assert_eq!(pdf_date("D:2026"), "D:2026");
    }
}
