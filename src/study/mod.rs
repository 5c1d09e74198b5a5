//! Limit studies: MDL by 40 CFR Part 136 Appendix B (Revision 2), IDL, LOQ,
//! calibration-based and signal-to-noise limits, ongoing verification, and
//! the register update they lead to.

pub mod baseline;
pub mod calibration;
pub mod mdl;
pub mod register_update;
pub mod stats;
pub mod verify;

use crate::read::csvtable::{Col, opt, read_rows, req};
use crate::read::{Loc, ReadError};
use crate::units::Unit;
use chrono::NaiveDate;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StudyKind {
    /// Spiked sample or spiked blank carried through the whole method.
    Spike,
    /// Method blank carried through the whole method.
    Blank,
    /// Solvent or acid blank read directly on the instrument.
    ReagentBlank,
}

impl StudyKind {
    fn parse(t: &str) -> Option<StudyKind> {
        match t.trim().to_ascii_lowercase().as_str() {
            "spike" => Some(StudyKind::Spike),
            "blank" => Some(StudyKind::Blank),
            "reagent-blank" => Some(StudyKind::ReagentBlank),
            _ => None,
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct StudyRow {
    pub line: u64,
    pub analyte: String,
    pub matrix: String,
    pub method: String,
    pub kind: StudyKind,
    /// None for an empty or ND result.
    pub value: Option<f64>,
    pub unit: Unit,
    pub prepared_on: Option<NaiveDate>,
    pub analyzed_on: NaiveDate,
    pub batch: String,
    pub spike_level: Option<f64>,
    pub lab_id: String,
}

pub const COLUMNS: &[Col] = &[
    req("analyte"),
    req("matrix"),
    req("method"),
    req("kind"),
    req("value"),
    req("unit"),
    opt("prepared_on"),
    req("analyzed_on"),
    opt("batch"),
    opt("spike_level"),
    req("lab_id"),
];

fn to_f64(d: rust_decimal::Decimal) -> f64 {
    d.to_string().parse().unwrap_or(f64::NAN)
}

pub fn parse_study(file: &str, bytes: &[u8]) -> Result<Vec<StudyRow>, ReadError> {
    let mut rows: Vec<StudyRow> = Vec::new();
    read_rows(file, bytes, COLUMNS, |r| {
        let kind_text = r.required(3)?;
        let kind = StudyKind::parse(kind_text).ok_or_else(|| {
            ReadError::field(
                r.loc(3),
                format!("unknown kind `{kind_text}`"),
                "kinds: spike, blank, reagent-blank",
            )
        })?;
        let raw = r.get(4);
        let value = if raw.is_empty() || raw.eq_ignore_ascii_case("nd") {
            None
        } else {
            Some(to_f64(crate::numeric::parse_decimal(raw).map_err(|p| {
                ReadError::field(
                    r.loc(4),
                    p,
                    "give the numeric result (negative values are valid), or leave it empty or ND when the instrument gave none",
                )
            })?))
        };
        let lab_id = r.required(10)?.to_string();
        if let Some(prev) = rows
            .iter()
            .find(|p| p.lab_id == lab_id && p.analyte.eq_ignore_ascii_case(r.get(0)))
        {
            return Err(ReadError::field(
                r.loc(10),
                format!(
                    "{lab_id} appears again for {} (first on line {})",
                    prev.analyte, prev.line
                ),
                "each replicate has its own lab id",
            ));
        }
        let spike_level = r.opt_positive(9)?.map(to_f64);
        let prepared_on = if r.get(6).is_empty() {
            None
        } else {
            Some(r.date(6)?)
        };
        if kind == StudyKind::Spike {
            if spike_level.is_none() {
                return Err(ReadError::field(
                    r.loc(9),
                    "empty, but a spike needs its spike level",
                    "give the concentration added, in the study's unit",
                ));
            }
            if prepared_on.is_none() {
                return Err(ReadError::field(
                    r.loc(6),
                    "empty, but a spike needs its preparation date",
                    "Appendix B asks for spikes prepared on separate dates; give each one's date",
                ));
            }
        }
        rows.push(StudyRow {
            line: r.line,
            analyte: r.required(0)?.to_string(),
            matrix: r.required(1)?.to_string(),
            method: r.required(2)?.to_string(),
            kind,
            value,
            unit: r.unit(5)?,
            prepared_on,
            analyzed_on: r.date(7)?,
            batch: r.text(8),
            spike_level,
            lab_id,
        });
        Ok::<(), ReadError>(())
    })?;
    if rows.is_empty() {
        return Err(ReadError::field(
            Loc::file(file),
            "no replicate results",
            "add the study's spike and blank results, one per row",
        ));
    }
    Ok(rows)
}

/// One analyte + matrix + method of a study file.
#[derive(Debug, Clone)]
pub struct Group {
    pub analyte: String,
    pub matrix: String,
    pub method: String,
    pub unit: Unit,
    pub rows: Vec<StudyRow>,
}

/// Splits rows by analyte, matrix and method, in first-seen order; a
/// group's rows must share one unit.
pub fn groups(file: &str, rows: Vec<StudyRow>) -> Result<Vec<Group>, ReadError> {
    let mut out: Vec<Group> = Vec::new();
    for row in rows {
        let found = out.iter_mut().find(|g| {
            g.analyte.eq_ignore_ascii_case(&row.analyte)
                && g.matrix.eq_ignore_ascii_case(&row.matrix)
                && g.method.eq_ignore_ascii_case(&row.method)
        });
        match found {
            Some(g) => {
                if g.unit != row.unit {
                    return Err(ReadError::field(
                        Loc::new(file, row.line, "unit"),
                        format!(
                            "{} where the group's earlier rows are in {}",
                            row.unit, g.unit
                        ),
                        "give every replicate of one analyte, matrix and method in the same unit",
                    ));
                }
                g.rows.push(row);
            }
            None => out.push(Group {
                analyte: row.analyte.clone(),
                matrix: row.matrix.clone(),
                method: row.method.clone(),
                unit: row.unit,
                rows: vec![row],
            }),
        }
    }
    Ok(out)
}
