//! A client batch: batch.toml (who, what, when) and its results CSV.

use super::csvtable::{Col, Skip, opt, read_file, read_rows_from, read_rows_skipping, req};
use super::error::{Loc, ReadError};
use super::vocab::DecisionRule;
use super::vocab::Kind;
use crate::units::{Dimension, Unit};
use chrono::NaiveDate;
use rust_decimal::Decimal;
use serde::Deserialize;
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::rc::Rc;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ManifestFile {
    batch: String,
    report: String,
    client_name: String,
    client_address: String,
    client_contact: String,
    received_on: toml::Spanned<toml::Value>,
    decision_rule: Option<DecisionRule>,
    results: String,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Manifest {
    pub batch: String,
    pub report: String,
    pub client_name: String,
    pub client_address: String,
    pub client_contact: String,
    pub received_on: NaiveDate,
    pub decision_rule: Option<DecisionRule>,
    pub results: String,
}

impl Manifest {
    pub fn parse(file: &str, text: &str) -> Result<Manifest, ReadError> {
        let m: ManifestFile = super::toml_util::parse(file, text)?;
        let received_on = super::toml_util::date(file, text, "received_on", &m.received_on)?;
        for (key, value) in [
            ("batch", &m.batch),
            ("report", &m.report),
            ("results", &m.results),
        ] {
            if value.trim().is_empty() {
                let line = text
                    .lines()
                    .position(|l| l.trim_start().starts_with(key))
                    .map(|i| i as u64 + 1)
                    .unwrap_or(1);
                return Err(ReadError::field(
                    Loc::new(file, line, key),
                    "empty; a value is required",
                    format!("give the batch's `{key}`"),
                ));
            }
        }
        if !m
            .report
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'))
            || m.report.starts_with('.')
        {
            let line = text
                .lines()
                .position(|l| l.trim_start().starts_with("report"))
                .map(|i| i as u64 + 1)
                .unwrap_or(1);
            return Err(ReadError::field(
                Loc::new(file, line, "report"),
                format!("`{}` cannot name a report file", m.report),
                "use letters, digits, '-', '_' and '.' only (it becomes the file name)",
            ));
        }
        Ok(Manifest {
            batch: m.batch,
            report: m.report,
            client_name: m.client_name,
            client_address: m.client_address,
            client_contact: m.client_contact,
            received_on,
            decision_rule: m.decision_rule,
            results: m.results,
        })
    }
}

pub const COLUMNS: &[Col] = &[
    req("lab_id"),
    opt("client_id"),
    opt("description"),
    req("kind"),
    req("analyte"),
    req("matrix"),
    req("method"),
    req("reading"),
    req("reading_unit"),
    opt("dilution"),
    opt("mass_g"),
    opt("volume_ml"),
    req("analyzed_on"),
    opt("spec"),
    opt("uncertainty_pct"),
    opt("spike_added"),
    opt("parent_id"),
];

const LAB_ID: usize = 0;
const CLIENT_ID: usize = 1;
const DESCRIPTION: usize = 2;
const KIND: usize = 3;
const ANALYTE: usize = 4;
const MATRIX: usize = 5;
const METHOD: usize = 6;
const READING: usize = 7;
const READING_UNIT: usize = 8;
const DILUTION: usize = 9;
const MASS: usize = 10;
const VOLUME: usize = 11;
const ANALYZED: usize = 12;
const SPEC: usize = 13;
const UNCERTAINTY: usize = 14;
const SPIKE: usize = 15;
const PARENT: usize = 16;

/// One instrument result as the analyst exported it.
#[derive(Debug, Clone, PartialEq)]
pub struct ResultRow {
    pub file: Rc<str>,
    pub line: u64,
    pub lab_id: String,
    pub client_id: String,
    pub description: String,
    pub kind: Kind,
    pub analyte: Rc<str>,
    pub matrix: Rc<str>,
    pub method: Rc<str>,
    pub reading: Decimal,
    pub reading_unit: Unit,
    pub dilution: Decimal,
    pub mass_g: Option<Decimal>,
    pub volume_ml: Option<Decimal>,
    pub analyzed_on: NaiveDate,
    pub spec: Option<Rc<str>>,
    pub uncertainty_pct: Option<Decimal>,
    pub spike_added: Option<Decimal>,
    pub parent_id: Option<String>,
}

impl ResultRow {
    pub fn loc(&self, field: &str) -> Loc {
        Loc::new(&self.file, self.line, field)
    }
}

fn non_empty(s: &str) -> Option<String> {
    if s.is_empty() {
        None
    } else {
        Some(s.to_string())
    }
}

pub fn parse_results(file: &str, bytes: &[u8]) -> Result<Vec<ResultRow>, ReadError> {
    collect(file, Source::Bytes(bytes))
}

fn collect(file: &str, source: Source<'_>) -> Result<Vec<ResultRow>, ReadError> {
    let mut rows = Vec::new();
    each_result_in(file, source, Pass::Check, |r| {
        rows.push(r);
        Ok::<(), ReadError>(())
    })?;
    Ok(rows)
}

/// Hands each checked result to `each` in file order, so a large batch need
/// not be held in memory twice.
pub fn each_result<E: From<ReadError>>(
    file: &str,
    bytes: &[u8],
    each: impl FnMut(ResultRow) -> Result<(), E>,
) -> Result<(), E> {
    each_result_in(file, Source::Bytes(bytes), Pass::Check, each)
}

/// What one pass over a results file is for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Pass {
    /// Every row checked, repeated keys found.
    Check,
    /// The QC rows only, as far as the file reads cleanly (a later `Check`
    /// pass reports the first error in file order); samples are skipped
    /// after their kind.
    Qc,
}

