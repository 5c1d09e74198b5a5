//! Appending a study's limits to the register: one new row per group,
//! rounded up, every old row kept byte for byte, written atomically.

use super::mdl::MdlResult;
use crate::numeric::decimal_of;
use crate::numeric::{plain, round_sig_up};
use crate::read::csvtable::read_file;
use crate::read::register::COLUMNS;
use crate::read::{InForce, Loc, ReadError, Register};
use chrono::NaiveDate;
use rust_decimal::Decimal;
use std::io::Write;
use std::path::Path;

#[derive(Debug, thiserror::Error)]
pub enum UpdateError {
    #[error(transparent)]
    Read(#[from] ReadError),
    #[error("{path}: cannot write: {source}")]
    Io {
        path: String,
        #[source]
        source: std::io::Error,
    },
}

impl UpdateError {
    pub fn hint(&self) -> String {
        match self {
            UpdateError::Read(e) => e.hint(),
            UpdateError::Io { .. } => "check that the register's folder is writable".into(),
        }
    }
}

/// One new register row, as text cells keyed by register column name.
#[derive(Debug, Clone, PartialEq)]
pub struct NewRow {
    pub analyte: String,
    pub matrix: String,
    pub method: String,
    pub unit: String,
    pub mdl: Decimal,
    pub loq: Decimal,
    pub effective_from: NaiveDate,
    pub nominal_mass_g: String,
    pub nominal_volume_ml: String,
    pub upper_range: String,
    pub upper_range_unit: String,
    pub study_id: String,
    pub note: String,
    /// The spike SD (rounded up, as the limits are) and the number of spikes.
    pub sd: Decimal,
    pub n: usize,
}

impl NewRow {
    /// The row in words, as the terminal shows it.
    pub fn describe(&self) -> String {
        format!(
            "{} / {} / {}: MDL {} {}, LOQ {} {}, in force from {} ({})",
            self.analyte,
            self.matrix,
            self.method,
            self.mdl,
            self.unit,
            self.loq,
            self.unit,
            self.effective_from,
            self.study_id
        )
    }

