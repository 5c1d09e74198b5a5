//! Authorised release: who may release a report (a signatory, within their
//! scope) and whether the batch's review stands (ISO/IEC 17025:2017, 6.2.6
//! and 7.8.1.1). Pure rules over the report model, the lab's signatories
//! and the reviews the ledger holds; the CLI gathers those and prints.

use crate::ledger::Review;
use crate::read::{Batch, Lab, ReviewPolicy, Signatory, Workspace};
use crate::report::{Report, ReviewMark};

/// The exact inputs of a batch as (name, SHA-256), in a fixed order.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Inputs(pub Vec<(String, String)>);

impl Inputs {
    pub fn of(ws: &Workspace, batch: &Batch) -> Inputs {
        let sha = crate::read::sha256_hex;
        let mut v = vec![("lab.toml".to_string(), sha(ws.lab_text.as_bytes()))];
        if let Some(q) = &ws.qc_text {
            v.push(("qc.toml".into(), sha(q.as_bytes())));
        }
        v.push(("limits.csv".into(), ws.register_sha256.clone()));
        v.push(("specs.csv".into(), ws.specs_sha256.clone()));
        v.push(("batch.toml".into(), sha(batch.manifest_text.as_bytes())));
        let results = std::path::Path::new(&batch.results_file)
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| batch.results_file.clone());
        v.push((results, sha(&batch.results_bytes)));
        Inputs(v)
    }

    /// One `name sha256` line per file, as the ledger keeps them.
    pub fn text(&self) -> String {
        self.0.iter().map(|(n, s)| format!("{n} {s}\n")).collect()
    }

    pub fn parse(text: &str) -> Inputs {
        Inputs(
            text.lines()
                .filter_map(|l| l.rsplit_once(' '))
                .map(|(n, s)| (n.to_string(), s.to_string()))
                .collect(),
        )
    }

    /// The names whose content differs from `other`'s (added or removed
    /// files included).
    pub fn changed_since(&self, other: &Inputs) -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        for (n, s) in &self.0 {
            if !other.0.iter().any(|(m, t)| m == n && t == s) {
                out.push(n.clone());
            }
        }
        for (m, _) in &other.0 {
            if !self.0.iter().any(|(n, _)| n == m) && !out.contains(m) {
                out.push(m.clone());
            }
        }
        out
    }
}

/// Why a release is refused: each says what is missing.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Refusal {
    /// More than one signatory and no `--by`.
    WhoAuthorises {
        ids: Vec<String>,
    },
    UnknownSignatory {
        id: String,
        ids: Vec<String>,
    },
    OutOfScope {
        id: String,
        scope: String,
        /// (method, matrix) pairs outside the scope, first-seen order.
        outside: Vec<(String, String)>,
    },
    NoReview {
        policy: ReviewPolicy,
        /// For a re-issue: the time of the revision it replaces.
        since: Option<String>,
        /// Reviews that were of other inputs: (reviewer, date, files changed).
        stale: Vec<(String, String, Vec<String>)>,
    },
    NotIndependent {
        id: String,
    },
}

impl std::fmt::Display for Refusal {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Refusal::WhoAuthorises { ids } => write!(
                f,
                "the lab has {} signatories; say who authorises this release",
                ids.len()
            ),
            Refusal::UnknownSignatory { id, .. } => {
                write!(f, "`{id}` is not a signatory of this lab")
            }
            Refusal::OutOfScope { id, scope, outside } => {
                let pairs: Vec<String> = outside.iter().map(|(m, x)| format!("{m}/{x}")).collect();
                write!(f, "{id} may authorise {scope}, not {}", pairs.join(", "))
            }
            Refusal::NoReview {
                policy,
                since,
                stale,
            } => {
                write!(
                    f,
                    "the lab requires a review{} before release, and there is none {}",
                    if *policy == ReviewPolicy::Independent {
                        " by someone other than the signatory"
                    } else {
                        ""
                    },
                    match since {
                        Some(t) => format!("recorded since the revision it replaces ({t})"),
                        None => "of the batch's current inputs".to_string(),
                    }
                )?;
                for (who, on, changed) in stale {
                    write!(
                        f,
                        "; the review by {who} on {on} was of other inputs ({} changed since)",
                        changed.join(", ")
                    )?;
                }
                Ok(())
            }
            Refusal::NotIndependent { id } => write!(
                f,
                "the lab requires an independent review, and the only review of these inputs is by {id}, who authorises"
            ),
        }
    }
}

