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

    use crate::study::mdl::{Governs, LoqRule};
    use crate::units::Unit;

    const HEAD: &str = "analyte,matrix,method,unit,mdl,loq,effective_from,nominal_mass_g,nominal_volume_ml,upper_range,upper_range_unit,study_id,note,sd,n";

    fn day(m: u32, d: u32) -> NaiveDate {
        NaiveDate::from_ymd_opt(2026, m, d).unwrap()
    }

    fn result(analyte: &str, mdl: f64, loq: f64, sd: f64) -> MdlResult {
        MdlResult {
            analyte: analyte.into(),
            matrix: "water".into(),
            method: "200.8".into(),
            unit: Unit::UgPerL,
            spikes: vec![],
            spike_levels: vec![],
            n_spike: 8,
            mean_spike: 0.0,
            sd_spike: sd,
            t_value: 2.998,
            mdl_s: mdl,
            blanks: vec![],
            n_blank: 0,
            n_blank_numeric: 0,
            mean_blank: None,
            sd_blank: None,
            mdl_b: None,
            mdl_b_rule: String::new(),
            mdl,
            governs: Governs::Spikes,
            loq,
            loq_rule: LoqRule::TenSd,
            n_reagent: 0,
            idl: None,
            idl_factor: 3.0,
            warnings: vec![],
            errors: vec![],
            excluded: vec![],
        }
    }

    fn register(body: &str) -> Register {
        Register::parse("limits.csv", format!("{HEAD}\n{body}").as_bytes()).unwrap()
    }

    struct Dir(std::path::PathBuf);
    impl Dir {
        fn new(name: &str) -> Dir {
            let d = std::env::temp_dir().join(format!("limen-regup-{name}-{}", std::process::id()));
            let _ = std::fs::remove_dir_all(&d);
            std::fs::create_dir_all(&d).unwrap();
            Dir(d)
        }
    }
    impl Drop for Dir {
        fn drop(&mut self) {
            let _ = std::fs::remove_dir_all(&self.0);
        }
    }

    #[test]
    fn new_rows_round_up_and_carry_the_old_rows_preparation() {
        let reg = register(
            "Pb,water,200.8,µg/L,0.05,0.2,2025-01-01,,50,100,µg/L,S-2025,old,,\n\
             Pb,water,200.8,µg/L,0.04,0.2,2027-01-01,,25,,,S-2027,future,,\n",
        );
        let mut failed = result("Cd", 0.1, 0.5, 0.03);
        failed.errors.push("too few spikes".into());
        let mut pb = result("Pb", 0.04112, 0.1372, 0.01372);
        pb.excluded = vec![("S3".into(), "spilled".into())];
        pb.governs = Governs::Blanks;
        let rows = rows_for(&[failed, pb], &reg, day(6, 1), "S-2026", 2);
        assert_eq!(rows.len(), 1, "a study with design errors adds nothing");
        let r = &rows[0];
        // Rounded towards +infinity: a limit is never understated.
        assert_eq!(r.mdl.to_string(), "0.042");
        assert_eq!(r.loq.to_string(), "0.14");
        assert_eq!(r.sd.to_string(), "0.014");
        assert_eq!(r.n, 8);
        assert_eq!(r.unit, "µg/L");
        assert_eq!(r.effective_from, day(6, 1));
        // From the row in force on the new date, not the later one.
        assert_eq!(r.nominal_mass_g, "");
        assert_eq!(r.nominal_volume_ml, "50");
        assert_eq!(r.upper_range, "100");
        assert_eq!(r.upper_range_unit, "µg/L");
        assert_eq!(r.study_id, "S-2026");
        assert_eq!(
            r.note,
            "40 CFR 136 App. B Rev. 2: MDL_b governs; LOQ ten-sd; excluded S3: spilled"
        );
        assert_eq!(
            r.describe(),
            "Pb / water / 200.8: MDL 0.042 µg/L, LOQ 0.14 µg/L, in force from 2026-06-01 (S-2026)"
        );
    }

    #[test]
    fn a_new_analyte_has_empty_preparation_columns() {
        let reg = register("Pb,water,200.8,µg/L,0.05,0.2,2025-01-01,,50,100,µg/L,S-2025,old,,\n");
        let rows = rows_for(&[result("Cd", 0.02, 0.08, 0.007)], &reg, day(6, 1), "S", 3);
        assert_eq!(rows[0].nominal_volume_ml, "");
        assert_eq!(rows[0].upper_range, "");
        assert_eq!(rows[0].upper_range_unit, "");
        assert_eq!(rows[0].mdl.to_string(), "0.0200");
        // A limit that is not a finite number gives no row.
        let rows = rows_for(
            &[result("Cd", f64::NAN, 0.08, 0.007)],
            &reg,
            day(6, 1),
            "S",
            3,
        );
        assert!(rows.is_empty());
    }

    fn write(dir: &Dir, text: &[u8]) -> std::path::PathBuf {
        let p = dir.0.join("limits.csv");
        std::fs::write(&p, text).unwrap();
        p
    }

    #[test]
    fn append_keeps_every_old_byte_and_adds_one_line_per_row() {
        let dir = Dir::new("lf");
        let old =
            format!("{HEAD}\nPb,water,200.8,µg/L,0.05,0.2,2025-01-01,,50,,,S-2025,\"old, kept\",,");
        let p = write(&dir, old.as_bytes());
        let reg = Register::parse("limits.csv", old.as_bytes()).unwrap();
        let rows = rows_for(
            &[result("Pb", 0.04112, 0.1372, 0.01372)],
            &reg,
            day(6, 1),
            "S-2026",
            2,
        );
        let dropped = append(&p, &rows).unwrap();
        assert!(dropped.is_empty());
        let out = String::from_utf8(std::fs::read(&p).unwrap()).unwrap();
        assert_eq!(
            out,
            format!(
                "{old}\nPb,water,200.8,µg/L,0.042,0.14,2026-06-01,,50,,,S-2026,\
                 40 CFR 136 App. B Rev. 2: MDL_S governs; LOQ ten-sd,0.014,8\n"
            )
        );
        let again = Register::parse("limits.csv", out.as_bytes()).unwrap();
        assert_eq!(again.rows.len(), 2);
        // No temporary file left beside it.
        assert_eq!(std::fs::read_dir(&dir.0).unwrap().count(), 1);
    }

    #[test]
    fn append_follows_crlf_a_bom_and_an_older_header() {
        let dir = Dir::new("crlf");
        let old = "\u{feff}analyte,matrix,method,unit,mdl,loq,effective_from,study_id,note\r\n\
                   Pb,water,200.8,µg/L,0.05,0.2,2025-01-01,S-2025,old\r\n";
        let p = write(&dir, old.as_bytes());
        let rows = vec![NewRow {
            analyte: "Cd".into(),
            matrix: "water".into(),
            method: "200.8".into(),
            unit: "µg/L".into(),
            mdl: Decimal::new(21, 3),
            loq: Decimal::new(8, 2),
            effective_from: day(6, 1),
            nominal_mass_g: String::new(),
            nominal_volume_ml: String::new(),
            upper_range: String::new(),
            upper_range_unit: String::new(),
            study_id: "S-2026".into(),
            note: "n".into(),
            sd: Decimal::new(7, 3),
            n: 8,
        }];
        assert_eq!(append(&p, &rows).unwrap(), ["sd", "n"]);
        let out = String::from_utf8(std::fs::read(&p).unwrap()).unwrap();
        assert_eq!(
            out,
            format!("{old}Cd,water,200.8,µg/L,0.021,0.08,2026-06-01,S-2026,n\r\n")
        );
    }

    #[test]
    fn append_refuses_a_second_row_for_one_key_and_date() {
        let dir = Dir::new("dup");
        let old = format!("{HEAD}\nPb,water,200.8,µg/L,0.05,0.2,2026-06-01,,,,,S-2025,old,,\n");
        let p = write(&dir, old.as_bytes());
        let reg = Register::parse("limits.csv", old.as_bytes()).unwrap();
        let mut r = rows_for(&[result("Pb", 0.04, 0.1, 0.01)], &reg, day(6, 1), "S", 2);
        r[0].analyte = "PB".into();
        let e = append(&p, &r).unwrap_err();
        assert_eq!(
            e.to_string(),
            "limits.csv:2: field `effective_from`: PB / water / 200.8 already has a row in force from 2026-06-01"
                .replace("limits.csv", &p.display().to_string())
        );
        assert!(e.hint().contains("--effective"));
        assert_eq!(
            std::fs::read(&p).unwrap(),
            old.as_bytes(),
            "nothing written"
        );
        // Another date for the same key is a new row.
        r[0].effective_from = day(6, 2);
        append(&p, &r).unwrap();
    }

    #[test]
    fn append_needs_the_study_id_and_note_columns() {
        let dir = Dir::new("cols");
        let old = "analyte,matrix,method,unit,mdl,loq,effective_from,note\n";
        let p = write(&dir, old.as_bytes());
        let r = rows_for(
            &[result("Pb", 0.04, 0.1, 0.01)],
            &register(""),
            day(6, 1),
            "S",
            2,
        );
        let e = append(&p, &r).unwrap_err();
        assert_eq!(
            e.to_string(),
            format!(
                "{}:1: field `study_id`: the register has no such column, so the study could not be recorded",
                p.display()
            )
        );
        assert_eq!(e.hint(), "add a `study_id` column to the register's header");
        assert_eq!(std::fs::read(&p).unwrap(), old.as_bytes());
    }

    #[test]
    fn a_write_error_names_the_folder() {
        let e = UpdateError::Io {
            path: "x/limits.csv".into(),
            source: std::io::Error::other("denied"),
        };
        assert_eq!(e.to_string(), "x/limits.csv: cannot write: denied");
        assert_eq!(e.hint(), "check that the register's folder is writable");
    }
}
