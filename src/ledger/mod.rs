//! The issued-report ledger: an embedded SQLite file in the workspace that
//! remembers every issued report, its inputs and its files, so that a limit
//! change can be traced to the reports it affects and each can be re-issued.

pub mod recompute;

use rusqlite::{Connection, OptionalExtension, TransactionBehavior, params};
use std::path::{Path, PathBuf};

/// The schema this build writes; older ledgers are migrated forward.
pub const SCHEMA_VERSION: i64 = 3;

const MIGRATIONS: &[&str] = &[
    // 0 -> 1
    "CREATE TABLE reports (
        id INTEGER PRIMARY KEY,
        report TEXT NOT NULL,
        revision INTEGER NOT NULL,
        status TEXT NOT NULL CHECK (status IN ('pending', 'issued')),
        owner_pid INTEGER NOT NULL DEFAULT 0,
        issued_at TEXT NOT NULL,
        local_offset TEXT NOT NULL,
        signatory TEXT NOT NULL,
        tool_version TEXT NOT NULL,
        reason TEXT NOT NULL DEFAULT '',
        changed TEXT NOT NULL DEFAULT '',
        changed_count INTEGER NOT NULL DEFAULT 0,
        out_dir TEXT NOT NULL,
        batch_dir TEXT NOT NULL,
        lab_toml TEXT NOT NULL,
        qc_toml TEXT,
        batch_toml TEXT NOT NULL,
        results_name TEXT NOT NULL,
        results BLOB NOT NULL,
        limits_rows TEXT NOT NULL,
        spec_rows TEXT NOT NULL,
        UNIQUE (report, revision)
    );
    CREATE TABLE results (
        report_id INTEGER NOT NULL REFERENCES reports(id) ON DELETE CASCADE,
        lab_id TEXT NOT NULL,
        analyte TEXT NOT NULL,
        state TEXT NOT NULL,
        verdict TEXT NOT NULL,
        reported TEXT NOT NULL,
        unit TEXT NOT NULL,
        value TEXT NOT NULL,
        mdl TEXT NOT NULL,
        loq TEXT NOT NULL,
        limits_row TEXT NOT NULL,
        qualifiers TEXT NOT NULL
    );
    CREATE INDEX results_report ON results(report_id);
    CREATE TABLE files (
        report_id INTEGER NOT NULL REFERENCES reports(id) ON DELETE CASCADE,
        name TEXT NOT NULL,
        tmp TEXT NOT NULL,
        sha256 TEXT NOT NULL,
        size INTEGER NOT NULL
    );
    CREATE INDEX files_sha ON files(sha256);",
    // 1 -> 2: what else a certificate prints of each result. NULL in the
    // records of schema 1, which did not keep them: not compared.
    "ALTER TABLE results ADD COLUMN spec TEXT;
    ALTER TABLE results ADD COLUMN spec_limit TEXT;
    ALTER TABLE results ADD COLUMN uncertainty TEXT;
    ALTER TABLE results ADD COLUMN ld TEXT;
    ALTER TABLE results ADD COLUMN beta TEXT;",
    // 2 -> 3: who authorised release and who reviewed; the reviews
    // themselves, each with the SHA-256 of every input it saw.
    "ALTER TABLE reports ADD COLUMN authorised_by TEXT NOT NULL DEFAULT '';
    ALTER TABLE reports ADD COLUMN reviewed_by TEXT NOT NULL DEFAULT '';
    ALTER TABLE reports ADD COLUMN reviewed_at TEXT NOT NULL DEFAULT '';
    CREATE TABLE reviews (
        id INTEGER PRIMARY KEY,
        report TEXT NOT NULL,
        batch TEXT NOT NULL,
        batch_dir TEXT NOT NULL,
        reviewer TEXT NOT NULL,
        reviewer_name TEXT NOT NULL,
        reviewer_role TEXT NOT NULL,
        reviewed_at TEXT NOT NULL,
        note TEXT NOT NULL DEFAULT '',
        inputs TEXT NOT NULL
    );
    CREATE INDEX reviews_report ON reviews(report);",
];

/// A review of a batch's inputs, as recorded by `limen review`.
#[derive(Debug, Clone, PartialEq)]
pub struct Review {
    pub report: String,
    pub batch: String,
    pub batch_dir: String,
    /// The reviewer's signatory id, name and role.
    pub reviewer: String,
    pub reviewer_name: String,
    pub reviewer_role: String,
    /// UTC, `YYYY-MM-DDTHH:MM:SSZ`.
    pub reviewed_at: String,
    pub note: String,
    /// One `name sha256` line per input file.
    pub inputs: String,
}

