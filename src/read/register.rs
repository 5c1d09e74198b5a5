//! limits.csv: the register of MDL and LOQ rows, each in force from its
//! effective date until a later row for the same analyte, matrix and method.

use super::csvtable::{Col, opt, read_rows, req};
use super::error::{Loc, ReadError};
use crate::units::Unit;
use chrono::NaiveDate;
use rust_decimal::Decimal;
use std::collections::HashMap;

pub const COLUMNS: &[Col] = &[
    req("analyte"),
    req("matrix"),
    req("method"),
    req("unit"),
    req("mdl"),
    req("loq"),
    req("effective_from"),
    opt("nominal_mass_g"),
    opt("nominal_volume_ml"),
    opt("upper_range"),
    opt("upper_range_unit"),
    opt("study_id"),
    opt("note"),
    opt("sd"),
    opt("n"),
];

const ANALYTE: usize = 0;
const MATRIX: usize = 1;
const METHOD: usize = 2;
const UNIT: usize = 3;
const MDL: usize = 4;
const LOQ: usize = 5;
const EFFECTIVE: usize = 6;
const NOMINAL_MASS: usize = 7;
const NOMINAL_VOLUME: usize = 8;
const UPPER: usize = 9;
const UPPER_UNIT: usize = 10;
const STUDY: usize = 11;
const NOTE: usize = 12;
const SD: usize = 13;
const N: usize = 14;

#[derive(Debug, Clone, PartialEq)]
pub struct LimitRow {
    pub file: String,
    pub line: u64,
    pub analyte: String,
    pub matrix: String,
    pub method: String,
    pub unit: Unit,
    pub mdl: Decimal,
    pub loq: Decimal,
    pub effective_from: NaiveDate,
    pub nominal_mass_g: Option<Decimal>,
    pub nominal_volume_ml: Option<Decimal>,
    /// Highest calibration standard, at reading level, with its unit.
    pub upper_range: Option<(Decimal, Unit)>,
    pub study_id: String,
    pub note: String,
    /// The study's spike standard deviation (in `unit`) and its number of
    /// spikes, when the register keeps them: what detection power needs.
    pub spike_sd: Option<(Decimal, u32)>,
    /// How a report names this row: its study id, else file:line.
    pub reference: std::rc::Rc<str>,
}

/// Case-insensitive key so `Pb` and `pb` in different files agree.
pub fn key_into(buf: &mut String, analyte: &str, matrix: &str, method: &str) {
    buf.clear();
    for (i, part) in [analyte, matrix, method].into_iter().enumerate() {
        if i > 0 {
            buf.push('\u{1f}');
        }
        crate::fasthash::push_lower(buf, part.trim());
    }
}

pub fn key(analyte: &str, matrix: &str, method: &str) -> String {
    let mut k = String::new();
    key_into(&mut k, analyte, matrix, method);
    k
}

#[derive(Debug, Clone, PartialEq)]
pub enum InForce<'a> {
    Row(&'a LimitRow),
    /// No row at all for this analyte, matrix and method.
    NoRow,
    /// Rows exist, but the first takes effect after the analysis date.
    NotYet(NaiveDate),
}

#[derive(Debug, Clone, Default)]
pub struct Register {
    pub file: String,
    pub rows: Vec<LimitRow>,
    /// Row indices per key, ordered by effective date.
    index: HashMap<String, Vec<usize>, crate::fasthash::Build>,
}

/// `sd` and `n` come together: a positive SD from at least 2 spikes.
fn spike_sd(r: &super::csvtable::Row<'_>) -> Result<Option<(Decimal, u32)>, ReadError> {
    let (sd_text, n_text) = (r.get(SD), r.get(N));
    if sd_text.is_empty() && n_text.is_empty() {
        return Ok(None);
    }
    if sd_text.is_empty() || n_text.is_empty() {
        let missing = if sd_text.is_empty() { SD } else { N };
        return Err(ReadError::field(
            r.loc(missing),
            "empty, but the row gives the other of sd and n",
            "give both the study's spike SD and its number of spikes, or neither",
        ));
    }
    let sd = r.opt_positive(SD)?;
    let n = n_text.trim().parse::<u32>().ok().filter(|n| *n >= 2);
    match (sd, n) {
        (Some(sd), Some(n)) => Ok(Some((sd, n))),
        (_, None) => Err(ReadError::field(
            r.loc(N),
            format!("`{n_text}` is not a whole number of spikes, 2 or more"),
            "give the number of spike results the SD came from (7 or more for Appendix B)",
        )),
        (None, _) => Err(ReadError::field(
            r.loc(SD),
            "must be a positive number",
            "give the standard deviation of the study's spike results",
        )),
    }
}

