//! A client result once classified, as QC qualifies it and the report model
//! carries it, and the error evaluation raises. Both QC (below the report)
//! and the report model use these types; this module uses neither.

use crate::classify::{State, Verdict};
use crate::read::Loc;
use crate::resolve::ResolveError;
use crate::units::Unit;
use chrono::NaiveDate;
use rust_decimal::Decimal;
use std::rc::Rc;

#[derive(Debug, thiserror::Error)]
pub enum EvalError {
    #[error(transparent)]
    Read(#[from] crate::read::ReadError),
    #[error(transparent)]
    Resolve(#[from] ResolveError),
    #[error("{at}: the guarded decision rule needs the result's expanded uncertainty")]
    NoUncertainty { at: Loc },
    #[error("{at}: arithmetic overflow applying the decision rule")]
    Overflow { at: Loc },
    #[error("the temporary file for classified rows in {}: {source}", dir.display())]
    Scratch {
        dir: std::path::PathBuf,
        source: std::io::Error,
    },
}

impl EvalError {
    pub fn hint(&self) -> String {
        match self {
            EvalError::Read(e) => e.hint(),
            EvalError::Resolve(e) => e.hint(),
            EvalError::NoUncertainty { .. } => {
                "give uncertainty_pct (U at k = 2, % of the result) for every quantified result with a limit, or use decision_rule = \"simple\"".into()
            }
            EvalError::Overflow { .. } => "check the numbers on this row".into(),
            EvalError::Scratch { .. } => {
                "a large batch keeps its classified rows in the temporary folder until they are written: free space there, or set TMPDIR to a folder with room".into()
            }
        }
    }
}

/// The qualifier of a pass whose detection power at the limit is below
/// the lab's (β above its β).
pub const LOW_POWER: &str = "low-power";

/// One client result as the certificate states it.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportRow {
    /// The results file line, for run order and messages.
    pub line: u64,
    pub lab_id: String,
    pub client_id: String,
    pub description: String,
    pub analyte: Rc<str>,
    pub matrix: Rc<str>,
    pub method: Rc<str>,
    pub analyzed_on: NaiveDate,
    /// The text a certificate prints: "< 0.600", "ND", "25.0", "> 2500".
    pub reported: String,
    /// The rounded value; None when not detected or over range.
    pub value: Option<Decimal>,
    pub value_unrounded: Decimal,
    pub unit: Unit,
    pub state: State,
    pub mdl: Decimal,
    pub loq: Decimal,
    pub mdl_unrounded: Decimal,
    pub loq_unrounded: Decimal,
    pub dilution: Decimal,
    pub spec: Option<Rc<str>>,
    pub spec_limit: Option<Decimal>,
    pub spec_citation: Rc<str>,
    pub verdict: Option<Verdict>,
    pub uncertainty_pct: Option<Decimal>,
    /// The expanded uncertainty U (k = 2) as printed, in `unit`: for a
    /// quantified result that gives `uncertainty_pct`, else None.
    pub uncertainty: Option<Decimal>,
    /// Detection power, for a not-detected or below-LOQ result with a limit
    /// when the register row keeps the study's spike SD: the sample's L_D
    /// (Currie) and β, the chance a sample at the limit would have been
    /// reported not detected. Both rounded as printed.
    pub ld: Option<Decimal>,
    pub beta_at_limit: Option<Decimal>,
    /// A pass on the sample limits whose β exceeds the lab's: qualified
    /// low-power or made inconclusive, as the lab chose.
    pub weak_pass: bool,
    pub qualifiers: Vec<String>,
    /// The register row used: study id, else file:line.
    pub limits_row: Rc<str>,
}
