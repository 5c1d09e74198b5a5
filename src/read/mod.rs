//! Phase 1: read the workspace (lab, register, specs) and a batch, checking
//! every cell; nothing downstream sees unchecked text.

pub mod batch;
pub mod csvtable;
pub mod error;
pub mod lab;
pub mod qc_config;
pub mod register;
pub mod repeats;
pub mod specs;
mod toml_util;
pub mod vocab;

pub use batch::{Batch, Manifest, ResultRow};
pub use error::{Loc, ReadError};
pub use lab::{
    Compare, DetectionPower, Lab, NotDetectedStyle, PageSize, ReviewPolicy, ScopeEntry, Signatory,
    WeakPass,
};
pub use register::{InForce, LimitRow, Register};
pub use specs::{SpecLookup, SpecRow, Specs};
pub use vocab::{DecisionRule, Kind};

use std::path::{Path, PathBuf};

/// The lab's standing files.
#[derive(Debug, Clone)]
pub struct Workspace {
    pub root: PathBuf,
    pub lab_text: String,
    /// qc.toml, when the workspace has one.
    pub qc_text: Option<String>,
    pub lab: Lab,
    pub register: Register,
    pub specs: Specs,
    /// The SHA-256 of limits.csv and specs.csv as read, for a review to
    /// name the exact inputs it saw.
    pub register_sha256: String,
    pub specs_sha256: String,
}

/// Lower-case hex SHA-256.
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::Digest;
    sha2::Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

impl Workspace {
    pub fn load(root: &Path) -> Result<Workspace, ReadError> {
        let lab_path = root.join("lab.toml");
        let lab_file = lab_path.display().to_string();
        let lab_text = String::from_utf8(csvtable::read_file(&lab_path)?).map_err(|_| {
            ReadError::field(
                Loc::file(&lab_file),
                "not valid UTF-8 text",
                "save the file as UTF-8",
            )
        })?;
        let qc_path = root.join("qc.toml");
        let qc_text = if qc_path.is_file() {
            Some(
                String::from_utf8(csvtable::read_file(&qc_path)?).map_err(|_| {
                    ReadError::field(
                        Loc::file(&qc_path.display().to_string()),
                        "not valid UTF-8 text",
                        "save the file as UTF-8",
                    )
                })?,
            )
        } else {
            None
        };
        let qc_file = qc_path.display().to_string();
        let lab = lab_from(
            &lab_file,
            &lab_text,
            qc_text.as_deref().map(|t| (qc_file.as_str(), t)),
        )?;
        let limits = root.join("limits.csv");
        let limits_bytes = csvtable::read_file(&limits)?;
        let register = Register::parse(&limits.display().to_string(), &limits_bytes)?;
        let specs_path = root.join("specs.csv");
        let specs_bytes = csvtable::read_file(&specs_path)?;
        let specs = Specs::parse(&specs_path.display().to_string(), &specs_bytes)?;
        Ok(Workspace {
            register_sha256: sha256_hex(&limits_bytes),
            specs_sha256: sha256_hex(&specs_bytes),
            root: root.to_path_buf(),
            lab_text,
            qc_text,
            lab,
            register,
            specs,
        })
    }

    /// Searches upward from `start` for the folder holding lab.toml.
    pub fn find(start: &Path) -> Result<PathBuf, ReadError> {
        let abs = std::path::absolute(start).unwrap_or_else(|_| start.to_path_buf());
        let mut here: Option<&Path> = Some(abs.as_path());
        while let Some(dir) = here {
            if dir.join("lab.toml").is_file() {
                // Keep paths as the user gave them where that still works.
                return Ok(relative_to_start(start, &abs, dir));
            }
            here = dir.parent();
        }
        Err(ReadError::NoWorkspace {
            start: start.display().to_string(),
        })
    }
}

/// lab.toml, with its QC windows from qc.toml when one is given.
pub fn lab_from(
    lab_file: &str,
    lab_text: &str,
    qc: Option<(&str, &str)>,
) -> Result<Lab, ReadError> {
    let mut lab = Lab::parse(lab_file, lab_text)?;
    if let Some((qc_file, text)) = qc {
        if lab.qc_in_lab_file {
            return Err(ReadError::field(
                Loc::file(qc_file),
                "QC windows are set both here and in lab.toml's [qc]",
                "keep the QC windows in one place: qc.toml or lab.toml's [qc], not both",
            ));
        }
        let parsed: qc_config::QcFile = toml_util::parse(qc_file, text)?;
        lab.qc = parsed.resolve().map_err(|message| ReadError::Toml {
            file: qc_file.to_string(),
            line: 1,
            message,
        })?;
    }
    Ok(lab)
}

fn relative_to_start(start: &Path, abs_start: &Path, found: &Path) -> PathBuf {
    let mut rel = start.to_path_buf();
    let mut cur = abs_start;
    while cur != found {
        match cur.parent() {
            Some(p) => {
                cur = p;
                rel.push("..");
            }
            None => return found.to_path_buf(),
        }
    }
    if rel.as_os_str().is_empty() {
        PathBuf::from(".")
    } else {
        normalize(&rel)
    }
}

/// Folds `a/b/..` so error messages show short paths.
fn normalize(p: &Path) -> PathBuf {
    let mut out: Vec<std::path::Component> = Vec::new();
    for c in p.components() {
        match c {
            std::path::Component::ParentDir
                if matches!(out.last(), Some(std::path::Component::Normal(_))) =>
            {
                out.pop();
            }
            std::path::Component::CurDir if !out.is_empty() => {}
            c => out.push(c),
        }
    }
    if out.is_empty() {
        return PathBuf::from(".");
    }
    out.iter().collect()
}
