//! The words every reader shares: what a results row is (its kind) and how
//! a result is judged against a limit (the decision rule). Readers import
//! this module; it imports none of them.

use serde::Deserialize;

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Kind {
    Sample,
    MethodBlank,
    Lcs,
    MatrixSpike,
    MatrixSpikeDup,
    Duplicate,
    Ccv,
    Ccb,
}

impl Kind {
    pub const ALL: [Kind; 8] = [
        Kind::Sample,
        Kind::MethodBlank,
        Kind::Lcs,
        Kind::MatrixSpike,
        Kind::MatrixSpikeDup,
        Kind::Duplicate,
        Kind::Ccv,
        Kind::Ccb,
    ];

    pub fn name(self) -> &'static str {
        match self {
            Kind::Sample => "sample",
            Kind::MethodBlank => "method-blank",
            Kind::Lcs => "lcs",
            Kind::MatrixSpike => "matrix-spike",
            Kind::MatrixSpikeDup => "matrix-spike-dup",
            Kind::Duplicate => "duplicate",
            Kind::Ccv => "ccv",
            Kind::Ccb => "ccb",
        }
    }

    pub fn parse(text: &str) -> Option<Kind> {
        let t = text.trim();
        Kind::ALL
            .into_iter()
            .find(|k| k.name().eq_ignore_ascii_case(t))
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum DecisionRule {
    /// Simple acceptance: the measured value itself against the limit.
    Simple,
    /// ILAC-G8:09/2019 guard band with w = U (k = 2).
    Guarded,
}

impl DecisionRule {
    pub fn name(self) -> &'static str {
        match self {
            DecisionRule::Simple => "simple",
            DecisionRule::Guarded => "guarded",
        }
    }
}
