//! Issuing a report: every file rendered first, then all written, so an
//! error leaves nothing behind under a final name.

use crate::output::{OutputError, check_free, write_new};
use crate::read::{Batch, Workspace};
use crate::render::certificate::Certificate;
use crate::render::csv::Csv;
use crate::render::{Render, RenderError};
use crate::report::Report;
use crate::sign::Identity;
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
    let stem = stem(report);
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

/// The file name stem: the report number, with `-r<N>` from revision 1 on.
fn stem(report: &Report) -> String {
    let h = &report.header;
    if h.revision == 0 {
        h.report.clone()
    } else {
        format!("{}-r{}", h.report, h.revision)
    }
}

/// The names of the files a report is issued as, in render order.
pub fn file_names(report: &Report) -> Vec<String> {
    let stem = stem(report);
    [Csv.extension(), "pdf"]
        .iter()
        .map(|ext| format!("{stem}.{ext}"))
        .collect()
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

#[cfg(feature = "fault-injection")]
fn stop_at(fault: Option<Fault>, here: Fault) {
    if fault == Some(here) {
        // A crash, not an error: nothing after this point runs.
        std::process::abort();
    }
}

/// Without the `fault-injection` feature (the shipped build) there is no
/// way to stop the process here.
#[cfg(not(feature = "fault-injection"))]
fn stop_at(_: Option<Fault>, _: Fault) {}

/// The report's files with its verification code (the first 16 hex digits
/// of the CSV's SHA-256) set on the report and printed on the certificate,
/// and the certificate signed by `signer`, the authorising signatory.
pub fn render_coded(
    report: &mut Report,
    templates: &Templates,
    signer: &Identity,
) -> Result<(Vec<IssuedFile>, Vec<String>), crate::Error> {
    let csv = Csv.bytes(report);
    report.header.verification_code = Some(crate::ledger::verification_code(&csv));
    let (mut files, warnings) = render(report, templates)?;
    sign_certificate(&mut files, report, signer)?;
    Ok((files, warnings))
}

/// Signs the PDF among `files` in the authorising signatory's name, dated
/// at the report's issue time so the bytes stay reproducible.
fn sign_certificate(
    files: &mut [IssuedFile],
    report: &Report,
    signer: &Identity,
) -> Result<(), crate::sign::SignError> {
    let h = &report.header;
    let reason = format!(
        "Certificate of analysis {} revision {} authorised for release",
        h.report, h.revision
    );
    let fields = crate::sign::Fields {
        name: &h.signatory,
        reason: &reason,
        location: &h.lab_name,
        at: h.issued_at.timestamp(),
    };
    for f in files.iter_mut().filter(|f| f.name.ends_with(".pdf")) {
        f.bytes = crate::sign::sign_pdf(&f.bytes, signer, &fields)?;
    }
    Ok(())
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
    /// The authorising signatory's key and certificate.
    pub signer: &'a Identity,
}

/// Refuses a report that cannot be issued into `dir`: a first issue whose
/// number the ledger already holds, or a file name already taken. The
/// ledger checks the number again inside the recording transaction, so a
/// concurrent issuer of the same number still loses cleanly.
fn preflight(
    ledger: &crate::ledger::Ledger,
    dir: &Path,
    report: &Report,
) -> Result<(), crate::Error> {
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
    Ok(check_free(dir, &file_names(report))?)
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
    preflight(ledger, dir, report)?;
    let (files, warnings) = match rec.rendered {
        Some(done) => done,
        None => render_coded(report, rec.templates, rec.signer)?,
    };
    let entry = Entry {
        site: 0,
        report,
        files,
        snapshot: rec.snapshot,
        local_offset: rec.local_offset,
        reason: rec.reason,
        changed: rec.changed,
    };
    let mut paths = record_all(&mut [ledger], dir, vec![entry], fault)?;
    Ok((paths.pop().unwrap_or_default(), warnings))
}

/// One rendered report waiting to be recorded, in the ledger `site`.
struct Entry<'r> {
    site: usize,
    report: &'r Report,
    files: Vec<IssuedFile>,
    snapshot: crate::ledger::Snapshot,
    local_offset: String,
    reason: String,
    changed: Vec<String>,
}

