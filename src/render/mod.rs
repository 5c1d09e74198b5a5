//! Phase 5: renderers. They see only the report model and return bytes or
//! text; writing files is the caller's business.

pub mod certificate;
pub mod csv;
pub mod study;
pub mod study_pdf;
pub mod table;

use crate::report::Report;

#[derive(Debug, thiserror::Error)]
pub enum RenderError {
    #[error(transparent)]
    Template(#[from] crate::templates::TemplateError),
    #[error("certificate: {0}")]
    Pdf(#[from] crate::pdf::PdfError),
}

impl RenderError {
    pub fn hint(&self) -> String {
        match self {
            RenderError::Template(e) => e.hint(),
            RenderError::Pdf(_) => {
                "this is a fault in limen's certificate layout; please report it with the batch"
                    .into()
            }
        }
    }
}

/// A rendered file, with anything the reader should be told about it.
pub struct Output {
    pub bytes: Vec<u8>,
    pub warnings: Vec<String>,
}

/// A file format a report can be issued in.
pub trait Render {
    /// File extension without the dot.
    fn extension(&self) -> &'static str;
    fn render(&self, report: &Report) -> Result<Output, RenderError>;
}
