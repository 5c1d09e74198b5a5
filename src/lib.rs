//! limen: from a lab workspace and a client batch to limit-aware results and
//! certificates of analysis.
//!
//! Phases, each a module with types between them:
//! read → resolve → classify → report → render; `output` writes files.

pub mod classify;
pub mod error;
pub mod evaluated;
pub mod fasthash;
pub mod issue;
pub mod keys;
pub mod layout;
pub mod ledger;
pub mod numeric;
pub mod output;
pub mod pdf;
pub mod power;
pub mod problem;
pub mod qc;
pub mod read;
pub mod reissue;
pub mod release;
pub mod render;
pub mod report;
pub mod resolve;
pub mod sign;
pub mod spool;
pub mod starter;
pub mod study;
pub mod templates;
pub mod units;

pub use error::Error;
pub use report::{Report, RunInfo};
