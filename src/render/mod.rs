//! Phase 5: renderers. They see only the report model and return bytes or
//! text; writing files is the caller's business.

pub mod csv;
pub mod study;
pub mod table;

use crate::report::Report;

/// A file format a report can be issued in.
pub trait Render {
    /// File extension without the dot.
    fn extension(&self) -> &'static str;
    fn render(&self, report: &Report) -> Vec<u8>;
}
