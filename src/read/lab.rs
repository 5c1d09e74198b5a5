//! lab.toml: who the lab is and how it reports.

use super::error::ReadError;
use super::vocab::DecisionRule;
use serde::Deserialize;
use std::collections::BTreeMap;

#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Compare {
    Unrounded,
    Reported,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum NotDetectedStyle {
    LessThan,
    Nd,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
pub enum PageSize {
    A4,
    Letter,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct LabFile {
    name: String,
    address: String,
    accreditation: Option<String>,
    /// `[[signatory]]` tables, or (the older form) one name.
    signatory: toml::Spanned<toml::Value>,
    signatory_role: Option<String>,
    review: Option<ReviewPolicy>,
    significant_figures: Option<u32>,
    decision_rule: Option<DecisionRule>,
    compare: Option<Compare>,
    not_detected_style: Option<NotDetectedStyle>,
    page_size: Option<PageSize>,
    utc_offset: Option<String>,
    #[serde(default)]
    methods: BTreeMap<String, String>,
    qc: Option<super::qc_config::QcFile>,
    detection_power: Option<DetectionPowerFile>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct DetectionPowerFile {
    alpha: Option<f64>,
    beta: Option<f64>,
    weak_pass: Option<WeakPass>,
}

/// What a pass resting on too little detection power becomes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum WeakPass {
    /// Stays a pass, qualified `low-power` with its β.
    Qualify,
    /// Becomes inconclusive.
    Inconclusive,
}

/// The error rates behind detection power (Currie): α, the chance of a
/// false detection, sets the critical level; β, the chance of missing an
/// analyte at the detection limit, sets L_D and which passes are weak.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DetectionPower {
    pub alpha: f64,
    pub beta: f64,
    pub weak_pass: WeakPass,
}

impl Default for DetectionPower {
    fn default() -> DetectionPower {
        // α = β = 0.01: the MDL's own 99 % (40 CFR 136 Appendix B) on both sides.
        DetectionPower {
            alpha: 0.01,
            beta: 0.01,
            weak_pass: WeakPass::Qualify,
        }
    }
}

/// Whether a batch must be reviewed before it is released.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum ReviewPolicy {
    /// A review is recorded and printed when there is one.
    #[default]
    Optional,
    /// Release needs a review of the batch's current inputs.
    Required,
    /// As `Required`, by someone other than the person who authorises.
    Independent,
}

/// A person who may authorise release (ISO/IEC 17025:2017, 6.2.6), and
/// within what.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Signatory {
    pub id: String,
    pub name: String,
    pub role: String,
    pub scope: Vec<ScopeEntry>,
}

/// One entry of a signatory's scope: a method and a matrix, either of
/// which may be any (`*`).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ScopeEntry {
    pub method: Option<String>,
    pub matrix: Option<String>,
}

impl ScopeEntry {
    /// `*`, `METHOD`, `METHOD/MATRIX`, `*/MATRIX` or `METHOD/*`.
    pub fn parse(text: &str) -> Option<ScopeEntry> {
        let t = text.trim();
        let (method, matrix) = match t.split_once('/') {
            Some((a, b)) => (a.trim(), b.trim()),
            None => (t, "*"),
        };
        let part = |p: &str| -> Option<Option<String>> {
            match p {
                "" => None,
                "*" => Some(None),
                p if p.contains(['*', '/']) => None,
                p => Some(Some(p.to_string())),
            }
        };
        Some(ScopeEntry {
            method: part(method)?,
            matrix: part(matrix)?,
        })
    }

    pub fn covers(&self, method: &str, matrix: &str) -> bool {
        let ok = |want: &Option<String>, have: &str| {
            want.as_deref().is_none_or(|w| w.eq_ignore_ascii_case(have))
        };
        ok(&self.method, method) && ok(&self.matrix, matrix)
    }
}

impl std::fmt::Display for ScopeEntry {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match (&self.method, &self.matrix) {
            (None, None) => write!(f, "*"),
            (Some(m), None) => write!(f, "{m}"),
            (m, Some(x)) => write!(f, "{}/{x}", m.as_deref().unwrap_or("*")),
        }
    }
}