    fn cell(&self, column: &str) -> String {
        match column {
            "analyte" => self.analyte.clone(),
            "matrix" => self.matrix.clone(),
            "method" => self.method.clone(),
            "unit" => self.unit.clone(),
            "mdl" => self.mdl.to_string(),
            "loq" => self.loq.to_string(),
            "effective_from" => self.effective_from.to_string(),
            "nominal_mass_g" => self.nominal_mass_g.clone(),
            "nominal_volume_ml" => self.nominal_volume_ml.clone(),
            "upper_range" => self.upper_range.clone(),
            "upper_range_unit" => self.upper_range_unit.clone(),
            "study_id" => self.study_id.clone(),
            "sd" => self.sd.to_string(),
            "n" => self.n.to_string(),
            _ => self.note.clone(),
        }
    }
}

/// The rows a study adds: limits rounded up to `sig` figures, never down;
/// preparation and range columns carried from the row in force before.
pub fn rows_for(
    results: &[MdlResult],
    register: &Register,
    effective: NaiveDate,
    study_id: &str,
    sig: u32,
) -> Vec<NewRow> {
    results
        .iter()
        .filter(|r| r.ok())
        .filter_map(|r| {
            let (mdl, loq) = (decimal_of(r.mdl)?, decimal_of(r.loq)?);
            let sd = decimal_of(r.sd_spike)?;
            let before = match register.in_force(&r.analyte, &r.matrix, &r.method, effective) {
                InForce::Row(row) => Some(row.clone()),
                _ => None,
            };
            let opt = |d: Option<Decimal>| d.map(plain).unwrap_or_default();
            let mut note = format!(
                "40 CFR 136 App. B Rev. 2: {} governs; LOQ {}",
                r.governs.name(),
                r.loq_rule.id()
            );
            for (id, reason) in &r.excluded {
                note.push_str(&format!("; excluded {id}: {reason}"));
            }
            Some(NewRow {
                analyte: r.analyte.clone(),
                matrix: r.matrix.clone(),
                method: r.method.clone(),
                unit: r.unit.symbol().to_string(),
                mdl: round_sig_up(mdl, sig),
                loq: round_sig_up(loq, sig),
                effective_from: effective,
                nominal_mass_g: opt(before.as_ref().and_then(|b| b.nominal_mass_g)),
                nominal_volume_ml: opt(before.as_ref().and_then(|b| b.nominal_volume_ml)),
                upper_range: opt(before.as_ref().and_then(|b| b.upper_range.map(|u| u.0))),
                upper_range_unit: before
                    .as_ref()
                    .and_then(|b| b.upper_range.map(|u| u.1.symbol().to_string()))
                    .unwrap_or_default(),
                study_id: study_id.to_string(),
                note,
                // Rounded up: a larger SD can only make β, and so a weak
                // pass, more likely.
                sd: round_sig_up(sd, sig),
                n: r.n_spike,
            })
        })
        .collect()
}

/// Appends `rows` to the register at `path`: refuses a row whose key and
/// date exist already, keeps every old byte, and replaces the file only
/// once the new one is complete on disk. Returns the columns of the rows
/// that the register's header has no place for (`sd` and `n` in a register
/// from before detection power), so the caller can say so.
pub fn append(path: &Path, rows: &[NewRow]) -> Result<Vec<&'static str>, UpdateError> {
    let file = path.display().to_string();
    let bytes = read_file(path)?;
    let register = Register::parse(&file, &bytes)?;
    for r in rows {
        if let Some(old) = register.rows.iter().find(|o| {
            o.effective_from == r.effective_from
                && crate::read::register::key(&o.analyte, &o.matrix, &o.method)
                    == crate::read::register::key(&r.analyte, &r.matrix, &r.method)
        }) {
            return Err(ReadError::field(
                Loc::new(&file, old.line, "effective_from"),
                format!(
                    "{} / {} / {} already has a row in force from {}",
                    r.analyte, r.matrix, r.method, r.effective_from
                ),
                "choose another --effective date, or correct the register by hand with a note",
            )
            .into());
        }
    }
    let body = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(&bytes);
    let header_line = body.split(|b| *b == b'\n').next().unwrap_or(b"");
    let header: Vec<String> = String::from_utf8_lossy(header_line)
        .trim_end_matches('\r')
        .split(',')
        .map(|h| h.trim().trim_matches('"').to_ascii_lowercase())
        .collect();
    for needed in ["study_id", "note"] {
        if !header.iter().any(|h| h == needed) {
            return Err(ReadError::field(
                Loc::new(&file, 1, needed),
                "the register has no such column, so the study could not be recorded",
                format!("add a `{needed}` column to the register's header"),
            )
            .into());
        }
    }
    debug_assert!(header.iter().all(|h| COLUMNS.iter().any(|c| c.name == h)));
    let dropped: Vec<&'static str> = ["sd", "n"]
        .into_iter()
        .filter(|c| !header.iter().any(|h| h == c))
        .collect();
    let crlf = bytes.windows(2).any(|w| w == b"\r\n");
    let mut w = csv::WriterBuilder::new()
        .terminator(if crlf {
            csv::Terminator::CRLF
        } else {
            csv::Terminator::Any(b'\n')
        })
        .from_writer(Vec::new());
    for r in rows {
        w.write_record(header.iter().map(|h| r.cell(h)))
            .map_err(|e| UpdateError::Io {
                path: file.clone(),
                source: std::io::Error::other(e),
            })?;
    }
    let added = w.into_inner().unwrap_or_default();
    let mut out = bytes.clone();
    if !out.is_empty() && !out.ends_with(b"\n") {
        out.extend_from_slice(if crlf { b"\r\n" } else { b"\n" });
    }
    out.extend_from_slice(&added);
    // The result must still load as a register before it replaces the old one.
    Register::parse(&file, &out)?;
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let io = |source| UpdateError::Io {
        path: tmp.display().to_string(),
        source,
    };
    let mut f = std::fs::File::create(&tmp).map_err(io)?;
    f.write_all(&out).map_err(io)?;
    f.sync_all().map_err(io)?;
    drop(f);
    std::fs::rename(&tmp, path).map_err(|source| {
        let _ = std::fs::remove_file(&tmp);
        UpdateError::Io {
            path: file.clone(),
            source,
        }
    })?;
    Ok(dropped)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn f64_to_decimal_keeps_fifteen_digits() {
        assert_eq!(decimal_of(1.0007).unwrap().to_string(), "1.0007");
        assert_eq!(decimal_of(0.1 + 0.2).unwrap().to_string(), "0.3");
        assert_eq!(decimal_of(2.5e-7).unwrap().to_string(), "0.00000025");
    }
}
