use std::fmt;

/// Where a value came from: file, line (1-based, header is line 1) and field.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Loc {
    pub file: String,
    pub line: Option<u64>,
    pub field: Option<String>,
}

impl Loc {
    pub fn new(file: &str, line: u64, field: &str) -> Loc {
        Loc {
            file: file.to_string(),
            line: Some(line),
            field: Some(field.to_string()),
        }
    }

    pub fn file(file: &str) -> Loc {
        Loc {
            file: file.to_string(),
            line: None,
            field: None,
        }
    }
}

impl fmt::Display for Loc {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file)?;
        if let Some(line) = self.line {
            write!(f, ":{line}")?;
        }
        if let Some(field) = &self.field {
            write!(f, ": field `{field}`")?;
        }
        Ok(())
    }
}

/// Everything that can be wrong with the files a user hands us.
#[derive(Debug, thiserror::Error)]
pub enum ReadError {
    #[error("{file}: cannot read: {source}")]
    Io {
        file: String,
        #[source]
        source: std::io::Error,
    },
    #[error("{file}: the file is empty; expected a header row")]
    Empty { file: String, expected: Vec<String> },
    #[error("{file}:1: missing column(s): {}", .columns.join(", "))]
    MissingColumns { file: String, columns: Vec<String> },
    #[error("{file}:1: unknown column(s): {}", .columns.join(", "))]
    UnknownColumns {
        file: String,
        columns: Vec<String>,
        known: Vec<String>,
    },
    #[error("{file}:{line}: malformed CSV: {message}")]
    Csv {
        file: String,
        line: u64,
        message: String,
    },
    #[error("{file}:{line}: {message}")]
    Toml {
        file: String,
        line: u64,
        message: String,
    },
    #[error("{at}: {problem}")]
    Field {
        at: Loc,
        problem: String,
        hint: String,
    },
    #[error("no lab.toml in {start} or any folder above it")]
    NoWorkspace { start: String },
}

impl ReadError {
    pub fn field(at: Loc, problem: impl Into<String>, hint: impl Into<String>) -> ReadError {
        ReadError::Field {
            at,
            problem: problem.into(),
            hint: hint.into(),
        }
    }

    pub fn hint(&self) -> String {
        match self {
            ReadError::Io { .. } => "check the path and that the file is readable".into(),
            ReadError::Empty { expected, .. } => {
                format!("start the file with a header row: {}", expected.join(","))
            }
            ReadError::MissingColumns { .. } => {
                "add the column(s) to the header row; columns may be in any order".into()
            }
            ReadError::UnknownColumns { known, .. } => {
                format!("columns this file takes: {}", known.join(", "))
            }
            ReadError::Csv { .. } => {
                "every row needs as many cells as the header; quote cells that contain commas"
                    .into()
            }
            ReadError::Toml { .. } => "fix the TOML at that line".into(),
            ReadError::Field { hint, .. } => hint.clone(),
            ReadError::NoWorkspace { .. } => {
                "run from inside a workspace, pass --workspace DIR, or create one with `limen init DIR`"
                    .into()
            }
        }
    }
}
