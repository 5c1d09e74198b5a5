//! The detached CMS SignedData a PDF signature carries (RFC 5652), with the
//! signed attributes PAdES baseline B-B asks for: content-type,
//! message-digest and ESS signing-certificate-v2 (ETSI EN 319 142-1, 5.2;
//! RFC 5035). No signing-time attribute: PAdES puts the time in the
//! signature dictionary's /M instead, which also keeps signing
//! reproducible.

use cms::cert::{CertificateChoices, IssuerAndSerialNumber};
use cms::content_info::{CmsVersion, ContentInfo};
use cms::signed_data::{
    CertificateSet, EncapsulatedContentInfo, SignedData, SignerIdentifier, SignerInfo, SignerInfos,
};
use der::asn1::{Any, ObjectIdentifier, OctetString, SetOfVec};
use der::{Decode, Encode, Sequence};
use p256::ecdsa::signature::{Signer, Verifier};
use p256::ecdsa::{DerSignature, SigningKey};
use sha2::{Digest, Sha256};
use x509_cert::Certificate;
use x509_cert::attr::Attribute;
use x509_cert::ext::pkix::name::GeneralName;
use x509_cert::serial_number::SerialNumber;
use x509_cert::spki::AlgorithmIdentifierOwned;

const ID_DATA: ObjectIdentifier = ObjectIdentifier::new_unwrap("1.2.840.113549.1.7.1");
const ID_SIGNED_DATA: ObjectIdentifier = ObjectIdentifier::new_unwrap("1.2.840.113549.1.7.2");
const CONTENT_TYPE: ObjectIdentifier = ObjectIdentifier::new_unwrap("1.2.840.113549.1.9.3");
const MESSAGE_DIGEST: ObjectIdentifier = ObjectIdentifier::new_unwrap("1.2.840.113549.1.9.4");
const SIGNING_CERTIFICATE_V2: ObjectIdentifier =
    ObjectIdentifier::new_unwrap("1.2.840.113549.1.9.16.2.47");
const SHA256: ObjectIdentifier = ObjectIdentifier::new_unwrap("2.16.840.1.101.3.4.2.1");
const ECDSA_SHA256: ObjectIdentifier = ObjectIdentifier::new_unwrap("1.2.840.10045.4.3.2");

/// RFC 5035: IssuerSerial.
#[derive(Clone, Debug, Eq, PartialEq, Sequence)]
struct IssuerSerial {
    issuer: Vec<GeneralName>,
    serial_number: SerialNumber,
}

/// RFC 5035: ESSCertIDv2, with the hash algorithm left at its default
/// (SHA-256).
#[derive(Clone, Debug, Eq, PartialEq, Sequence)]
struct EssCertIdV2 {
    cert_hash: OctetString,
    issuer_serial: Option<IssuerSerial>,
}

/// RFC 5035: SigningCertificateV2 (no policies).
#[derive(Clone, Debug, Eq, PartialEq, Sequence)]
struct SigningCertificateV2 {
    certs: Vec<EssCertIdV2>,
}

fn alg(oid: ObjectIdentifier) -> AlgorithmIdentifierOwned {
    // RFC 5754 3 and RFC 5758 3.2: parameters absent for SHA-256 and ECDSA.
    AlgorithmIdentifierOwned {
        oid,
        parameters: None,
    }
}

fn attribute(oid: ObjectIdentifier, value: Any) -> Result<Attribute, der::Error> {
    Ok(Attribute {
        oid,
        values: SetOfVec::try_from(vec![value])?,
    })
}

fn signed_attributes(
    leaf: &Certificate,
    digest: &[u8; 32],
) -> Result<SetOfVec<Attribute>, der::Error> {
    let ess = SigningCertificateV2 {
        certs: vec![EssCertIdV2 {
            cert_hash: OctetString::new(Sha256::digest(leaf.to_der()?).to_vec())?,
            issuer_serial: Some(IssuerSerial {
                issuer: vec![GeneralName::DirectoryName(
                    leaf.tbs_certificate.issuer.clone(),
                )],
                serial_number: leaf.tbs_certificate.serial_number.clone(),
            }),
        }],
    };
    SetOfVec::try_from(vec![
        attribute(CONTENT_TYPE, Any::encode_from(&ID_DATA)?)?,
        attribute(
            MESSAGE_DIGEST,
            Any::encode_from(&OctetString::new(digest.to_vec())?)?,
        )?,
        attribute(SIGNING_CERTIFICATE_V2, Any::encode_from(&ess)?)?,
    ])
}