#[derive(Debug, thiserror::Error)]
pub enum LedgerError {
    #[error(
        "{path}: written by a newer limen (ledger schema {found}, this build knows up to {known})"
    )]
    Newer {
        path: String,
        found: i64,
        known: i64,
    },
    #[error("{path}: not a readable ledger ({message})")]
    Corrupt { path: String, message: String },
    #[error("{path}: {message}")]
    Sql { path: String, message: String },
    #[error("report {report} is already in the ledger (revision {revision} issued {issued_at})")]
    AlreadyIssued {
        report: String,
        revision: u32,
        issued_at: String,
    },
    #[error("report {report} is not in the ledger")]
    Unknown { report: String },
    /// A stored input no longer reads, or no longer evaluates, when an
    /// issued report is recomputed.
    #[error(transparent)]
    Read(#[from] crate::read::ReadError),
    #[error(transparent)]
    Eval(Box<crate::report::EvalError>),
}

impl LedgerError {
    pub fn hint(&self) -> String {
        match self {
            LedgerError::Newer { .. } => "use the limen release that wrote this ledger, or a newer one; the file was not changed".into(),
            LedgerError::Corrupt { .. } => "restore the ledger from a backup; limen never overwrites a ledger it cannot read".into(),
            LedgerError::Sql { .. } => "check the ledger file's permissions and free disk space, then run again".into(),
            LedgerError::AlreadyIssued { report, .. } => {
                format!("an issued report never changes: use `limen reissue {report} --reason \"...\" --out DIR`")
            }
            LedgerError::Unknown { .. } => "check the report number; `limen history REPORT` lists what was issued".into(),
            LedgerError::Read(e) => e.hint(),
            LedgerError::Eval(e) => e.hint(),
        }
    }
}

/// Maps an SQLite error to ours, naming the ledger file.
fn sql_error(path: &str) -> impl Fn(rusqlite::Error) -> LedgerError + Copy + '_ {
    move |e| LedgerError::Sql {
        path: path.to_string(),
        message: e.to_string(),
    }
}

pub use crate::read::sha256_hex;

/// The short code printed on a certificate: the first 16 hex digits of the
/// SHA-256 of the report's CSV.
pub fn verification_code(csv: &[u8]) -> String {
    sha256_hex(csv)[..16].to_string()
}

/// What a report was computed from, kept so it can be recomputed later.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Snapshot {
    pub batch_dir: String,
    pub lab_toml: String,
    pub qc_toml: Option<String>,
    pub batch_toml: String,
    pub results_name: String,
    pub results: Vec<u8>,
    pub limits_rows: String,
    pub spec_rows: String,
}

#[derive(Debug, Clone, PartialEq)]
pub struct StoredResult {
    pub lab_id: String,
    pub analyte: String,
    pub state: String,
    pub verdict: String,
    pub reported: String,
    pub unit: String,
    pub value: String,
    pub mdl: String,
    pub loq: String,
    pub limits_row: String,
    pub qualifiers: String,
    /// The spec applied, its limit in the result's unit, and U as printed
    /// ("" when none); None in records from before the ledger kept them.
    pub spec: Option<String>,
    pub spec_limit: Option<String>,
    pub uncertainty: Option<String>,
    /// Detection power: L_D and β at the limit ("" when not computed).
    pub ld: Option<String>,
    pub beta: Option<String>,
}

