//! The one error type the binary sees, with a hint and an exit code.

use crate::output::OutputError;
use crate::read::ReadError;
use crate::report::EvalError;

/// Exit codes, documented in the README.
pub const EXIT_OK: i32 = 0;
pub const EXIT_INPUT: i32 = 2;
pub const EXIT_BLOCKED: i32 = 3;
/// `verify`: the file is not an issued report, or it was altered.
pub const EXIT_NOT_ISSUED: i32 = 1;
/// Standard output was closed by its reader (`limen check … | head`): the
/// status a shell reports for a process ended by SIGPIPE (128 + 13).
pub const EXIT_BROKEN_PIPE: i32 = 141;

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
    #[error(transparent)]
    Key(#[from] crate::keys::KeyError),
    #[error(transparent)]
    Sign(#[from] crate::sign::SignError),
    #[error("{message}")]
    Usage { message: String, hint: String },
    /// Release refused: who may authorise, or the review, is missing.
    #[error("{message}; nothing was issued")]
    Refused { message: String, hint: String },
    #[error("cannot write to standard output: {0}")]
    Stdout(std::io::Error),
    /// The reader of standard output went away; not reported, only the status.
    #[error("standard output closed")]
    BrokenPipe,
}

impl Error {
    /// A failed write to standard output: a closed pipe ends quietly, any
    /// other failure (a full disk, say) is an error.
    pub fn stdout(e: std::io::Error) -> Error {
        if e.kind() == std::io::ErrorKind::BrokenPipe {
            Error::BrokenPipe
        } else {
            Error::Stdout(e)
        }
    }
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
            Error::Key(e) => e.hint(),
            Error::Sign(e) => e.hint(),
            Error::Usage { hint, .. } | Error::Refused { hint, .. } => hint.clone(),
            Error::Stdout(_) => "check the disk or the file standard output goes to".into(),
            Error::BrokenPipe => String::new(),
        }
    }

    pub fn exit_code(&self) -> i32 {
        match self {
            Error::BrokenPipe => EXIT_BROKEN_PIPE,
            Error::Refused { .. } => EXIT_BLOCKED,
            _ => EXIT_INPUT,
        }
    }
}

impl From<crate::study::register_update::UpdateError> for Error {
    fn from(e: crate::study::register_update::UpdateError) -> Error {
        match e {
            crate::study::register_update::UpdateError::Read(r) => Error::Read(r),
            other => Error::Usage {
                message: other.to_string(),
                hint: other.hint(),
            },
        }
    }
}
