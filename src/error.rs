//! The one error type the binary sees, with a hint and an exit code.

use crate::output::OutputError;
use crate::read::ReadError;
use crate::report::EvalError;

/// Exit codes, documented in the README.
pub const EXIT_OK: i32 = 0;
pub const EXIT_INPUT: i32 = 2;
pub const EXIT_BLOCKED: i32 = 3;

#[derive(Debug, thiserror::Error)]
pub enum Error {
    #[error(transparent)]
    Read(#[from] ReadError),
    #[error(transparent)]
    Eval(#[from] EvalError),
    #[error(transparent)]
    Output(#[from] OutputError),
    #[error(transparent)]
    Render(#[from] crate::render::RenderError),
    #[error(transparent)]
    Template(#[from] crate::templates::TemplateError),
    #[error(transparent)]
    Ledger(#[from] crate::ledger::LedgerError),
    #[error("{message}")]
    Usage { message: String, hint: String },
}

impl Error {
    pub fn hint(&self) -> String {
        match self {
            Error::Read(e) => e.hint(),
            Error::Eval(e) => e.hint(),
            Error::Output(e) => e.hint(),
            Error::Render(e) => e.hint(),
            Error::Template(e) => e.hint(),
            Error::Ledger(e) => e.hint(),
            Error::Usage { hint, .. } => hint.clone(),
        }
    }

    pub fn exit_code(&self) -> i32 {
        EXIT_INPUT
    }
}