impl Signatory {
    pub fn covers(&self, method: &str, matrix: &str) -> bool {
        self.scope.iter().any(|e| e.covers(method, matrix))
    }

    pub fn scope_text(&self) -> String {
        self.scope
            .iter()
            .map(|e| e.to_string())
            .collect::<Vec<_>>()
            .join(", ")
    }
}

#[derive(Debug, Clone)]
pub struct Lab {
    pub name: String,
    pub address: String,
    pub accreditation: Option<String>,
    /// The first signatory's name and role: what a report names until
    /// someone authorises it.
    pub signatory: String,
    pub signatory_role: String,
    /// Everyone who may authorise release, in file order.
    pub signatories: Vec<Signatory>,
    /// Set when lab.toml names its signatory the older way (`signatory = "..."`).
    pub signatory_is_old_form: bool,
    pub review: ReviewPolicy,
    pub significant_figures: u32,
    pub decision_rule: DecisionRule,
    pub compare: Compare,
    pub not_detected_style: NotDetectedStyle,
    pub page_size: PageSize,
    /// The lab's local offset from UTC, e.g. "+01:00", recorded with each issue time.
    pub utc_offset: chrono::FixedOffset,
    /// Method id (as used in the register) -> description for certificates.
    pub methods: BTreeMap<String, String>,
    /// QC windows from lab.toml's [qc]; the workspace may take them from qc.toml instead.
    pub qc: super::qc_config::QcConfig,
    pub qc_in_lab_file: bool,
    pub detection_power: DetectionPower,
}

impl Lab {
    /// The signatory of this id (ids are compared without regard to case).
    pub fn signatory_by_id(&self, id: &str) -> Option<&Signatory> {
        self.signatories
            .iter()
            .find(|s| s.id.eq_ignore_ascii_case(id.trim()))
    }

    pub fn parse(file: &str, text: &str) -> Result<Lab, ReadError> {
        let f: LabFile = super::toml_util::parse(file, text)?;
        let significant_figures = f.significant_figures.unwrap_or(3);
        if !(1..=10).contains(&significant_figures) {
            let line = text
                .lines()
                .position(|l| l.trim_start().starts_with("significant_figures"))
                .map(|i| i as u64 + 1)
                .unwrap_or(1);
            return Err(ReadError::field(
                super::Loc::new(file, line, "significant_figures"),
                format!("{significant_figures} is out of range"),
                "use a whole number from 1 to 10 (3 is usual)",
            ));
        }
        let qc_in_lab_file = f.qc.is_some();
        let qc = match &f.qc {
            None => Default::default(),
            Some(q) => q.resolve().map_err(|problem| {
                let line = text
                    .lines()
                    .position(|l| l.trim_start().starts_with("[qc"))
                    .map(|i| i as u64 + 1)
                    .unwrap_or(1);
                ReadError::Toml {
                    file: file.to_string(),
                    line,
                    message: problem,
                }
            })?,
        };
        let utc_offset = match &f.utc_offset {
            None => chrono::FixedOffset::east_opt(0),
            Some(t) => parse_offset(t),
        }
        .ok_or_else(|| {
            let line = text
                .lines()
                .position(|l| l.trim_start().starts_with("utc_offset"))
                .map(|i| i as u64 + 1)
                .unwrap_or(1);
            ReadError::field(
                super::Loc::new(file, line, "utc_offset"),
                "not an offset from UTC",
                "write it as \"+01:00\" or \"-05:00\"",
            )
        })?;
        let detection_power = detection_power(file, text, f.detection_power.as_ref())?;
        let signatory_is_old_form = f.signatory.get_ref().is_str();
        let signatories = signatories(file, text, &f.signatory, f.signatory_role.as_deref())?;
        Ok(Lab {
            detection_power,
            utc_offset,
            qc,
            qc_in_lab_file,
            name: f.name,
            address: f.address,
            accreditation: f.accreditation.filter(|a| !a.trim().is_empty()),
            signatory: signatories[0].name.clone(),
            signatory_role: signatories[0].role.clone(),
            signatories,
            signatory_is_old_form,
            review: f.review.unwrap_or_default(),
            significant_figures,
            decision_rule: f.decision_rule.unwrap_or(DecisionRule::Simple),
            compare: f.compare.unwrap_or(Compare::Unrounded),
            not_detected_style: f.not_detected_style.unwrap_or(NotDetectedStyle::LessThan),
            page_size: f.page_size.unwrap_or(PageSize::A4),
            methods: f.methods,
        })
    }
}

