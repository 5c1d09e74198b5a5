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

#[cfg(test)]
mod tests {
    use super::*;

    const HEAD: &str =
        "analyte,matrix,method,kind,value,unit,prepared_on,analyzed_on,batch,spike_level,lab_id\n";

    fn parse(body: &str) -> Result<Vec<StudyRow>, ReadError> {
        parse_study("s.csv", format!("{HEAD}{body}").as_bytes())
    }

    fn err(body: &str) -> String {
        parse(body).unwrap_err().to_string()
    }

    #[test]
    fn kinds_are_read_without_regard_to_case_or_spaces() {
        let rows = parse(
            "Pb,water,200.8,Spike,0.52,ug/L,2026-01-05,2026-01-06,B1,0.5,S1\n\
             Pb,water,200.8, BLANK ,0.01,ug/L,,2026-01-06,B1,,B1\n\
             Pb,water,200.8,reagent-blank,-0.02,ug/L,,2026-01-06,,,R1\n",
        )
        .unwrap();
        let kinds: Vec<StudyKind> = rows.iter().map(|r| r.kind).collect();
        assert_eq!(
            kinds,
            [StudyKind::Spike, StudyKind::Blank, StudyKind::ReagentBlank]
        );
        assert_eq!(rows[0].value, Some(0.52));
        assert_eq!(rows[0].spike_level, Some(0.5));
        assert_eq!(rows[0].prepared_on, NaiveDate::from_ymd_opt(2026, 1, 5));
        assert_eq!(rows[0].line, 2);
        assert_eq!(rows[0].batch, "B1");
        // A negative blank is a result, not an error: Appendix B Rev. 2
        // computes MDL_b from blank results as they are (from memory).
        assert_eq!(rows[2].value, Some(-0.02));
        assert_eq!(rows[2].line, 4);
        assert_eq!(rows[1].prepared_on, None);
    }

    #[test]
    fn empty_and_nd_results_have_no_value() {
        let rows = parse(
            "Pb,water,200.8,blank,,ug/L,,2026-01-06,,,B1\n\
             Pb,water,200.8,blank,nd,ug/L,,2026-01-06,,,B2\n",
        )
        .unwrap();
        assert_eq!(rows[0].value, None);
        assert_eq!(rows[1].value, None);
        let e = err("Pb,water,200.8,blank,trace,ug/L,,2026-01-06,,,B1\n");
        assert!(e.starts_with("s.csv:2: field `value`"), "{e}");
    }

    #[test]
    fn an_unknown_kind_names_its_cell() {
        let e = parse("Pb,water,200.8,duplicate,0.5,ug/L,,2026-01-06,,,X1\n").unwrap_err();
        assert_eq!(
            e.to_string(),
            "s.csv:2: field `kind`: unknown kind `duplicate`"
        );
        assert_eq!(e.hint(), "kinds: spike, blank, reagent-blank");
    }

    #[test]
    fn a_lab_id_twice_for_one_analyte_is_refused() {
        let e = err("Pb,water,200.8,blank,0.1,ug/L,,2026-01-06,,,B1\n\
             Cd,water,200.8,blank,0.1,ug/L,,2026-01-06,,,B1\n\
             pb,water,200.8,blank,0.2,ug/L,,2026-01-07,,,B1\n");
        assert_eq!(
            e,
            "s.csv:4: field `lab_id`: B1 appears again for Pb (first on line 2)"
        );
        // One lab id carries several analytes: one digest, read for each.
        assert_eq!(
            parse(
                "Pb,water,200.8,blank,0.1,ug/L,,2026-01-06,,,B1\n\
                 Cd,water,200.8,blank,0.1,ug/L,,2026-01-06,,,B1\n"
            )
            .unwrap()
            .len(),
            2
        );
    }

    #[test]
    fn a_spike_needs_its_level_and_preparation_date() {
        let e = err("Pb,water,200.8,spike,0.5,ug/L,2026-01-05,2026-01-06,,,S1\n");
        assert_eq!(
            e,
            "s.csv:2: field `spike_level`: empty, but a spike needs its spike level"
        );
        let e = err("Pb,water,200.8,spike,0.5,ug/L,,2026-01-06,,0.5,S1\n");
        assert_eq!(
            e,
            "s.csv:2: field `prepared_on`: empty, but a spike needs its preparation date"
        );
        // Blanks need neither.
        assert!(parse("Pb,water,200.8,blank,0.1,ug/L,,2026-01-06,,,B1\n").is_ok());
    }

    #[test]
    fn a_file_with_only_a_header_is_refused() {
        let e = parse("").unwrap_err();
        assert_eq!(e.to_string(), "s.csv: no replicate results");
    }

    #[test]
    fn decimals_become_the_nearest_double() {
        use std::str::FromStr;
        let d = rust_decimal::Decimal::from_str("0.1").unwrap();
        assert_eq!(to_f64(d), 0.1);
        let d = rust_decimal::Decimal::from_str("-12.345").unwrap();
        assert_eq!(to_f64(d), -12.345);
    }

    #[test]
    fn groups_split_on_each_key_and_ignore_case() {
        let rows = parse(
            "Pb,water,200.8,blank,0.1,ug/L,,2026-01-06,,,1\n\
             PB,Water,200.8,blank,0.1,ug/L,,2026-01-06,,,2\n\
             Cd,water,200.8,blank,0.1,ug/L,,2026-01-06,,,3\n\
             Pb,soil,200.8,blank,0.1,ug/L,,2026-01-06,,,4\n\
             Pb,water,6020B,blank,0.1,ug/L,,2026-01-06,,,5\n\
             Pb,water,200.8,blank,0.1,ug/L,,2026-01-06,,,6\n",
        )
        .unwrap();
        let g = groups("s.csv", rows).unwrap();
        let keys: Vec<(String, String, String, usize)> = g
            .iter()
            .map(|g| {
                (
                    g.analyte.clone(),
                    g.matrix.clone(),
                    g.method.clone(),
                    g.rows.len(),
                )
            })
            .collect();
        let k = |a: &str, m: &str, me: &str, n: usize| {
            (a.to_string(), m.to_string(), me.to_string(), n)
        };
        assert_eq!(
            keys,
            [
                k("Pb", "water", "200.8", 3),
                k("Cd", "water", "200.8", 1),
                k("Pb", "soil", "200.8", 1),
                k("Pb", "water", "6020B", 1),
            ]
        );
    }

    #[test]
    fn a_group_in_two_units_is_refused_at_the_row() {
        let rows = parse(
            "Pb,water,200.8,blank,0.1,ug/L,,2026-01-06,,,1\n\
             Cd,water,200.8,blank,0.1,mg/L,,2026-01-06,,,2\n\
             Pb,water,200.8,blank,0.1,mg/L,,2026-01-06,,,3\n",
        )
        .unwrap();
        let e = groups("s.csv", rows).unwrap_err();
        let text = e.to_string();
        assert!(text.starts_with("s.csv:4: field `unit`: "), "{text}");
        assert!(text.contains("earlier rows are in"), "{text}");
    }
}