/// Stages, records, publishes and completes reports whose numbers and
/// file names have passed `preflight`, each step once for all of them: one
/// pass of syncs after all staged files are written, one transaction per ledger for
/// the pending records, one directory sync for the new names, one
/// transaction per ledger to complete. A crash at any point leaves each
/// report complete or absent (the ledger settles pending records on open).
fn record_all(
    ledgers: &mut [&mut crate::ledger::Ledger],
    dir: &Path,
    mut entries: Vec<Entry<'_>>,
    fault: Option<Fault>,
) -> Result<Vec<Vec<PathBuf>>, crate::Error> {
    let mut staged: Vec<crate::output::Staged> = Vec::new();
    let discard_all = |staged: &[crate::output::Staged]| {
        staged.iter().for_each(crate::output::discard);
    };
    for f in entries.iter().flat_map(|e| &e.files) {
        match crate::output::stage_unsynced(dir, &f.name, &f.bytes) {
            Ok(s) => staged.push(s),
            Err(e) => {
                discard_all(&staged);
                return Err(e.into());
            }
        }
    }
    if let Err(e) = crate::output::sync_staged(&staged.iter().collect::<Vec<_>>()) {
        discard_all(&staged);
        return Err(e.into());
    }
    stop_at(fault, Fault::AfterStage);

    // The staged files of entry k, in order.
    let mut spans = Vec::with_capacity(entries.len());
    let mut at = 0;
    for e in &entries {
        spans.push(at..at + e.files.len());
        at += e.files.len();
    }
    let mut ids: Vec<Option<i64>> = vec![None; entries.len()];
    let site_of: Vec<usize> = entries.iter().map(|e| e.site).collect();
    let abandon = |ledgers: &mut [&mut crate::ledger::Ledger], ids: &[Option<i64>]| {
        for (&site, id) in site_of.iter().zip(ids) {
            if let Some(id) = id {
                let _ = ledgers[site].abandon(*id);
            }
        }
    };
    for site in 0..ledgers.len() {
        let mine: Vec<usize> = (0..entries.len())
            .filter(|&k| entries[k].site == site)
            .collect();
        if mine.is_empty() {
            continue;
        }
        // The snapshots move into the records: a large results file is
        // not held twice.
        let snapshots: Vec<crate::ledger::Snapshot> = mine
            .iter()
            .map(|&k| std::mem::take(&mut entries[k].snapshot))
            .collect();
        let records: Vec<crate::ledger::NewRecord<'_>> = mine
            .iter()
            .zip(snapshots)
            .map(|(&k, snapshot)| {
                let e = &entries[k];
                crate::ledger::NewRecord {
                    report: e.report,
                    local_offset: e.local_offset.clone(),
                    reason: e.reason.clone(),
                    changed: e.changed.clone(),
                    out_dir: dir.to_path_buf(),
                    snapshot,
                    files: e
                        .files
                        .iter()
                        .zip(&staged[spans[k].clone()])
                        .map(|(f, s)| crate::ledger::NewFile {
                            name: f.name.clone(),
                            tmp: s.tmp.clone(),
                            sha256: crate::ledger::sha256_hex(&f.bytes),
                            size: f.bytes.len() as u64,
                        })
                        .collect(),
                }
            })
            .collect();
        match ledgers[site].begin_all(&records) {
            Ok(new) => {
                for (&k, id) in mine.iter().zip(new) {
                    ids[k] = Some(id);
                }
            }
            Err(e) => {
                abandon(ledgers, &ids);
                discard_all(&staged);
                return Err(e.into());
            }
        }
    }
    stop_at(fault, Fault::AfterRecord);

    for (k, s) in staged.iter().enumerate() {
        if let Err(e) = crate::output::link(s) {
            for done in &staged[..k] {
                let _ = std::fs::remove_file(&done.target);
            }
            discard_all(&staged);
            abandon(ledgers, &ids);
            return Err(e.into());
        }
    }
    crate::output::sync_dir(dir);
    stop_at(fault, Fault::AfterPublish);

    for (site, ledger) in ledgers.iter_mut().enumerate() {
        let mine: Vec<i64> = entries
            .iter()
            .zip(&ids)
            .filter(|(e, _)| e.site == site)
            .filter_map(|(_, id)| *id)
            .collect();
        if !mine.is_empty() {
            ledger.complete_all(&mine)?;
        }
    }
    stop_at(fault, Fault::AfterComplete);
    discard_all(&staged);
    Ok(spans
        .into_iter()
        .map(|r| staged[r].iter().map(|s| s.target.clone()).collect())
        .collect())
}