/// Where a pass reads the results from.
#[derive(Debug, Clone, Copy)]
pub enum Source<'a> {
    Bytes(&'a [u8]),
    File(&'a OnDisk),
}

/// A results file read from disk on every pass, so memory stays flat in its
/// size; its length and modification time are checked on each opening.
#[derive(Debug, Clone, PartialEq)]
pub struct OnDisk {
    pub path: PathBuf,
    len: u64,
    modified: Option<std::time::SystemTime>,
}

impl OnDisk {
    pub fn new(path: &Path) -> Result<OnDisk, ReadError> {
        let m = std::fs::metadata(path).map_err(|source| ReadError::Io {
            file: path.display().to_string(),
            source,
        })?;
        Ok(OnDisk {
            path: path.to_path_buf(),
            len: m.len(),
            modified: m.modified().ok(),
        })
    }
}

impl Source<'_> {
    pub fn len(&self) -> u64 {
        match self {
            Source::Bytes(b) => b.len() as u64,
            Source::File(f) => f.len,
        }
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    fn open(&self, file: &str) -> Result<Box<dyn std::io::Read + '_>, ReadError> {
        match self {
            Source::Bytes(b) => Ok(Box::new(*b)),
            Source::File(f) => {
                if OnDisk::new(&f.path)? != **f {
                    return Err(ReadError::field(
                        Loc::file(file),
                        "changed while limen was reading it",
                        "let the export finish, then run again",
                    ));
                }
                let handle = std::fs::File::open(&f.path).map_err(|source| ReadError::Io {
                    file: file.to_string(),
                    source,
                })?;
                Ok(Box::new(handle))
            }
        }
    }
}

/// The key of a result's repeat check: lab id, analyte (lower case) and
/// kind, joined by a separator that cannot occur in a trimmed cell.
fn repeat_key(key: &mut String, lab_id: &str, analyte: &str, kind: Kind) {
    key.clear();
    key.push_str(lab_id);
    key.push('\u{1f}');
    crate::fasthash::push_lower(key, analyte);
    key.push('\u{1f}');
    key.push_str(kind.name());
}

/// Confirms the repeat search's candidates up to `limit` by a key-only scan.
fn repeated(
    file: &str,
    source: Source<'_>,
    repeats: &super::repeats::Repeats,
    limit: u64,
) -> Result<Option<ReadError>, ReadError> {
    if repeats.candidates.is_empty() {
        return Ok(None);
    }
    let reader = source.open(file)?;
    let mut last = (String::new(), String::new(), Kind::Sample);
    let found = super::repeats::confirm(&repeats.candidates, limit, |f| {
        let mut key = String::new();
        // Stopping early is not an error of the file: `Quiet`.
        let _ = read_rows_from(file, reader, COLUMNS, |r| {
            let Some(kind) = Kind::parse(r.get(KIND)) else {
                return Err(Halt::<()>::Quiet);
            };
            let (lab_id, analyte) = (r.get(LAB_ID), r.get(ANALYTE));
            repeat_key(&mut key, lab_id, analyte, kind);
            last = (lab_id.to_string(), analyte.to_string(), kind);
            if f(r.line, &key) {
                Ok(())
            } else {
                Err(Halt::Quiet)
            }
        });
    });
    Ok(found.map(|(line, first)| {
        let (lab_id, analyte, kind) = &last;
        ReadError::field(
            Loc::new(file, line, "lab_id"),
            format!(
                "{lab_id} / {analyte} / {} appears again (first on line {first})",
                kind.name()
            ),
            "each lab id has one result per analyte and kind; remove the repeat or give a re-run its own lab id",
        )
    }))
}