impl StoredResult {
    /// What the ledger keeps of a result: everything the certificate and
    /// the CSV print of it, as text.
    pub fn of(r: &crate::report::ReportRow) -> StoredResult {
        StoredResult {
            lab_id: r.lab_id.clone(),
            analyte: r.analyte.to_string(),
            state: r.state.name().to_string(),
            verdict: r.verdict.map(|v| v.name()).unwrap_or("").to_string(),
            reported: r.reported.clone(),
            unit: r.unit.symbol().to_string(),
            value: crate::numeric::plain(r.value_unrounded),
            mdl: r.mdl.to_string(),
            loq: r.loq.to_string(),
            limits_row: r.limits_row.to_string(),
            qualifiers: r.qualifiers.join(";"),
            spec: Some(r.spec.as_deref().unwrap_or("").to_string()),
            spec_limit: Some(r.spec_limit.map(crate::numeric::plain).unwrap_or_default()),
            uncertainty: Some(r.uncertainty.map(|u| u.to_string()).unwrap_or_default()),
            ld: Some(r.ld.map(|d| d.to_string()).unwrap_or_default()),
            beta: Some(r.beta_at_limit.map(|b| b.to_string()).unwrap_or_default()),
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct Issued {
    pub id: i64,
    pub report: String,
    pub revision: u32,
    pub issued_at: String,
    pub local_offset: String,
    pub signatory: String,
    pub tool_version: String,
    pub reason: String,
    pub changed: String,
    pub changed_count: i64,
    /// Signatory id; empty in records from before authorised release.
    pub authorised_by: String,
    /// The reviewer's name and the review's time; empty when none.
    pub reviewed_by: String,
    pub reviewed_at: String,
}

pub struct NewFile {
    pub name: String,
    pub tmp: PathBuf,
    pub sha256: String,
    pub size: u64,
}

pub struct NewRecord<'a> {
    pub report: &'a crate::Report,
    pub local_offset: String,
    pub reason: String,
    pub changed: Vec<String>,
    pub out_dir: PathBuf,
    pub snapshot: Snapshot,
    pub files: Vec<NewFile>,
}

pub struct Ledger {
    conn: Connection,
    path: String,
}

const ISSUED_COLUMNS: &str = "id, report, revision, issued_at, local_offset, signatory, tool_version, reason, changed, changed_count, authorised_by, reviewed_by, reviewed_at";

fn issued(row: &rusqlite::Row<'_>) -> rusqlite::Result<Issued> {
    Ok(Issued {
        id: row.get(0)?,
        report: row.get(1)?,
        revision: row.get::<_, i64>(2)? as u32,
        issued_at: row.get(3)?,
        local_offset: row.get(4)?,
        signatory: row.get(5)?,
        tool_version: row.get(6)?,
        reason: row.get(7)?,
        changed: row.get(8)?,
        changed_count: row.get(9)?,
        authorised_by: row.get(10)?,
        reviewed_by: row.get(11)?,
        reviewed_at: row.get(12)?,
    })
}

impl Ledger {
    pub fn path_in(workspace: &Path) -> PathBuf {
        workspace.join("ledger.sqlite")
    }

    fn sql(&self) -> impl Fn(rusqlite::Error) -> LedgerError + '_ {
        |e| LedgerError::Sql {
            path: self.path.clone(),
            message: e.to_string(),
        }
    }

    /// Opens (creating on first use) the workspace's ledger, migrates it
    /// forward, and settles any issue an interrupted run left pending.
    /// Returns what recovery did, in words.
    pub fn open(workspace: &Path) -> Result<(Ledger, Vec<String>), LedgerError> {
        let file = Self::path_in(workspace);
        let path = file.display().to_string();
        let corrupt = |e: rusqlite::Error| LedgerError::Corrupt {
            path: path.clone(),
            message: e.to_string(),
        };
        let conn = Connection::open(&file).map_err(corrupt)?;
        conn.busy_timeout(std::time::Duration::from_secs(30))
            .map_err(corrupt)?;
        // The first read tells a corrupt file from a database.
        let version: i64 = conn
            .query_row("PRAGMA user_version", [], |r| r.get(0))
            .map_err(corrupt)?;
        if version > SCHEMA_VERSION {
            return Err(LedgerError::Newer {
                path,
                found: version,
                known: SCHEMA_VERSION,
            });
        }
        conn.execute_batch("PRAGMA foreign_keys = ON; PRAGMA journal_mode = WAL;")
            .map_err(corrupt)?;
        let mut ledger = Ledger { conn, path };
        ledger.migrate()?;
        let notes = ledger.recover()?;
        Ok((ledger, notes))
    }

    fn migrate(&mut self) -> Result<(), LedgerError> {
        let path = self.path.clone();
        let err = sql_error(&path);
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(err)?;
        let version: i64 = tx
            .query_row("PRAGMA user_version", [], |r| r.get(0))
            .map_err(err)?;
        for (v, step) in MIGRATIONS.iter().enumerate().skip(version as usize) {
            tx.execute_batch(step).map_err(err)?;
            tx.execute_batch(&format!("PRAGMA user_version = {}", v + 1))
                .map_err(err)?;
        }
        tx.commit().map_err(err)
    }

    /// A pending record means a run stopped between recording and finishing
    /// an issue. If all its files reached their final names with the
    /// recorded hashes, the issue is completed; otherwise its files are
    /// removed and the record dropped, as though it never started.
    fn recover(&mut self) -> Result<Vec<String>, LedgerError> {
        let path = self.path.clone();
        let err = sql_error(&path);
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(err)?;
        let pending: Vec<(i64, String, u32, String, i64)> = {
            let mut st = tx
                .prepare(
                    "SELECT id, report, revision, out_dir, owner_pid FROM reports WHERE status = 'pending'",
                )
                .map_err(err)?;
            st.query_map([], |r| {
                Ok((
                    r.get(0)?,
                    r.get(1)?,
                    r.get::<_, i64>(2)? as u32,
                    r.get(3)?,
                    r.get::<_, i64>(4)?,
                ))
            })
            .map_err(err)?
            .collect::<Result<_, _>>()
            .map_err(err)?
        };
        let mut notes = Vec::new();
        for (id, report, revision, out_dir, pid) in pending {
            // Another process still at work on its issue: not ours to settle.
            if pid as u32 != std::process::id() && Path::new(&format!("/proc/{pid}")).exists() {
                continue;
            }
            let files: Vec<(String, String, String)> = {
                let mut st = tx
                    .prepare("SELECT name, tmp, sha256 FROM files WHERE report_id = ?1")
                    .map_err(err)?;
                st.query_map([id], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
                    .map_err(err)?
                    .collect::<Result<_, _>>()
                    .map_err(err)?
            };
            let dir = Path::new(&out_dir);
            let ours = |name: &str, sha: &str| {
                std::fs::read(dir.join(name)).is_ok_and(|b| sha256_hex(&b) == sha)
            };
            let complete = files.iter().all(|(n, _, sha)| ours(n, sha));
            if complete {
                tx.execute("UPDATE reports SET status = 'issued' WHERE id = ?1", [id])
                    .map_err(err)?;
                notes.push(format!(
                    "completed the interrupted issue of {report} revision {revision}"
                ));
            } else {
                for (name, _, sha) in &files {
                    if ours(name, sha) {
                        let _ = std::fs::remove_file(dir.join(name));
                    }
                }
                tx.execute("DELETE FROM reports WHERE id = ?1", [id])
                    .map_err(err)?;
                notes.push(format!(
                    "rolled back the interrupted issue of {report} revision {revision}: nothing of it was issued"
                ));
            }
            for (_, tmp, _) in &files {
                let _ = std::fs::remove_file(tmp);
            }
        }
        tx.commit().map_err(err)?;
        Ok(notes)
    }

    pub fn latest(&self, report: &str) -> Result<Option<Issued>, LedgerError> {
        self.conn
            .query_row(
                &format!(
                    "SELECT {ISSUED_COLUMNS} FROM reports WHERE report = ?1 AND status = 'issued' ORDER BY revision DESC LIMIT 1"
                ),
                [report],
                issued,
            )
            .optional()
            .map_err(self.sql())
    }

    pub fn history(&self, report: &str) -> Result<Vec<Issued>, LedgerError> {
        let mut st = self
            .conn
            .prepare(&format!(
                "SELECT {ISSUED_COLUMNS} FROM reports WHERE report = ?1 AND status = 'issued' ORDER BY revision"
            ))
            .map_err(self.sql())?;
        st.query_map([report], issued)
            .map_err(self.sql())?
            .collect::<Result<_, _>>()
            .map_err(self.sql())
    }

    /// The latest issued revision of every report (issued on or after
    /// `since`, a date, when given), by report number.
    pub fn latest_all(&self, since: Option<chrono::NaiveDate>) -> Result<Vec<Issued>, LedgerError> {
        let mut st = self
            .conn
            .prepare(&format!(
                "SELECT {ISSUED_COLUMNS} FROM reports r WHERE status = 'issued'
                 AND revision = (SELECT MAX(revision) FROM reports x WHERE x.report = r.report AND x.status = 'issued')
                 AND (?1 IS NULL OR substr(issued_at, 1, 10) >= ?1)
                 ORDER BY report"
            ))
            .map_err(self.sql())?;
        let since = since.map(|d| d.to_string());
        st.query_map([since], issued)
            .map_err(self.sql())?
            .collect::<Result<_, _>>()
            .map_err(self.sql())
    }

    pub fn snapshot(&self, id: i64) -> Result<Snapshot, LedgerError> {
        self.conn
            .query_row(
                "SELECT batch_dir, lab_toml, qc_toml, batch_toml, results_name, results, limits_rows, spec_rows FROM reports WHERE id = ?1",
                [id],
                |r| {
                    Ok(Snapshot {
                        batch_dir: r.get(0)?,
                        lab_toml: r.get(1)?,
                        qc_toml: r.get(2)?,
                        batch_toml: r.get(3)?,
                        results_name: r.get(4)?,
                        results: r.get(5)?,
                        limits_rows: r.get(6)?,
                        spec_rows: r.get(7)?,
                    })
                },
            )
            .map_err(self.sql())
    }

    pub fn results(&self, id: i64) -> Result<Vec<StoredResult>, LedgerError> {
        let mut st = self
            .conn
            .prepare(
                "SELECT lab_id, analyte, state, verdict, reported, unit, value, mdl, loq, limits_row, qualifiers,
                        spec, spec_limit, uncertainty, ld, beta
                 FROM results WHERE report_id = ?1 ORDER BY rowid",
            )
            .map_err(self.sql())?;
        st.query_map([id], |r| {
            Ok(StoredResult {
                lab_id: r.get(0)?,
                analyte: r.get(1)?,
                state: r.get(2)?,
                verdict: r.get(3)?,
                reported: r.get(4)?,
                unit: r.get(5)?,
                value: r.get(6)?,
                mdl: r.get(7)?,
                loq: r.get(8)?,
                limits_row: r.get(9)?,
                qualifiers: r.get(10)?,
                spec: r.get(11)?,
                spec_limit: r.get(12)?,
                uncertainty: r.get(13)?,
                ld: r.get(14)?,
                beta: r.get(15)?,
            })
        })
        .map_err(self.sql())?
        .collect::<Result<_, _>>()
        .map_err(self.sql())
    }

    /// The issued record holding a file with this SHA-256, and the file's name.
    pub fn find_file(&self, sha: &str) -> Result<Option<(Issued, String)>, LedgerError> {
        let cols: Vec<String> = ISSUED_COLUMNS
            .split(", ")
            .map(|c| format!("r.{c}"))
            .collect();
        self.conn
            .query_row(
                &format!(
                    "SELECT {}, f.name FROM files f JOIN reports r ON r.id = f.report_id
                     WHERE f.sha256 = ?1 AND r.status = 'issued' ORDER BY r.revision DESC LIMIT 1",
                    cols.join(", ")
                ),
                [sha],
                |row| Ok((issued(row)?, row.get(13)?)),
            )
            .optional()
            .map_err(self.sql())
    }

    /// Records an issue as pending, in one immediate transaction; refuses a
    /// revision 0 whose report number exists, or a revision already taken.
    pub fn begin(&mut self, rec: &NewRecord<'_>) -> Result<i64, LedgerError> {
        Ok(self.begin_all(std::slice::from_ref(rec))?[0])
    }

    /// Records several issues as pending in one immediate transaction (one
    /// sync for the lot): all are recorded or, on any refusal, none.
    pub fn begin_all(&mut self, recs: &[NewRecord<'_>]) -> Result<Vec<i64>, LedgerError> {
        let path = self.path.clone();
        let err = sql_error(&path);
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(err)?;
        let mut ids = Vec::with_capacity(recs.len());
        for rec in recs {
            ids.push(insert_pending(&tx, rec, &path)?);
        }
        tx.commit().map_err(err)?;
        Ok(ids)
    }

    /// Records a review, in one transaction.
    pub fn record_review(&mut self, r: &Review) -> Result<(), LedgerError> {
        self.conn
            .execute(
                "INSERT INTO reviews (report, batch, batch_dir, reviewer, reviewer_name, reviewer_role, reviewed_at, note, inputs)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
                params![
                    r.report,
                    r.batch,
                    r.batch_dir,
                    r.reviewer,
                    r.reviewer_name,
                    r.reviewer_role,
                    r.reviewed_at,
                    r.note,
                    r.inputs
                ],
            )
            .map(|_| ())
            .map_err(self.sql())
    }

    /// The reviews of a report number, newest first.
    pub fn reviews(&self, report: &str) -> Result<Vec<Review>, LedgerError> {
        let mut st = self
            .conn
            .prepare(
                "SELECT report, batch, batch_dir, reviewer, reviewer_name, reviewer_role, reviewed_at, note, inputs
                 FROM reviews WHERE report = ?1 ORDER BY id DESC",
            )
            .map_err(self.sql())?;
        st.query_map([report], |r| {
            Ok(Review {
                report: r.get(0)?,
                batch: r.get(1)?,
                batch_dir: r.get(2)?,
                reviewer: r.get(3)?,
                reviewer_name: r.get(4)?,
                reviewer_role: r.get(5)?,
                reviewed_at: r.get(6)?,
                note: r.get(7)?,
                inputs: r.get(8)?,
            })
        })
        .map_err(self.sql())?
        .collect::<Result<_, _>>()
        .map_err(self.sql())
    }

    /// Drops a pending issue whose files could not be put in place.
    pub fn abandon(&mut self, id: i64) -> Result<(), LedgerError> {
        self.conn
            .execute(
                "DELETE FROM reports WHERE id = ?1 AND status = 'pending'",
                [id],
            )
            .map(|_| ())
            .map_err(self.sql())
    }

    /// Marks a pending issue complete, once its files are in place.
    pub fn complete(&mut self, id: i64) -> Result<(), LedgerError> {
        self.complete_all(&[id])
    }

    /// Marks pending issues complete in one transaction (one sync).
    pub fn complete_all(&mut self, ids: &[i64]) -> Result<(), LedgerError> {
        let path = self.path.clone();
        let err = sql_error(&path);
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(err)?;
        for &id in ids {
            let n = tx
                .execute(
                    "UPDATE reports SET status = 'issued' WHERE id = ?1 AND status = 'pending'",
                    [id],
                )
                .map_err(err)?;
            if n != 1 {
                return Err(LedgerError::Sql {
                    path: path.clone(),
                    message: format!(
                        "the pending record {id} is gone; the issue was not completed"
                    ),
                });
            }
        }
        tx.commit().map_err(err)
    }
}

/// One pending record's rows, inside the caller's transaction.
// Long (about 90 lines) on purpose: every statement of a record stays in
// one place, so what commits together can be read at once.
fn insert_pending(
    tx: &rusqlite::Transaction<'_>,
    rec: &NewRecord<'_>,
    path: &str,
) -> Result<i64, LedgerError> {
    let err = sql_error(path);
    let h = &rec.report.header;
    let existing: Option<(u32, String)> = tx
            .query_row(
                "SELECT revision, issued_at FROM reports WHERE report = ?1 AND (revision = ?2 OR ?2 = 0) ORDER BY revision DESC LIMIT 1",
                params![h.report, h.revision],
                |r| Ok((r.get::<_, i64>(0)? as u32, r.get(1)?)),
            )
            .optional()
            .map_err(err)?;
    if let Some((revision, issued_at)) = existing {
        return Err(LedgerError::AlreadyIssued {
            report: h.report.clone(),
            revision,
            issued_at,
        });
    }
    let s = &rec.snapshot;
    tx.execute(
            "INSERT INTO reports (report, revision, status, issued_at, local_offset, signatory, tool_version, reason, changed,
               changed_count, out_dir, batch_dir, lab_toml, qc_toml, batch_toml, results_name, results, limits_rows, spec_rows,
               owner_pid, authorised_by, reviewed_by, reviewed_at)
             VALUES (?1, ?2, 'pending', ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18, ?19, ?20, ?21, ?22)",
            params![
                h.report,
                h.revision,
                h.issued_at.format("%Y-%m-%dT%H:%M:%SZ").to_string(),
                rec.local_offset,
                h.signatory,
                h.tool_version,
                rec.reason,
                rec.changed.join("\n"),
                rec.changed.len() as i64,
                rec.out_dir.display().to_string(),
                s.batch_dir,
                s.lab_toml,
                s.qc_toml,
                s.batch_toml,
                s.results_name,
                s.results,
                s.limits_rows,
                s.spec_rows,
                std::process::id() as i64,
                h.authorised_by,
                h.review.as_ref().map(|r| r.name.as_str()).unwrap_or(""),
                h.review.as_ref().map(|r| r.at.as_str()).unwrap_or(""),
            ],
        )
        .map_err(err)?;
    let id = tx.last_insert_rowid();
    {
        let mut st = tx
                .prepare(
                    "INSERT INTO results (report_id, lab_id, analyte, state, verdict, reported, unit, value, mdl, loq, limits_row, qualifiers,
                                          spec, spec_limit, uncertainty, ld, beta)
                     VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17)",
                )
                .map_err(err)?;
        for r in rec.report.rows.iter().map(StoredResult::of) {
            st.execute(params![
                id,
                r.lab_id,
                r.analyte,
                r.state,
                r.verdict,
                r.reported,
                r.unit,
                r.value,
                r.mdl,
                r.loq,
                r.limits_row,
                r.qualifiers,
                r.spec,
                r.spec_limit,
                r.uncertainty,
                r.ld,
                r.beta,
            ])
            .map_err(err)?;
        }
        let mut st = tx
                .prepare("INSERT INTO files (report_id, name, tmp, sha256, size) VALUES (?1, ?2, ?3, ?4, ?5)")
                .map_err(err)?;
        for f in &rec.files {
            st.execute(params![
                id,
                f.name,
                f.tmp.display().to_string(),
                f.sha256,
                f.size as i64
            ])
            .map_err(err)?;
        }
    }
    Ok(id)
}