/// The DER of a ContentInfo holding a detached SignedData over content
/// whose SHA-256 is `digest`, signed by `key` whose certificate is
/// `chain[0]`; the rest of the chain rides along for the verifier.
pub fn sign(
    key: &SigningKey,
    chain: &[Certificate],
    digest: &[u8; 32],
) -> Result<Vec<u8>, der::Error> {
    let leaf = chain.first().ok_or(der::ErrorKind::Failed)?;
    let attrs = signed_attributes(leaf, digest)?;
    // RFC 5652 5.4: the signature covers the DER of the attributes as a
    // SET OF, not as the [0] IMPLICIT field they sit in.
    let signature: DerSignature = key.sign(&attrs.to_der()?);
    assemble(chain, attrs, signature.as_bytes())
}

/// The longest `sign` can return for this chain: the same structure with
/// a signature of the longest DER form an ECDSA P-256 signature takes (72
/// bytes: two 33-byte integers in a SEQUENCE), with no signing.
pub fn max_len(chain: &[Certificate]) -> Result<usize, der::Error> {
    let leaf = chain.first().ok_or(der::ErrorKind::Failed)?;
    let attrs = signed_attributes(leaf, &[0; 32])?;
    Ok(assemble(chain, attrs, &[0; 72])?.len())
}

fn assemble(
    chain: &[Certificate],
    attrs: SetOfVec<Attribute>,
    signature: &[u8],
) -> Result<Vec<u8>, der::Error> {
    let leaf = chain.first().ok_or(der::ErrorKind::Failed)?;
    let signer = SignerInfo {
        version: CmsVersion::V1,
        sid: SignerIdentifier::IssuerAndSerialNumber(IssuerAndSerialNumber {
            issuer: leaf.tbs_certificate.issuer.clone(),
            serial_number: leaf.tbs_certificate.serial_number.clone(),
        }),
        digest_alg: alg(SHA256),
        signed_attrs: Some(attrs),
        signature_algorithm: alg(ECDSA_SHA256),
        signature: OctetString::new(signature.to_vec())?,
        unsigned_attrs: None,
    };
    let certs = chain
        .iter()
        .cloned()
        .map(CertificateChoices::Certificate)
        .collect::<Vec<_>>();
    let data = SignedData {
        version: CmsVersion::V1,
        digest_algorithms: SetOfVec::try_from(vec![alg(SHA256)])?,
        encap_content_info: EncapsulatedContentInfo {
            econtent_type: ID_DATA,
            econtent: None,
        },
        certificates: Some(CertificateSet(SetOfVec::try_from(certs)?)),
        crls: None,
        signer_infos: SignerInfos(SetOfVec::try_from(vec![signer])?),
    };
    ContentInfo {
        content_type: ID_SIGNED_DATA,
        content: Any::encode_from(&data)?,
    }
    .to_der()
}

/// Checks a detached SignedData (trailing zero padding allowed) against the
/// SHA-256 of the signed content, returning the signer's certificate, or
/// why it does not hold.
pub fn check(bytes: &[u8], digest: &[u8; 32]) -> Result<Certificate, String> {
    let der = der_prefix(bytes).ok_or("the signature is not DER")?;
    let info = ContentInfo::from_der(der).map_err(|e| format!("the signature is not CMS: {e}"))?;
    if info.content_type != ID_SIGNED_DATA {
        return Err("the signature is not CMS SignedData".into());
    }
    let data: SignedData = info
        .content
        .decode_as()
        .map_err(|e| format!("the SignedData does not decode: {e}"))?;
    let [signer] = data.signer_infos.0.as_slice() else {
        return Err("not exactly one signer".into());
    };
    // RFC 5652 5.1 and 5.3: version 1 with an issuer-and-serial signer.
    if data.version != CmsVersion::V1 || signer.version != CmsVersion::V1 {
        return Err("the SignedData or SignerInfo version is not 1".into());
    }
    if data.encap_content_info.econtent_type != ID_DATA
        || data.encap_content_info.econtent.is_some()
    {
        return Err("the signature is not detached over id-data".into());
    }
    if !data.digest_algorithms.iter().any(|a| a.oid == SHA256) {
        return Err("the SignedData does not list SHA-256".into());
    }
    if signer.digest_alg.oid != SHA256 {
        return Err("the digest is not SHA-256".into());
    }
    if signer.signature_algorithm.oid != ECDSA_SHA256 {
        return Err("the signature is not ECDSA with SHA-256".into());
    }
    let SignerIdentifier::IssuerAndSerialNumber(sid) = &signer.sid else {
        return Err("the signer is named by key identifier, not issuer and serial".into());
    };
    let cert = data
        .certificates
        .iter()
        .flat_map(|s| s.0.iter())
        .find_map(|c| match c {
            CertificateChoices::Certificate(c)
                if c.tbs_certificate.issuer == sid.issuer
                    && c.tbs_certificate.serial_number == sid.serial_number =>
            {
                Some(c.clone())
            }
            _ => None,
        })
        .ok_or("the signer's certificate is not in the signature")?;
    let attrs = signer.signed_attrs.as_ref().ok_or("no signed attributes")?;
    let value = |oid| {
        attrs
            .iter()
            .find(|a| a.oid == oid)
            .and_then(|a| a.values.get(0))
    };
    let content_type = value(CONTENT_TYPE)
        .and_then(|v| v.decode_as::<ObjectIdentifier>().ok())
        .ok_or("no content-type attribute")?;
    if content_type != ID_DATA {
        return Err("the content type is not id-data".into());
    }
    let md = value(MESSAGE_DIGEST)
        .and_then(|v| v.decode_as::<OctetString>().ok())
        .ok_or("no message-digest attribute")?;
    if md.as_bytes() != digest {
        return Err("the signed bytes are not the bytes that were signed (digest mismatch)".into());
    }
    if let Some(ess) = value(SIGNING_CERTIFICATE_V2) {
        let ess: SigningCertificateV2 = ess
            .decode_as()
            .map_err(|_| "the signing-certificate-v2 attribute does not decode")?;
        let hash = Sha256::digest(cert.to_der().map_err(|e| e.to_string())?);
        if ess.certs.first().map(|c| c.cert_hash.as_bytes()) != Some(hash.as_slice()) {
            return Err("the signing-certificate-v2 attribute names another certificate".into());
        }
    }
    let key = super::cert::public_key(&cert).ok_or("the signer's key is not ECDSA P-256")?;
    let sig = DerSignature::from_bytes(signer.signature.as_bytes())
        .map_err(|_| "the signature value is not an ECDSA signature")?;
    let signed = attrs.to_der().map_err(|e| e.to_string())?;
    key.verify(&signed, &sig)
        .map_err(|_| "the signature does not verify with the signer's certificate")?;
    Ok(cert)
}