/// One pass over the results from `source`: each row (of the kinds `pass`
/// wants) checked and handed to `each` in file order.
// Long (about 130 lines) on purpose: the per-row hot loop of a million-row
// batch; its reused buffers and interned names live across rows.
pub fn each_result_in<E: From<ReadError>>(
    file: &str,
    source: Source<'_>,
    pass: Pass,
    mut each: impl FnMut(ResultRow) -> Result<(), E>,
) -> Result<(), E> {
    let shared: Rc<str> = Rc::from(file);
    let mut repeats = (pass == Pass::Check).then(|| super::repeats::Repeats::for_len(source.len()));
    // Analytes, matrices, methods and specs repeat on every row: share them.
    let mut names: HashMap<String, Rc<str>, crate::fasthash::Build> = HashMap::default();
    let mut intern = move |s: &str| -> Rc<str> {
        if let Some(a) = names.get(s) {
            return a.clone();
        }
        let a: Rc<str> = Rc::from(s);
        names.insert(s.to_string(), a.clone());
        a
    };
    let mut key = String::new();
    // The line of the first error, parse or evaluation, for the repeat search.
    let mut failed_at: Option<u64> = None;
    let reader = source.open(file)?;
    // The QC pass passes over sample rows unread: the check pass reads them.
    let samples: Skip = (KIND, |cell| cell.eq_ignore_ascii_case(b"sample"));
    let skip = (pass == Pass::Qc).then_some(samples);
    let outcome = read_rows_skipping(file, reader, COLUMNS, skip, |r| {
        // The row's key is noted in the filter after the row's own work (its
        // block is being fetched meanwhile), and whatever that work found:
        // a repeat is reported before a later problem on its own row.
        let mut probe = None;
        let mut parse = || -> Result<Option<ResultRow>, ReadError> {
            let kind_text = r.required(KIND)?;
            let kind = Kind::parse(kind_text).ok_or_else(|| {
                ReadError::field(
                    r.loc(KIND),
                    format!("unknown kind `{kind_text}`"),
                    format!("kinds: {}", Kind::ALL.map(|k| k.name()).join(", ")),
                )
            })?;
            if pass == Pass::Qc && kind == Kind::Sample {
                return Ok(None);
            }
            let lab_id = r.required(LAB_ID)?.to_string();
            let analyte = intern(r.required(ANALYTE)?);
            if let Some(repeats) = &repeats {
                repeat_key(&mut key, &lab_id, &analyte, kind);
                probe = Some(repeats.probe(&key));
            }
            let reading_unit = r.unit(READING_UNIT)?;
            let dilution = r.opt_positive(DILUTION)?.unwrap_or(Decimal::ONE);
            let mass_g = r.opt_positive(MASS)?;
            let volume_ml = r.opt_positive(VOLUME)?;
            if mass_g.is_some() {
                if volume_ml.is_none() {
                    return Err(ReadError::field(
                        r.loc(VOLUME),
                        "empty, but mass_g is given",
                        "a solid sample needs the final digest volume in mL",
                    ));
                }
                if reading_unit.dimension() != Dimension::MassConcentration {
                    return Err(ReadError::field(
                        r.loc(READING_UNIT),
                        format!(
                            "{reading_unit} is a mass fraction, but a solid sample's reading is of its digest"
                        ),
                        "give the reading as read on the instrument (µg/L, mg/L, ng/mL or µg/mL)",
                    ));
                }
            }
            let uncertainty_pct = r.opt_decimal(UNCERTAINTY)?;
            if let Some(u) = uncertainty_pct {
                if u < Decimal::ZERO || u >= Decimal::ONE_HUNDRED {
                    return Err(ReadError::field(
                        r.loc(UNCERTAINTY),
                        format!("{u} % is outside 0–100"),
                        "give the expanded uncertainty (k = 2) as a percentage of the result",
                    ));
                }
            }
            let row = ResultRow {
                file: shared.clone(),
                line: r.line,
                lab_id,
                client_id: r.text(CLIENT_ID),
                description: r.text(DESCRIPTION),
                kind,
                analyte,
                matrix: intern(r.required(MATRIX)?),
                method: intern(r.required(METHOD)?),
                reading: r.decimal(READING)?,
                reading_unit,
                dilution,
                mass_g,
                volume_ml,
                analyzed_on: r.date(ANALYZED)?,
                spec: match r.get(SPEC) {
                    "" => None,
                    s => Some(intern(s)),
                },
                uncertainty_pct,
                spike_added: r.opt_decimal(SPIKE)?,
                parent_id: non_empty(r.get(PARENT)),
            };
            Ok(Some(row))
        };
        let done = match parse() {
            Ok(Some(row)) => each(row).map_err(|e| {
                failed_at = Some(r.line);
                Halt::Each(e)
            }),
            Ok(None) => Ok(()),
            Err(_) if pass == Pass::Qc => Err(Halt::Quiet),
            Err(e) => {
                failed_at = Some(r.line);
                Err(Halt::Read(e))
            }
        };
        if let (Some(repeats), Some(p)) = (&mut repeats, probe) {
            repeats.note_probe(p, &key, r.line);
        }
        done
    });
    // A repeat before (or on) the first failing row is the error to report,
    // as the file is read in order.
    let first_repeat = |limit: u64| -> Result<Option<ReadError>, ReadError> {
        match &repeats {
            Some(r) => repeated(file, source, r, limit),
            None => Ok(None),
        }
    };
    match outcome {
        Ok(()) => match first_repeat(u64::MAX)? {
            Some(dup) => Err(dup.into()),
            None => Ok(()),
        },
        Err(Halt::Quiet) => Ok(()),
        Err(Halt::Read(_)) if pass == Pass::Qc => Ok(()),
        Err(Halt::Read(e)) => {
            let limit = failed_at.or(match &e {
                ReadError::Csv { line, .. } => Some(*line),
                _ => None,
            });
            match limit.map(first_repeat).transpose()?.flatten() {
                Some(dup) => Err(dup.into()),
                None => Err(e.into()),
            }
        }
        Err(Halt::Each(e)) => match failed_at.map(first_repeat).transpose()?.flatten() {
            Some(dup) => Err(dup.into()),
            None => Err(e),
        },
    }
}