/// A workspace that reports are issued from: its files, wording and ledger.
pub struct Site<'a> {
    pub ws: &'a Workspace,
    pub templates: &'a Templates,
    pub ledger: crate::ledger::Ledger,
}

/// One evaluated batch to issue, from `sites[site]`.
pub struct Job {
    pub report: Report,
    pub batch: Batch,
    pub site: usize,
    /// The authorising signatory's key and certificate.
    pub signer: Identity,
}

/// What `issue_all` reports as it goes, for the caller to show.
pub enum Event<'e> {
    /// A temporary file of an interrupted earlier run was removed.
    Swept(&'e str),
    /// The report is being rendered.
    Rendering(&'e str),
}

/// One issued report: its files, and any warnings its renderers raised.
pub struct Issued {
    pub report: Report,
    pub paths: Vec<PathBuf>,
    pub warnings: Vec<String>,
}

/// Issues every report into `dir`, or none: leftovers of interrupted runs
/// are swept, every number and file name is checked, and every file of
/// every report is rendered before the first is recorded, so a refusal or a
/// rendering error leaves nothing issued. (A crash during recording leaves
/// each report complete or absent; the ledger settles it on next open.)
pub fn issue_all(
    sites: &mut [Site<'_>],
    dir: &Path,
    jobs: Vec<Job>,
    fault: Option<Fault>,
    on: &mut dyn FnMut(Event<'_>),
) -> Result<Vec<Issued>, crate::Error> {
    for name in crate::output::sweep(dir) {
        on(Event::Swept(&name));
    }
    for j in &jobs {
        preflight(&sites[j.site].ledger, dir, &j.report)?;
    }
    let mut jobs = jobs;
    let mut rendered = Vec::with_capacity(jobs.len());
    for j in jobs.iter_mut() {
        on(Event::Rendering(&j.report.header.report));
        rendered.push(render_coded(
            &mut j.report,
            sites[j.site].templates,
            &j.signer,
        )?);
    }
    let mut entries = Vec::with_capacity(jobs.len());
    let mut warnings = Vec::with_capacity(jobs.len());
    for (job, (files, w)) in jobs.iter().zip(rendered) {
        let site = &sites[job.site];
        entries.push(Entry {
            site: job.site,
            report: &job.report,
            files,
            snapshot: crate::ledger::recompute::snapshot(site.ws, &job.batch, &job.report),
            local_offset: site.ws.lab.utc_offset.to_string(),
            reason: String::new(),
            changed: Vec::new(),
        });
        warnings.push(w);
    }
    let mut ledgers: Vec<&mut crate::ledger::Ledger> =
        sites.iter_mut().map(|s| &mut s.ledger).collect();
    let paths = record_all(&mut ledgers, dir, entries, fault)?;
    let issued = jobs
        .into_iter()
        .zip(paths)
        .zip(warnings)
        .map(|((job, paths), warnings)| Issued {
            report: job.report,
            paths,
            warnings,
        })
        .collect();
    Ok(issued)
}