impl Refusal {
    pub fn hint(&self) -> String {
        match self {
            Refusal::WhoAuthorises { ids } | Refusal::UnknownSignatory { ids, .. } => {
                format!("pass --by ID, one of: {}", ids.join(", "))
            }
            Refusal::OutOfScope { .. } => {
                "ask a signatory whose scope covers these methods and matrices to authorise, or extend the scope in lab.toml's [[signatory]]".into()
            }
            Refusal::NoReview { .. } => {
                "have a colleague check the batch and run `limen review BATCH --by ID`, then issue again".into()
            }
            Refusal::NotIndependent { .. } => {
                "have another person review the batch (`limen review BATCH --by ID`), or another signatory authorise".into()
            }
        }
    }
}

impl From<Refusal> for crate::Error {
    fn from(r: Refusal) -> crate::Error {
        crate::Error::Refused {
            message: r.to_string(),
            hint: r.hint(),
        }
    }
}

/// Who authorises, and the review the report will print.
#[derive(Debug, Clone, PartialEq)]
pub struct Release {
    pub signatory: Signatory,
    pub review: Option<ReviewMark>,
}

/// Which reviews stand for this release.
#[derive(Debug, Clone, Copy)]
pub enum Reviewed<'a> {
    /// Those of exactly these inputs (an issue).
    Of(&'a Inputs),
    /// Those recorded after this UTC time (a re-issue, computed from the
    /// stored inputs and today's limits: reviewed after the revision it
    /// replaces).
    After(&'a str),
}

/// The signatory `by` names (or the only one), checked against the
/// report's methods and matrices and the lab's review policy. `reviews`
/// are the ledger's reviews of this report, newest first.
pub fn authorise(
    lab: &Lab,
    report: &Report,
    by: Option<&str>,
    reviews: &[Review],
    standing: Reviewed<'_>,
) -> Result<Release, Refusal> {
    let no_inputs = Inputs(Vec::new());
    let (inputs, after) = match standing {
        Reviewed::Of(i) => (i, None),
        Reviewed::After(t) => (&no_inputs, Some(t)),
    };
    let stands = |r: &Review| match after {
        Some(t) => r.reviewed_at.as_str() > t,
        None => Inputs::parse(&r.inputs).changed_since(inputs).is_empty(),
    };
    let ids = || lab.signatories.iter().map(|s| s.id.clone()).collect();
    let signatory = match by {
        None if lab.signatories.len() == 1 => lab.signatories[0].clone(),
        None => return Err(Refusal::WhoAuthorises { ids: ids() }),
        Some(id) => lab
            .signatory_by_id(id)
            .cloned()
            .ok_or_else(|| Refusal::UnknownSignatory {
                id: id.trim().to_string(),
                ids: ids(),
            })?,
    };
    let mut outside: Vec<(String, String)> = Vec::new();
    for r in &report.rows {
        let pair = (r.method.to_string(), r.matrix.to_string());
        if !signatory.covers(&pair.0, &pair.1) && !outside.contains(&pair) {
            outside.push(pair);
        }
    }
    if !outside.is_empty() {
        return Err(Refusal::OutOfScope {
            id: signatory.id.clone(),
            scope: signatory.scope_text(),
            outside,
        });
    }
    let current: Vec<&Review> = reviews.iter().filter(|r| stands(r)).collect();
    let by_another = current
        .iter()
        .copied()
        .find(|r| !r.reviewer.eq_ignore_ascii_case(&signatory.id));
    let chosen = match lab.review {
        ReviewPolicy::Independent => by_another,
        // Another person's review is printed in preference to one's own.
        _ => by_another.or(current.first().copied()),
    };
    if chosen.is_none() && lab.review != ReviewPolicy::Optional {
        if lab.review == ReviewPolicy::Independent && !current.is_empty() {
            return Err(Refusal::NotIndependent {
                id: signatory.id.clone(),
            });
        }
        let stale = reviews
            .iter()
            .filter(|_| after.is_none())
            .map(|r| {
                (
                    r.reviewer_name.clone(),
                    r.reviewed_at.get(..10).unwrap_or("").to_string(),
                    inputs.changed_since(&Inputs::parse(&r.inputs)),
                )
            })
            .collect();
        return Err(Refusal::NoReview {
            policy: lab.review,
            since: after.map(str::to_string),
            stale,
        });
    }
    Ok(Release {
        signatory,
        review: chosen.map(|r| ReviewMark {
            by: r.reviewer.clone(),
            name: r.reviewer_name.clone(),
            role: r.reviewer_role.clone(),
            at: r.reviewed_at.clone(),
            note: r.note.clone(),
        }),
    })
}

/// The ledger's record of `reviewer` having reviewed these inputs of the
/// report's batch at `at` (UTC).
pub fn review_record(
    report: &Report,
    batch: &Batch,
    inputs: &Inputs,
    reviewer: &Signatory,
    at: chrono::DateTime<chrono::Utc>,
    note: &str,
) -> Review {
    Review {
        report: report.header.report.clone(),
        batch: report.header.batch.clone(),
        batch_dir: batch.dir.display().to_string(),
        reviewer: reviewer.id.clone(),
        reviewer_name: reviewer.name.clone(),
        reviewer_role: reviewer.role.clone(),
        reviewed_at: at.format("%Y-%m-%dT%H:%M:%SZ").to_string(),
        note: note.trim().to_string(),
        inputs: inputs.text(),
    }
}

/// Puts the release on the report: the signatory's name and role print as
/// authorising, the review (if any) beside them.
pub fn apply(report: &mut Report, release: &Release) {
    let h = &mut report.header;
    h.signatory = release.signatory.name.clone();
    h.signatory_role = release.signatory.role.clone();
    h.authorised_by = release.signatory.id.clone();
    h.review = release.review.clone();
}

#[cfg(test)]
mod tests {
    use super::*;

    fn inputs(pairs: &[(&str, &str)]) -> Inputs {
        Inputs(
            pairs
                .iter()
                .map(|(n, s)| (n.to_string(), s.to_string()))
                .collect(),
        )
    }

    #[test]
    fn inputs_round_trip_through_their_text() {
        let i = inputs(&[("lab.toml", "aa"), ("results.csv", "bb")]);
        assert_eq!(i.text(), "lab.toml aa\nresults.csv bb\n");
        assert_eq!(Inputs::parse(&i.text()), i);
    }

    #[test]
    fn changed_inputs_are_named_added_and_removed_included() {
        let before = inputs(&[("lab.toml", "aa"), ("limits.csv", "bb"), ("r.csv", "cc")]);
        let after = inputs(&[("lab.toml", "aa"), ("limits.csv", "b2"), ("qc.toml", "dd")]);
        assert_eq!(
            after.changed_since(&before),
            ["limits.csv", "qc.toml", "r.csv"]
        );
        assert!(before.changed_since(&before).is_empty());
    }

    #[test]
    fn refusals_say_what_is_missing() {
        let r = Refusal::OutOfScope {
            id: "rokonjo".into(),
            scope: "6020B".into(),
            outside: vec![("6010D".into(), "paint".into())],
        };
        assert_eq!(
            r.to_string(),
            "rokonjo may authorise 6020B, not 6010D/paint"
        );
        let r = Refusal::NoReview {
            policy: ReviewPolicy::Required,
            since: None,
            stale: vec![(
                "Ruth Okonjo".into(),
                "2026-11-18".into(),
                vec!["limits.csv".into()],
            )],
        };
        assert_eq!(
            r.to_string(),
            "the lab requires a review before release, and there is none of the batch's current inputs; \
             the review by Ruth Okonjo on 2026-11-18 was of other inputs (limits.csv changed since)"
        );
        let r = Refusal::UnknownSignatory {
            id: "x".into(),
            ids: vec!["a".into(), "b".into()],
        };
        assert_eq!(r.hint(), "pass --by ID, one of: a, b");
    }
}