/// Why a pass stopped early.
enum Halt<E> {
    Read(ReadError),
    Each(E),
    /// The QC pass met a row it could not read: the checking pass reports it.
    Quiet,
}

impl<E> From<ReadError> for Halt<E> {
    fn from(e: ReadError) -> Self {
        Halt::Read(e)
    }
}

/// A batch folder as read: the manifest, its files' bytes and the rows.
#[derive(Debug, Clone)]
pub struct Batch {
    pub dir: PathBuf,
    pub manifest_file: String,
    pub manifest_text: String,
    pub manifest: Manifest,
    pub results_file: String,
    /// The results as read; empty when `results_on_disk` is set.
    pub results_bytes: Vec<u8>,
    /// Set by `Batch::open`: the results are read from disk on each pass.
    pub results_on_disk: Option<OnDisk>,
}

impl Batch {
    /// The batch with its results read into memory (what the ledger keeps).
    pub fn load(dir: &Path) -> Result<Batch, ReadError> {
        let mut b = Batch::open(dir)?;
        if let Some(f) = b.results_on_disk.take() {
            b.results_bytes = read_file(&f.path)?;
        }
        Ok(b)
    }

    /// The batch with its results left on disk and read on each pass, so a
    /// large file is never held.
    pub fn open(dir: &Path) -> Result<Batch, ReadError> {
        let manifest_path = dir.join("batch.toml");
        let manifest_file = manifest_path.display().to_string();
        if !manifest_path.is_file() {
            let mut batches: Vec<String> = std::fs::read_dir(dir)
                .map(|d| {
                    d.flatten()
                        .filter(|e| e.path().join("batch.toml").is_file())
                        .map(|e| e.path().display().to_string())
                        .collect()
                })
                .unwrap_or_default();
            batches.sort();
            return Err(ReadError::field(
                Loc::file(&manifest_file),
                format!("{} is not a batch folder (no batch.toml)", dir.display()),
                if batches.is_empty() {
                    "name the folder that holds the batch's batch.toml and results file".to_string()
                } else {
                    format!("batch folders here: {}", batches.join(", "))
                },
            ));
        }
        let manifest_text = String::from_utf8(read_file(&manifest_path)?).map_err(|_| {
            ReadError::field(
                Loc::file(&manifest_file),
                "not valid UTF-8 text",
                "save the file as UTF-8",
            )
        })?;
        let manifest = Manifest::parse(&manifest_file, &manifest_text)?;
        let results_path = dir.join(&manifest.results);
        let results_file = results_path.display().to_string();
        if !results_path.is_file() {
            // Point at the line that names the file, not only at the missing file.
            let line = manifest_text
                .lines()
                .position(|l| l.trim_start().starts_with("results"))
                .map_or(0, |i| i as u64 + 1);
            return Err(ReadError::field(
                Loc::new(&manifest_file, line, "results"),
                format!(
                    "names `{}`, but {results_file} is not a file",
                    manifest.results
                ),
                "give the results CSV's file name, relative to the batch folder",
            ));
        }
        Ok(Batch {
            dir: dir.to_path_buf(),
            manifest_file,
            manifest_text,
            manifest,
            results_file,
            results_bytes: Vec::new(),
            results_on_disk: Some(OnDisk::new(&results_path)?),
        })
    }