/// What the ledger says of a file.
pub enum Verification {
    NotIssued {
        sha256: String,
    },
    Issued {
        issued: Box<Issued>,
        name: String,
        /// The latest revision, when it is a later one.
        replaced_by: Option<Box<Issued>>,
    },
}

pub fn verify_file(ledger: &Ledger, bytes: &[u8]) -> Result<Verification, LedgerError> {
    let sha256 = sha256_hex(bytes);
    Ok(match ledger.find_file(&sha256)? {
        None => Verification::NotIssued { sha256 },
        Some((issued, name)) => {
            let replaced_by = ledger
                .latest(&issued.report)?
                .filter(|l| l.revision > issued.revision)
                .map(Box::new);
            Verification::Issued {
                issued: Box::new(issued),
                name,
                replaced_by,
            }
        }
    })
}

impl Verification {
    /// In words, as `limen verify` prints it.
    pub fn describe(&self, file: &str) -> String {
        match self {
            Verification::NotIssued { sha256 } => {
                format!(
                    "{file}: not in this lab's ledger: altered, or not issued here\n  sha256 {sha256}"
                )
            }
            Verification::Issued {
                issued,
                name,
                replaced_by,
            } => {
                let status = match replaced_by {
                    Some(l) => format!(
                        "  REPLACED by revision {} issued {}: {}",
                        l.revision, l.issued_at, l.reason
                    ),
                    None => "  current: this is the latest revision".to_string(),
                };
                format!(
                    "{file}: issued as {} revision {} on {} by {} (file {name})\n{status}",
                    issued.report, issued.revision, issued.issued_at, issued.signatory
                )
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // SHA-256 test vector (FIPS 180-2, appendix B.1): "abc".
    #[test]
    fn sha256_of_abc() {
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        assert_eq!(verification_code(b"abc"), "ba7816bf8f01cfea");
    }

    fn temp_ws(name: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!("limen-ledger-{name}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&d);
        std::fs::create_dir_all(&d).unwrap();
        d
    }

    #[test]
    fn a_schema_1_ledger_migrates_and_its_results_read_back() {
        let ws = temp_ws("schema-1");
        {
            let c = Connection::open(Ledger::path_in(&ws)).unwrap();
            c.execute_batch(MIGRATIONS[0]).unwrap();
            c.execute_batch(
                "PRAGMA user_version = 1;
                 INSERT INTO reports (id, report, revision, status, issued_at, local_offset, signatory,
                     tool_version, out_dir, batch_dir, lab_toml, batch_toml, results_name, results,
                     limits_rows, spec_rows)
                 VALUES (1, 'R-1', 0, 'issued', '2026-11-20T10:00:00Z', '+00:00', 'S', '0.1.0',
                     'out', 'b', '', '', 'r.csv', x'', '', '');
                 INSERT INTO results VALUES (1, 'S1', 'Pb', 'quantified', 'pass', '25.0', 'mg/kg',
                     '25.01', '4.00', '12.0', 'S-1', '');",
            )
            .unwrap();
        }
        let (l, _) = Ledger::open(&ws).unwrap();
        let v: i64 = l
            .conn
            .query_row("PRAGMA user_version", [], |r| r.get(0))
            .unwrap();
        assert_eq!(v, SCHEMA_VERSION);
        let rows = l.results(1).unwrap();
        assert_eq!(rows.len(), 1);
        assert_eq!(rows[0].reported, "25.0");
        // Not kept by schema 1: unknown, and so never counted as a change.
        assert_eq!(rows[0].spec, None);
        assert_eq!(rows[0].uncertainty, None);
        let mut now = rows[0].clone();
        now.spec = Some("P".into());
        now.spec_limit = Some("90".into());
        now.uncertainty = Some("3.0".into());
        assert!(recompute::kinds(&rows[0], &now).is_empty());
        let _ = std::fs::remove_dir_all(&ws);
    }

    #[test]
    fn each_field_a_certificate_prints_is_its_own_kind_of_change() {
        use recompute::{ChangeKind as K, kinds};
        let base = StoredResult {
            lab_id: "S1".into(),
            analyte: "Pb".into(),
            state: "quantified".into(),
            verdict: "pass".into(),
            reported: "25.0".into(),
            unit: "mg/kg".into(),
            value: "25.01".into(),
            mdl: "4.00".into(),
            loq: "12.0".into(),
            limits_row: "S-1".into(),
            qualifiers: String::new(),
            spec: Some("P".into()),
            spec_limit: Some("90".into()),
            uncertainty: Some("3.0".into()),
            ld: Some(String::new()),
            beta: Some(String::new()),
        };
        assert!(kinds(&base, &base).is_empty());
        let with = |f: &dyn Fn(&mut StoredResult)| {
            let mut n = base.clone();
            f(&mut n);
            kinds(&base, &n)
        };
        assert_eq!(with(&|n| n.state = "detected-below-loq".into()), [K::State]);
        assert_eq!(with(&|n| n.verdict = "fail".into()), [K::Verdict]);
        assert_eq!(with(&|n| n.reported = "25.1".into()), [K::Reported]);
        assert_eq!(with(&|n| n.unit = "µg/g".into()), [K::Reported]);
        assert_eq!(with(&|n| n.value = "25.02".into()), [K::Value]);
        assert_eq!(with(&|n| n.mdl = "4.10".into()), [K::Limits]);
        assert_eq!(with(&|n| n.loq = "12.5".into()), [K::Limits]);
        assert_eq!(with(&|n| n.limits_row = "S-2".into()), [K::Limits]);
        assert_eq!(with(&|n| n.spec = Some("Q".into())), [K::Spec]);
        assert_eq!(with(&|n| n.spec_limit = Some("100".into())), [K::Spec]);
        assert_eq!(
            with(&|n| n.qualifiers = "imprecise".into()),
            [K::Qualifiers]
        );
        assert_eq!(
            with(&|n| n.uncertainty = Some("3.1".into())),
            [K::Uncertainty]
        );
        let both = with(&|n| {
            n.reported = "< 4.00".into();
            n.state = "not-detected".into();
        });
        assert_eq!(both, [K::State, K::Reported]);
        // Results present on one side only.
        let gone = recompute::changes(std::slice::from_ref(&base), &[]);
        assert_eq!(gone[0].kinds, [K::Removed]);
        let new = recompute::changes(&[], std::slice::from_ref(&base));
        assert_eq!(new[0].kinds, [K::Added]);
    }

    #[test]
    fn creates_migrates_and_refuses_newer_or_corrupt_files() {
        let ws = temp_ws("schema");
        let (l, notes) = Ledger::open(&ws).unwrap();
        assert!(notes.is_empty());
        let v: i64 = l
            .conn
            .query_row("PRAGMA user_version", [], |r| r.get(0))
            .unwrap();
        assert_eq!(v, SCHEMA_VERSION);
        l.conn.execute_batch("PRAGMA user_version = 99").unwrap();
        drop(l);
        assert!(matches!(
            Ledger::open(&ws),
            Err(LedgerError::Newer { found: 99, .. })
        ));
        std::fs::remove_file(Ledger::path_in(&ws)).unwrap();
        let _ = std::fs::remove_file(ws.join("ledger.sqlite-wal"));
        let _ = std::fs::remove_file(ws.join("ledger.sqlite-shm"));
        std::fs::write(Ledger::path_in(&ws), b"this is not a database, but a lab notebook page.......................................................................").unwrap();
        let before = std::fs::read(Ledger::path_in(&ws)).unwrap();
        assert!(matches!(
            Ledger::open(&ws),
            Err(LedgerError::Corrupt { .. })
        ));
        assert_eq!(
            std::fs::read(Ledger::path_in(&ws)).unwrap(),
            before,
            "never overwritten"
        );
        std::fs::remove_dir_all(&ws).unwrap();
    }
}
