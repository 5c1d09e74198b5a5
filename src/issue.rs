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