    /// Where a pass reads the results from.
    pub fn source(&self) -> Source<'_> {
        match &self.results_on_disk {
            Some(f) => Source::File(f),
            None => Source::Bytes(&self.results_bytes),
        }
    }

    /// Every result, checked; errors name file, line and field.
    pub fn rows(&self) -> Result<Vec<ResultRow>, ReadError> {
        collect(&self.results_file, self.source())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEAD: &str = "lab_id,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on\n";

    fn rows(body: &str) -> Result<Vec<ResultRow>, ReadError> {
        parse_results("r.csv", format!("{HEAD}{body}").as_bytes())
    }

    #[test]
    fn reads_a_solid_and_a_liquid() {
        let r = rows("S1,sample,Pb,paint,6010D,50,ug/L,1,0.100,50,2026-11-13\nS2,sample,Pb,leachate,6020B,-0.02,ug/L,,,,2026-11-13\n")
            .unwrap();
        assert_eq!(r[0].mass_g, Some(Decimal::new(100, 3)));
        assert_eq!(r[1].dilution, Decimal::ONE);
        assert_eq!(r[1].reading, Decimal::new(-2, 2));
        assert_eq!(r[1].line, 3);
    }

    #[test]
    fn bad_cells_are_named() {
        let cases = [
            (
                "S1,sample,Pb,paint,6010D,<0.5,ug/L,1,0.1,50,2026-11-13\n",
                "field `reading`",
            ),
            (
                "S1,sample,Pb,paint,6010D,ND,ug/L,1,0.1,50,2026-11-13\n",
                "field `reading`",
            ),
            (
                "S1,sample,Pb,paint,6010D,5,ug/L,1,0,50,2026-11-13\n",
                "field `mass_g`",
            ),
            (
                "S1,sample,Pb,paint,6010D,5,ug/L,-2,0.1,50,2026-11-13\n",
                "field `dilution`",
            ),
            (
                "S1,sample,Pb,paint,6010D,5,ppt,1,0.1,50,2026-11-13\n",
                "field `reading_unit`",
            ),
            (
                "S1,sample,Pb,paint,6010D,5,ug/L,1,0.1,,2026-11-13\n",
                "field `volume_ml`",
            ),
            (
                "S1,sample,Pb,paint,6010D,5,mg/kg,1,0.1,50,2026-11-13\n",
                "field `reading_unit`",
            ),
            (
                "S1,sample,Pb,paint,6010D,5,ug/L,1,0.1,50,13/11/2026\n",
                "field `analyzed_on`",
            ),
            (
                "S1,blank,Pb,paint,6010D,5,ug/L,1,0.1,50,2026-11-13\n",
                "field `kind`",
            ),
        ];
        for (body, field) in cases {
            let e = rows(body).unwrap_err().to_string();
            assert!(e.starts_with(&format!("r.csv:2: {field}")), "{body} -> {e}");
        }
    }

    #[test]
    fn a_repeated_result_is_refused() {
        let e = rows("S1,sample,Pb,paint,6010D,5,ug/L,1,0.1,50,2026-11-13\nS1,sample,pb,paint,6010D,6,ug/L,1,0.1,50,2026-11-13\n")
            .unwrap_err()
            .to_string();
        assert!(e.starts_with("r.csv:3: field `lab_id`"), "{e}");
        assert!(e.contains("first on line 2"), "{e}");
        // The same lab id as a duplicate QC row is a different result.
        rows("S1,sample,Pb,paint,6010D,5,ug/L,1,0.1,50,2026-11-13\nS1,duplicate,Pb,paint,6010D,6,ug/L,1,0.1,50,2026-11-13\n")
            .unwrap();
    }

    // The repeat search is confirmed after the row loop; the error reported
    // must still be the first in file order.
    #[test]
    fn the_first_problem_in_file_order_is_reported() {
        let ok = "S1,sample,Pb,paint,6010D,5,ug/L,1,0.1,50,2026-11-13\n";
        let bad_date = "S2,sample,Pb,paint,6010D,5,ug/L,1,0.1,50,2026-13-13\n";
        let err = |body: String| rows(&body).unwrap_err().to_string();
        // A repeat on line 3, a bad date on line 4: the repeat.
        let e = err(format!("{ok}{ok}{bad_date}"));
        assert!(e.starts_with("r.csv:3: field `lab_id`"), "{e}");
        // A bad date on line 2, a repeat on line 4: the date.
        let e = err(format!("{bad_date}{ok}{ok}"));
        assert!(e.starts_with("r.csv:2: field `analyzed_on`"), "{e}");
        // A repeat whose own unit is also wrong: the repeat, as it is
        // checked first on the row.
        let e = err(format!(
            "{ok}S1,sample,Pb,paint,6010D,5,furlongs,1,0.1,50,2026-11-13\n"
        ));
        assert!(e.starts_with("r.csv:3: field `lab_id`"), "{e}");
        // A ragged line after a repeat: the repeat.
        let e = err(format!("{ok}{ok}S3,sample\n"));
        assert!(e.starts_with("r.csv:3: field `lab_id`"), "{e}");
    }

    #[test]
    fn a_results_file_changed_between_passes_is_refused() {
        let dir = std::env::temp_dir().join(format!("limen-ondisk-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("r.csv");
        let row = "S1,sample,Pb,paint,6010D,5,ug/L,1,0.1,50,2026-11-13\n";
        std::fs::write(&path, format!("{HEAD}{row}")).unwrap();
        let on_disk = OnDisk::new(&path).unwrap();
        let count = |f: &OnDisk| {
            let mut n = 0;
            each_result_in("r.csv", Source::File(f), Pass::Check, |_| {
                n += 1;
                Ok::<(), ReadError>(())
            })
            .map(|()| n)
        };
        assert_eq!(count(&on_disk).unwrap(), 1);
        std::fs::write(&path, format!("{HEAD}{row}{}", row.replace("S1", "S2"))).unwrap();
        let e = count(&on_disk).unwrap_err().to_string();
        assert!(e.contains("changed while limen was reading it"), "{e}");
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn manifest_dates_as_toml_or_text() {
        let base = "batch='B'\nreport='R-1'\nclient_name='C'\nclient_address='A'\nclient_contact='P'\nresults='r.csv'\n";
        let m = Manifest::parse("b.toml", &format!("{base}received_on=2026-11-20\n")).unwrap();
        assert_eq!(
            m.received_on,
            NaiveDate::from_ymd_opt(2026, 11, 20).unwrap()
        );
        let m = Manifest::parse("b.toml", &format!("{base}received_on='2026-11-20'\n")).unwrap();
        assert_eq!(
            m.received_on,
            NaiveDate::from_ymd_opt(2026, 11, 20).unwrap()
        );
        let e = Manifest::parse("b.toml", &format!("{base}received_on='20 Nov'\n")).unwrap_err();
        assert!(
            e.to_string().starts_with("b.toml:7: field `received_on`"),
            "{e}"
        );
        let e = Manifest::parse(
            "b.toml",
            &format!("{base}received_on=2026-11-20\nreport_to='x'\n"),
        )
        .unwrap_err();
        assert!(e.to_string().starts_with("b.toml:8:"), "{e}");
    }
}