impl Register {
    pub fn parse(file: &str, bytes: &[u8]) -> Result<Register, ReadError> {
        let mut rows: Vec<LimitRow> = Vec::new();
        read_rows(file, bytes, COLUMNS, |r| {
            let unit = r.unit(UNIT)?;
            let mdl = r.decimal(MDL)?;
            if mdl <= Decimal::ZERO {
                return Err(ReadError::field(
                    r.loc(MDL),
                    format!("MDL {mdl} must be greater than zero"),
                    "an MDL comes from a study and is always positive",
                ));
            }
            let loq = r.decimal(LOQ)?;
            if loq < mdl {
                return Err(ReadError::field(
                    r.loc(LOQ),
                    format!("LOQ {loq} is below the MDL {mdl}"),
                    "the LOQ is at or above the MDL; check the two columns are not swapped",
                ));
            }
            let upper_range = match r.opt_positive(UPPER)? {
                None => None,
                Some(v) => {
                    let u = if r.get(UPPER_UNIT).is_empty() {
                        if unit.dimension() != crate::units::Dimension::MassConcentration {
                            return Err(ReadError::field(
                                r.loc(UPPER_UNIT),
                                "empty, and the row's unit is not a reading unit",
                                "give the upper range's unit as read on the instrument, e.g. µg/L",
                            ));
                        }
                        unit
                    } else {
                        r.unit(UPPER_UNIT)?
                    };
                    Some((v, u))
                }
            };
            let spike_sd = spike_sd(r)?;
            rows.push(LimitRow {
                file: file.to_string(),
                line: r.line,
                analyte: r.required(ANALYTE)?.to_string(),
                matrix: r.required(MATRIX)?.to_string(),
                method: r.required(METHOD)?.to_string(),
                unit,
                mdl,
                loq,
                effective_from: r.date(EFFECTIVE)?,
                nominal_mass_g: r.opt_positive(NOMINAL_MASS)?,
                nominal_volume_ml: r.opt_positive(NOMINAL_VOLUME)?,
                upper_range,
                study_id: r.text(STUDY),
                note: r.text(NOTE),
                spike_sd,
                reference: if r.get(STUDY).is_empty() {
                    format!("{file}:{}", r.line).into()
                } else {
                    r.get(STUDY).into()
                },
            });
            Ok(())
        })?;
        Register::from_rows(file, rows)
    }

    pub fn from_rows(file: &str, rows: Vec<LimitRow>) -> Result<Register, ReadError> {
        let mut index: HashMap<String, Vec<usize>, crate::fasthash::Build> = HashMap::default();
        for (i, row) in rows.iter().enumerate() {
            index
                .entry(key(&row.analyte, &row.matrix, &row.method))
                .or_default()
                .push(i);
        }
        for list in index.values_mut() {
            list.sort_by_key(|&i| (rows[i].effective_from, rows[i].line));
            for pair in list.windows(2) {
                let (a, b) = (&rows[pair[0]], &rows[pair[1]]);
                if a.effective_from == b.effective_from {
                    return Err(ReadError::field(
                        Loc::new(&b.file, b.line, "effective_from"),
                        format!(
                            "{} / {} / {} already has a row in force from {} (line {})",
                            b.analyte, b.matrix, b.method, b.effective_from, a.line
                        ),
                        "a limit change needs a new effective date; correct or remove one of the rows",
                    ));
                }
            }
        }
        Ok(Register {
            file: file.to_string(),
            rows,
            index,
        })
    }

    /// The row in force on `date` for this analyte, matrix and method.
    pub fn in_force(
        &self,
        analyte: &str,
        matrix: &str,
        method: &str,
        date: NaiveDate,
    ) -> InForce<'_> {
        let found = crate::fasthash::with_buffer(|buf| {
            key_into(buf, analyte, matrix, method);
            self.index.get(buf.as_str())
        });
        let Some(list) = found else {
            return InForce::NoRow;
        };
        match list
            .iter()
            .rev()
            .map(|&i| &self.rows[i])
            .find(|r| r.effective_from <= date)
        {
            Some(row) => InForce::Row(row),
            None => InForce::NotYet(self.rows[list[0]].effective_from),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEAD: &str = "analyte,matrix,method,unit,mdl,loq,effective_from,study_id\n";

    fn reg(body: &str) -> Result<Register, ReadError> {
        Register::parse("limits.csv", format!("{HEAD}{body}").as_bytes())
    }

    fn date(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    #[test]
    fn row_in_force_follows_the_effective_date() {
        let r = reg(
            "Pb,paint,6010D,ug/L,8,25,2025-03-01,S1\nPb,paint,6010D,ug/L,12,36,2026-11-16,S2\n",
        )
        .unwrap();
        let study = |d: &str| match r.in_force("pb", "Paint", "6010d", date(d)) {
            InForce::Row(row) => row.study_id.clone(),
            other => panic!("{other:?}"),
        };
        assert_eq!(study("2026-11-15"), "S1");
        assert_eq!(study("2026-11-16"), "S2");
        assert_eq!(study("2027-01-01"), "S2");
        assert_eq!(
            r.in_force("Pb", "paint", "6010D", date("2025-02-28")),
            InForce::NotYet(date("2025-03-01"))
        );
        assert_eq!(
            r.in_force("Cd", "paint", "6010D", date("2026-01-01")),
            InForce::NoRow
        );
    }

    #[test]
    fn load_errors_name_file_line_and_field() {
        let e =
            reg("Pb,paint,6010D,ug/L,8,25,2025-03-01,S1\nPb,paint,6010D,ug/L,9,25,2025-03-01,S2\n")
                .unwrap_err();
        assert!(
            e.to_string()
                .starts_with("limits.csv:3: field `effective_from`"),
            "{e}"
        );
        let e = reg("Pb,paint,6010D,ug/L,8,5,2025-03-01,S1\n").unwrap_err();
        assert!(
            e.to_string().starts_with("limits.csv:2: field `loq`"),
            "{e}"
        );
        let e = reg("Pb,paint,6010D,ug/L,0,5,2025-03-01,S1\n").unwrap_err();
        assert!(
            e.to_string().starts_with("limits.csv:2: field `mdl`"),
            "{e}"
        );
        let e = reg("Pb,paint,6010D,ug/m3,8,25,2025-03-01,S1\n").unwrap_err();
        assert!(
            e.to_string()
                .starts_with("limits.csv:2: field `unit`: unknown unit"),
            "{e}"
        );
    }
}
