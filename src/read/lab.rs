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
    signatory: String,
    signatory_role: Option<String>,
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

#[derive(Debug, Clone)]
pub struct Lab {
    pub name: String,
    pub address: String,
    pub accreditation: Option<String>,
    pub signatory: String,
    pub signatory_role: String,
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
        Ok(Lab {
            detection_power,
            utc_offset,
            qc,
            qc_in_lab_file,
            name: f.name,
            address: f.address,
            accreditation: f.accreditation.filter(|a| !a.trim().is_empty()),
            signatory: f.signatory,
            signatory_role: f
                .signatory_role
                .unwrap_or_else(|| "Authorised signatory".into()),
            significant_figures,
            decision_rule: f.decision_rule.unwrap_or(DecisionRule::Simple),
            compare: f.compare.unwrap_or(Compare::Unrounded),
            not_detected_style: f.not_detected_style.unwrap_or(NotDetectedStyle::LessThan),
            page_size: f.page_size.unwrap_or(PageSize::A4),
            methods: f.methods,
        })
    }
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
}