/// The first complete DER element of `bytes` (a signature hole is padded
/// with zeros after it).
fn der_prefix(bytes: &[u8]) -> Option<&[u8]> {
    if bytes.first() != Some(&0x30) {
        return None;
    }
    let first = *bytes.get(1)?;
    let (len, head) = if first < 0x80 {
        (usize::from(first), 2)
    } else {
        let n = usize::from(first & 0x7f);
        if n == 0 || n > 4 {
            return None;
        }
        let mut len = 0usize;
        for b in bytes.get(2..2 + n)? {
            len = (len << 8) | usize::from(*b);
        }
        (len, 2 + n)
    };
    bytes.get(..head.checked_add(len)?)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sign::cert::{Subject, self_signed};

    fn signer() -> (SigningKey, Certificate) {
        let k = SigningKey::from_bytes(&[5; 32].into()).unwrap();
        let subject = Subject {
            name: "Signer",
            role: "",
            organisation: "Lab",
        };
        let c = self_signed(&k, &subject, 1_767_225_600, 30).unwrap();
        (k, c)
    }

    #[test]
    fn a_signature_checks_and_names_its_signer() {
        let (k, c) = signer();
        let digest: [u8; 32] = Sha256::digest(b"content").into();
        let mut der = sign(&k, std::slice::from_ref(&c), &digest).unwrap();
        // RFC 5652 5.1: SignedData is a SEQUENCE inside ContentInfo.
        assert_eq!(der[0], 0x30);
        assert_eq!(check(&der, &digest).unwrap(), c);
        // Zero padding after the DER, as a PDF signature hole has.
        der.extend([0; 40]);
        assert_eq!(check(&der, &digest).unwrap(), c);
        assert!(der.len() - 40 <= max_len(std::slice::from_ref(&c)).unwrap());
        assert!(der.len() - 40 + 3 >= max_len(std::slice::from_ref(&c)).unwrap());
        // RFC 6979: the same key and message give the same signature.
        assert_eq!(
            sign(&k, std::slice::from_ref(&c), &digest).unwrap(),
            der[..der.len() - 40]
        );
    }

    #[test]
    fn another_digest_or_a_flipped_byte_fails() {
        let (k, c) = signer();
        let digest: [u8; 32] = Sha256::digest(b"content").into();
        let der = sign(&k, std::slice::from_ref(&c), &digest).unwrap();
        let other: [u8; 32] = Sha256::digest(b"contenT").into();
        assert!(check(&der, &other).unwrap_err().contains("digest mismatch"));
        // Every single-byte change is caught, by the decoder or the check.
        for i in 0..der.len() {
            let mut bad = der.clone();
            bad[i] ^= 0x01;
            assert!(
                check(&bad, &digest).is_err(),
                "byte {i} flipped still checks"
            );
        }
        assert!(check(&[], &digest).is_err());
        assert!(check(&[0x30, 0x84, 0xff, 0xff, 0xff, 0xff], &digest).is_err());
    }
}