const DEFAULT_ROLE: &str = "Authorised signatory";

/// The signatories: `[[signatory]]` tables with id, name, role and scope,
/// or the older single name (with `signatory_role`), which becomes one
/// signatory of id `default` and scope `*`.
fn signatories(
    file: &str,
    text: &str,
    value: &toml::Spanned<toml::Value>,
    old_role: Option<&str>,
) -> Result<Vec<Signatory>, ReadError> {
    use toml::Value;
    let at_line = |line: u64, field: &str| super::Loc::new(file, line, field);
    let start = super::toml_util::line_at(text, value.span().start);
    let tables = match value.get_ref() {
        Value::String(name) => {
            if name.trim().is_empty() {
                return Err(ReadError::field(
                    at_line(start, "signatory"),
                    "empty",
                    "name the person who authorises release",
                ));
            }
            return Ok(vec![Signatory {
                id: "default".into(),
                name: name.clone(),
                role: old_role.unwrap_or(DEFAULT_ROLE).to_string(),
                scope: vec![ScopeEntry {
                    method: None,
                    matrix: None,
                }],
            }]);
        }
        Value::Array(items) if !items.is_empty() => items,
        _ => {
            return Err(ReadError::field(
                at_line(start, "signatory"),
                "needs one or more [[signatory]] tables",
                "give each person who may authorise release as [[signatory]] with id, name, role and scope",
            ));
        }
    };
    if old_role.is_some() {
        return Err(ReadError::field(
            at_line(start, "signatory_role"),
            "given beside [[signatory]] tables",
            "give each signatory's role as `role` in its own table",
        ));
    }
    // Each table's errors point at its own [[signatory]] header.
    let headers: Vec<u64> = text
        .lines()
        .enumerate()
        .filter(|(_, l)| l.trim_start().starts_with("[[signatory]]"))
        .map(|(i, _)| i as u64 + 1)
        .collect();
    let mut out: Vec<Signatory> = Vec::new();
    for (i, item) in tables.iter().enumerate() {
        let line = headers.get(i).copied().unwrap_or(start);
        let Some(t) = item.as_table() else {
            return Err(ReadError::field(
                at_line(line, "signatory"),
                "not a table",
                "write each signatory as a [[signatory]] table",
            ));
        };
        if let Some(k) = t
            .keys()
            .find(|k| !["id", "name", "role", "scope"].contains(&k.as_str()))
        {
            return Err(ReadError::field(
                at_line(line, k),
                "unknown key in a [[signatory]] table",
                "a signatory has id, name, role and scope",
            ));
        }
        let text_of = |key: &str| -> Result<String, ReadError> {
            match t.get(key).and_then(Value::as_str).map(str::trim) {
                Some(v) if !v.is_empty() => Ok(v.to_string()),
                _ => Err(ReadError::field(
                    at_line(line, key),
                    "missing or empty in this [[signatory]] table",
                    match key {
                        "id" => "give a short id without spaces, used as `--by ID`",
                        _ => "give the person's name as it is to be printed",
                    },
                )),
            }
        };
        let id = text_of("id")?;
        if id.chars().any(char::is_whitespace) {
            return Err(ReadError::field(
                at_line(line, "id"),
                format!("`{id}` contains a space"),
                "give a short id without spaces, used as `--by ID`",
            ));
        }
        if let Some(j) = out.iter().position(|s| s.id.eq_ignore_ascii_case(&id)) {
            return Err(ReadError::field(
                at_line(line, "id"),
                format!("`{id}` is used by signatory {} already", j + 1),
                "give each signatory an id of their own",
            ));
        }
        let name = text_of("name")?;
        let role = match t.get("role") {
            None => DEFAULT_ROLE.to_string(),
            Some(_) => text_of("role")?,
        };
        let scope_hint = "list what the person may authorise: \"*\" for everything, or entries such as \"6010D\" (a method) or \"6020B/ceramic-leachate\" (a method and a matrix)";
        let entries: Vec<&str> = match t.get("scope") {
            Some(Value::String(s)) => vec![s.as_str()],
            Some(Value::Array(a)) if !a.is_empty() => {
                let mut v = Vec::new();
                for e in a {
                    match e.as_str() {
                        Some(s) => v.push(s),
                        None => {
                            return Err(ReadError::field(
                                at_line(line, "scope"),
                                "every entry must be text",
                                scope_hint,
                            ));
                        }
                    }
                }
                v
            }
            _ => {
                return Err(ReadError::field(
                    at_line(line, "scope"),
                    "missing or empty in this [[signatory]] table",
                    scope_hint,
                ));
            }
        };
        let mut scope = Vec::new();
        for e in entries {
            scope.push(ScopeEntry::parse(e).ok_or_else(|| {
                ReadError::field(
                    at_line(line, "scope"),
                    format!("`{e}` is not a scope entry"),
                    scope_hint,
                )
            })?);
        }
        out.push(Signatory {
            id,
            name,
            role,
            scope,
        });
    }
    Ok(out)
}

