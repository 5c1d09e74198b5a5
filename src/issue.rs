//! Issuing a report: every file rendered first, then all written, so an
//! error leaves nothing behind under a final name.

use crate::output::{OutputError, check_free, write_new};
use crate::render::certificate::Certificate;
use crate::render::csv::Csv;
use crate::render::{Render, RenderError};
use crate::report::Report;
use crate::templates::Templates;
use std::path::{Path, PathBuf};

pub struct IssuedFile {
    pub name: String,
    pub bytes: Vec<u8>,
}

/// The report's files (`<report>.csv` and `<report>.pdf`, or with `-r<N>`
/// from revision 1 on) and any warnings the renderers raised.
pub fn render(
    report: &Report,
    templates: &Templates,
) -> Result<(Vec<IssuedFile>, Vec<String>), RenderError> {
    let h = &report.header;
    let stem = if h.revision == 0 {
        h.report.clone()
    } else {
        format!("{}-r{}", h.report, h.revision)
    };
    let mut files = Vec::new();
    let mut warnings = Vec::new();
    let renderers: [&dyn Render; 2] = [&Csv, &Certificate { templates }];
    for r in renderers {
        let out = r.render(report)?;
        warnings.extend(out.warnings);
        files.push(IssuedFile {
            name: format!("{stem}.{}", r.extension()),
            bytes: out.bytes,
        });
    }
    Ok((files, warnings))
}

/// Writes the files of one or more reports, refusing if any name is taken.
pub fn write_all(dir: &Path, files: &[IssuedFile]) -> Result<Vec<PathBuf>, OutputError> {
    let names: Vec<String> = files.iter().map(|f| f.name.clone()).collect();
    check_free(dir, &names)?;
    files
        .iter()
        .map(|f| write_new(dir, &f.name, &f.bytes))
        .collect()
}

/// Points at which a test may stop the process mid-issue, to prove that
/// an interrupted issue leaves a complete record or none.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Fault {
    AfterStage,
    AfterRecord,
    AfterPublish,
    AfterComplete,
}

impl Fault {
    pub const ALL: [Fault; 4] = [
        Fault::AfterStage,
        Fault::AfterRecord,
        Fault::AfterPublish,
        Fault::AfterComplete,
    ];

    pub fn name(self) -> &'static str {
        match self {
            Fault::AfterStage => "after-stage",
            Fault::AfterRecord => "after-record",
            Fault::AfterPublish => "after-publish",
            Fault::AfterComplete => "after-complete",
        }
    }

    pub fn parse(s: &str) -> Option<Fault> {
        Fault::ALL.into_iter().find(|f| f.name() == s)
    }
}

fn stop_at(fault: Option<Fault>, here: Fault) {
    if fault == Some(here) {
        // A crash, not an error: nothing after this point runs.
        std::process::abort();
    }
}

/// The report's files with its verification code (the first 16 hex digits
/// of the CSV's SHA-256) set on the report and printed on the certificate.
pub fn render_coded(
    report: &mut Report,
    templates: &Templates,
) -> Result<(Vec<IssuedFile>, Vec<String>), RenderError> {
    let csv = Csv.bytes(report);
    report.header.verification_code = Some(crate::ledger::verification_code(&csv));
    render(report, templates)
}

/// What a recorded issue needs besides the report.
pub struct Record<'a> {
    /// Files already rendered with `render_coded`, so that several reports
    /// can all be rendered before any is recorded; None renders here.
    pub rendered: Option<(Vec<IssuedFile>, Vec<String>)>,
    pub snapshot: crate::ledger::Snapshot,
    pub local_offset: String,
    pub reason: String,
    pub changed: Vec<String>,
    pub templates: &'a Templates,
}

/// Issues one report into `dir` and records it: the CSV is hashed for the
/// certificate's verification code, both files are staged and synced, the
/// record is written as pending, the files get their final names, and only
/// then is the record marked issued.
pub fn issue_recorded(
    ledger: &mut crate::ledger::Ledger,
    dir: &Path,
    report: &mut Report,
    rec: Record<'_>,
    fault: Option<Fault>,
) -> Result<(Vec<PathBuf>, Vec<String>), crate::Error> {
    if report.header.revision == 0 {
        if let Some(prev) = ledger.latest(&report.header.report)? {
            return Err(crate::ledger::LedgerError::AlreadyIssued {
                report: prev.report,
                revision: prev.revision,
                issued_at: prev.issued_at,
            }
            .into());
        }
    }
    let (files, warnings) = match rec.rendered {
        Some(done) => done,
        None => render_coded(report, rec.templates)?,
    };
    check_free(
        dir,
        &files.iter().map(|f| f.name.clone()).collect::<Vec<_>>(),
    )?;
    let mut staged = Vec::new();
    for f in &files {
        match crate::output::stage(dir, &f.name, &f.bytes) {
            Ok(s) => staged.push(s),
            Err(e) => {
                staged.iter().for_each(crate::output::discard);
                return Err(e.into());
            }
        }
    }
    stop_at(fault, Fault::AfterStage);
    let new_files = files
        .iter()
        .zip(&staged)
        .map(|(f, s)| crate::ledger::NewFile {
            name: f.name.clone(),
            tmp: s.tmp.clone(),
            sha256: crate::ledger::sha256_hex(&f.bytes),
            size: f.bytes.len() as u64,
        })
        .collect();
    let id = match ledger.begin(&crate::ledger::NewRecord {
        report,
        local_offset: rec.local_offset,
        reason: rec.reason,
        changed: rec.changed,
        out_dir: dir.to_path_buf(),
        snapshot: rec.snapshot,
        files: new_files,
    }) {
        Ok(id) => id,
        Err(e) => {
            staged.iter().for_each(crate::output::discard);
            return Err(e.into());
        }
    };
    stop_at(fault, Fault::AfterRecord);
    for (k, s) in staged.iter().enumerate() {
        if let Err(e) = crate::output::publish(s) {
            for done in &staged[..k] {
                let _ = std::fs::remove_file(&done.target);
            }
            staged.iter().for_each(crate::output::discard);
            ledger.abandon(id)?;
            return Err(e.into());
        }
    }
    stop_at(fault, Fault::AfterPublish);
    ledger.complete(id)?;
    stop_at(fault, Fault::AfterComplete);
    staged.iter().for_each(crate::output::discard);
    Ok((staged.into_iter().map(|s| s.target).collect(), warnings))
}
