//! specs.csv: regulatory or client limits, by spec id and analyte, each in
//! force from its effective date. A blank matrix applies to every matrix.

use super::csvtable::{Col, opt, read_rows, req};
use super::error::{Loc, ReadError};
use crate::units::Unit;
use chrono::NaiveDate;
use rust_decimal::Decimal;
use std::collections::HashMap;
use std::rc::Rc;

pub const COLUMNS: &[Col] = &[
    req("spec"),
    req("analyte"),
    opt("matrix"),
    req("limit"),
    req("unit"),
    opt("citation"),
    req("effective_from"),
];

#[derive(Debug, Clone, PartialEq)]
pub struct SpecRow {
    pub file: String,
    pub line: u64,
    pub spec: Rc<str>,
    pub analyte: String,
    pub matrix: String,
    pub limit: Decimal,
    pub unit: Unit,
    pub citation: Rc<str>,
    pub effective_from: NaiveDate,
}

#[derive(Debug, Clone, PartialEq)]
pub enum SpecLookup<'a> {
    Row(&'a SpecRow),
    UnknownSpec,
    /// The spec exists but sets no limit for this analyte and matrix.
    NoLimitFor,
    NotYet(NaiveDate),
}

#[derive(Debug, Clone, Default)]
pub struct Specs {
    pub file: String,
    pub rows: Vec<SpecRow>,
    /// Row indices per (spec, analyte), all matrices.
    index: HashMap<String, Vec<usize>, crate::fasthash::Build>,
}

fn same(a: &str, b: &str) -> bool {
    let (a, b) = (a.trim(), b.trim());
    a.eq_ignore_ascii_case(b) || a.to_lowercase() == b.to_lowercase()
}

fn key_into(buf: &mut String, spec: &str, analyte: &str) {
    buf.clear();
    crate::fasthash::push_lower(buf, spec.trim());
    buf.push('\u{1f}');
    crate::fasthash::push_lower(buf, analyte.trim());
}

impl Specs {
    pub fn parse(file: &str, bytes: &[u8]) -> Result<Specs, ReadError> {
        let mut rows: Vec<SpecRow> = Vec::new();
        read_rows(file, bytes, COLUMNS, |r| {
            let limit = r.decimal(3)?;
            if limit <= Decimal::ZERO {
                return Err(ReadError::field(
                    r.loc(3),
                    format!("limit {limit} must be greater than zero"),
                    "a limit of zero cannot be tested against; state the lowest value the rule allows",
                ));
            }
            let row = SpecRow {
                file: file.to_string(),
                line: r.line,
                spec: r.required(0)?.into(),
                analyte: r.required(1)?.to_string(),
                matrix: r.text(2),
                limit,
                unit: r.unit(4)?,
                citation: r.get(5).into(),
                effective_from: r.date(6)?,
            };
            if let Some(prev) = rows.iter().find(|p| {
                same(&p.spec, &row.spec)
                    && same(&p.analyte, &row.analyte)
                    && same(&p.matrix, &row.matrix)
                    && p.effective_from == row.effective_from
            }) {
                return Err(ReadError::field(
                    Loc::new(file, row.line, "effective_from"),
                    format!(
                        "spec {} already sets {} from {} (line {})",
                        row.spec, row.analyte, row.effective_from, prev.line
                    ),
                    "a changed limit needs a new effective date; remove one of the rows",
                ));
            }
            rows.push(row);
            Ok(())
        })?;
        let mut index: HashMap<String, Vec<usize>, crate::fasthash::Build> = HashMap::default();
        for (i, r) in rows.iter().enumerate() {
            let mut k = String::new();
            key_into(&mut k, &r.spec, &r.analyte);
            index.entry(k).or_default().push(i);
        }
        Ok(Specs {
            file: file.to_string(),
            rows,
            index,
        })
    }

    /// The limit in force on `date`; a row for the exact matrix wins over a
    /// row that applies to every matrix.
    pub fn in_force(
        &self,
        spec: &str,
        analyte: &str,
        matrix: &str,
        date: NaiveDate,
    ) -> SpecLookup<'_> {
        let found = crate::fasthash::with_buffer(|buf| {
            key_into(buf, spec, analyte);
            self.index.get(buf.as_str())
        });
        let Some(list) = found else {
            return if self.rows.iter().any(|r| same(&r.spec, spec)) {
                SpecLookup::NoLimitFor
            } else {
                SpecLookup::UnknownSpec
            };
        };
        let rows = list.iter().map(|&i| &self.rows[i]);
        let exact = rows.clone().any(|r| same(&r.matrix, matrix));
        let candidates = rows.filter(|r| {
            if exact {
                same(&r.matrix, matrix)
            } else {
                r.matrix.is_empty()
            }
        });
        if candidates.clone().next().is_none() {
            return SpecLookup::NoLimitFor;
        }
        match candidates
            .clone()
            .filter(|r| r.effective_from <= date)
            .max_by_key(|r| r.effective_from)
        {
            Some(r) => SpecLookup::Row(r),
            None => SpecLookup::NotYet(candidates.map(|r| r.effective_from).min().unwrap_or(date)),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn date(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    #[test]
    fn exact_matrix_wins_and_dates_apply() {
        let s = Specs::parse(
            "specs.csv",
            b"spec,analyte,matrix,limit,unit,citation,effective_from\n\
              P,Pb,,0.009,%,general,2009-01-01\n\
              P,Pb,paint,80,mg/kg,stricter,2026-01-01\n",
        )
        .unwrap();
        match s.in_force("P", "pb", "PAINT", date("2026-06-01")) {
            SpecLookup::Row(r) => assert_eq!(&*r.citation, "stricter"),
            o => panic!("{o:?}"),
        }
        assert!(matches!(
            s.in_force("P", "Pb", "paint", date("2025-06-01")),
            SpecLookup::NotYet(_)
        ));
        match s.in_force("P", "Pb", "alloy", date("2025-06-01")) {
            SpecLookup::Row(r) => assert_eq!(&*r.citation, "general"),
            o => panic!("{o:?}"),
        }
        assert_eq!(
            s.in_force("Q", "Pb", "paint", date("2026-06-01")),
            SpecLookup::UnknownSpec
        );
        assert_eq!(
            s.in_force("P", "Cd", "paint", date("2026-06-01")),
            SpecLookup::NoLimitFor
        );
    }
}