fn detection_power(
    file: &str,
    text: &str,
    f: Option<&DetectionPowerFile>,
) -> Result<DetectionPower, ReadError> {
    let d = DetectionPower::default();
    let Some(f) = f else { return Ok(d) };
    let p = DetectionPower {
        alpha: f.alpha.unwrap_or(d.alpha),
        beta: f.beta.unwrap_or(d.beta),
        weak_pass: f.weak_pass.unwrap_or(d.weak_pass),
    };
    for (name, v) in [("alpha", p.alpha), ("beta", p.beta)] {
        if !(v > 0.0 && v < 0.5) {
            let line = text
                .lines()
                .position(|l| l.trim_start().starts_with(name))
                .map_or(1, |i| i as u64 + 1);
            return Err(ReadError::field(
                super::Loc::new(file, line, name),
                format!("{v} is not a probability between 0 and 0.5"),
                "use a small error rate such as 0.05 or 0.01 (the default)",
            ));
        }
    }
    Ok(p)
}

fn parse_offset(t: &str) -> Option<chrono::FixedOffset> {
    let t = t.trim();
    let (sign, rest) = match t.as_bytes().first()? {
        b'+' => (1, &t[1..]),
        b'-' => (-1, &t[1..]),
        _ => return None,
    };
    let (h, m) = rest.split_once(':')?;
    let (h, m): (i32, i32) = (h.parse().ok()?, m.parse().ok()?);
    if !(0..=14).contains(&h) || !(0..60).contains(&m) {
        return None;
    }
    chrono::FixedOffset::east_opt(sign * (h * 3600 + m * 60))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_apply() {
        let lab = Lab::parse("lab.toml", "name='L'\naddress='A'\nsignatory='S'\n").unwrap();
        assert_eq!(lab.significant_figures, 3);
        assert_eq!(lab.decision_rule, DecisionRule::Simple);
        assert_eq!(lab.compare, Compare::Unrounded);
        assert_eq!(lab.not_detected_style, NotDetectedStyle::LessThan);
        assert_eq!(lab.page_size, PageSize::A4);
    }

    #[test]
    fn utc_offsets() {
        let lab = |o: &str| {
            Lab::parse(
                "lab.toml",
                &format!("name='L'\naddress='A'\nsignatory='S'\nutc_offset='{o}'\n"),
            )
        };
        assert_eq!(lab("+01:00").unwrap().utc_offset.local_minus_utc(), 3600);
        assert_eq!(lab("-05:30").unwrap().utc_offset.local_minus_utc(), -19800);
        assert!(lab("01:00").is_err());
        assert!(lab("+15:00").is_err());
    }

    #[test]
    fn errors_carry_the_line() {
        let e = Lab::parse(
            "lab.toml",
            "name='L'\naddress='A'\nsignatory='S'\ndecision_rule='strict'\n",
        )
        .unwrap_err();
        assert!(e.to_string().starts_with("lab.toml:4:"), "{e}");
        let e = Lab::parse("lab.toml", "name='L'\naddress='A'\nsignatry='S'\n").unwrap_err();
        assert!(e.to_string().starts_with("lab.toml:3:"), "{e}");
        let e = Lab::parse(
            "lab.toml",
            "name='L'\naddress='A'\nsignatory='S'\nsignificant_figures = 0\n",
        )
        .unwrap_err();
        assert!(
            e.to_string()
                .starts_with("lab.toml:4: field `significant_figures`"),
            "{e}"
        );
    }

    const BASE: &str = "name='L'\naddress='A'\n";

    #[test]
    fn the_older_signatory_is_one_with_everything_in_scope() {
        let lab = Lab::parse(
            "lab.toml",
            &format!("{BASE}signatory='S'\nsignatory_role='R'\n"),
        )
        .unwrap();
        assert!(lab.signatory_is_old_form);
        assert_eq!(lab.signatories.len(), 1);
        let s = &lab.signatories[0];
        assert_eq!(
            (s.id.as_str(), s.name.as_str(), s.role.as_str()),
            ("default", "S", "R")
        );
        assert!(s.covers("6010D", "paint"));
        assert_eq!(lab.review, ReviewPolicy::Optional);
    }

    #[test]
    fn signatory_tables_with_scopes() {
        let lab = Lab::parse(
            "lab.toml",
            &format!(
                "{BASE}review='independent'\n[[signatory]]\nid='a'\nname='Ann'\nrole='TM'\nscope='*'\n\
                 [[signatory]]\nid='b'\nname='Ben'\nscope=['6020B', '6010D/paint', '*/food-simulant']\n"
            ),
        )
        .unwrap();
        assert!(!lab.signatory_is_old_form);
        assert_eq!(lab.review, ReviewPolicy::Independent);
        assert_eq!(
            (lab.signatory.as_str(), lab.signatory_role.as_str()),
            ("Ann", "TM")
        );
        let b = &lab.signatories[1];
        assert_eq!(b.role, "Authorised signatory");
        assert_eq!(b.scope_text(), "6020B, 6010D/paint, */food-simulant");
        assert!(b.covers("6020b", "ceramic-leachate"));
        assert!(b.covers("6010D", "Paint"));
        assert!(!b.covers("6010D", "soil"));
        assert!(b.covers("7010", "food-simulant"));
    }

    #[test]
    fn bad_signatory_tables_name_their_line() {
        let err = |body: &str| {
            Lab::parse("lab.toml", &format!("{BASE}{body}"))
                .unwrap_err()
                .to_string()
        };
        let one = "[[signatory]]\nid='a'\nname='Ann'\nscope='*'\n";
        assert_eq!(
            err(&format!(
                "{one}[[signatory]]\nid='A'\nname='Al'\nscope='*'\n"
            )),
            "lab.toml:7: field `id`: `A` is used by signatory 1 already"
        );
        assert_eq!(
            err("[[signatory]]\nid='a'\nname='Ann'\n"),
            "lab.toml:3: field `scope`: missing or empty in this [[signatory]] table"
        );
        assert_eq!(
            err("[[signatory]]\nid='a b'\nname='Ann'\nscope='*'\n"),
            "lab.toml:3: field `id`: `a b` contains a space"
        );
        assert_eq!(
            err("[[signatory]]\nid='a'\nname='Ann'\nscope=['6010D/*/x']\n"),
            "lab.toml:3: field `scope`: `6010D/*/x` is not a scope entry"
        );
        assert_eq!(
            err("[[signatory]]\nid='a'\nname=''\nscope='*'\n"),
            "lab.toml:3: field `name`: missing or empty in this [[signatory]] table"
        );
        assert_eq!(
            err("[[signatory]]\nid='a'\nname='Ann'\nscope='*'\nemail='x'\n"),
            "lab.toml:3: field `email`: unknown key in a [[signatory]] table"
        );
        assert!(err(&format!("signatory_role='R'\n{one}")).contains("field `signatory_role`"));
        assert!(err("signatory=''\n").starts_with("lab.toml:3: field `signatory`: empty"));
        assert!(err("signatory=[]\n").contains("needs one or more [[signatory]] tables"));
        // Missing entirely: the TOML reader names the key.
        assert!(err("").contains("signatory"), "{}", err(""));
    }
}
