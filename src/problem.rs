//! Blocking problems: conditions under which a batch must not be issued.
//! They are data, not errors: `check` lists them all at once.

use crate::read::Loc;
use std::fmt;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ProblemKind {
    /// No register row in force for the result's analyte, matrix and method.
    MissingLimits,
    /// The result names a spec that does not exist or sets no limit here.
    MissingSpec,
    /// The reading is above the calibrated range.
    OverRange,
    /// A QC check failed or is missing in a way that holds the results;
    /// the only kind `--accept-qc` may override.
    Qc,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    pub at: Loc,
    pub lab_id: String,
    pub analyte: std::rc::Rc<str>,
    pub kind: ProblemKind,
    pub message: String,
    pub hint: String,
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{}: {} {}: {}",
            self.at, self.lab_id, self.analyte, self.message
        )
    }
}
