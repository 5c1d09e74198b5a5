//! QC acceptance windows: a `[qc]` table in lab.toml or a qc.toml, with
//! optional per-method overrides. Every default is common practice for ICP
//! metals methods; where it is usual is said beside it.

use super::vocab::Kind;
use rust_decimal::Decimal;
use serde::Deserialize;
use std::collections::BTreeMap;
use std::str::FromStr;

/// A number as written in TOML: integer, float or string, kept decimal.
#[derive(Debug, Clone, Deserialize)]
#[serde(untagged)]
pub enum Num {
    Int(i64),
    Float(f64),
    Text(String),
}

impl Num {
    fn decimal(&self, key: &str) -> Result<Decimal, String> {
        let text = match self {
            Num::Int(i) => i.to_string(),
            // Rust prints the shortest text that reads back as the same
            // float, which is the decimal the lab typed.
            Num::Float(f) => f.to_string(),
            Num::Text(t) => t.clone(),
        };
        Decimal::from_str(text.trim()).map_err(|_| format!("qc `{key}`: `{text}` is not a number"))
    }
}

#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CriteriaFile {
    lcs_recovery_pct: Option<[Num; 2]>,
    spike_recovery_pct: Option<[Num; 2]>,
    spike_parent_max_factor: Option<Num>,
    rpd_max_pct: Option<Num>,
    rpd_min_loq_factor: Option<Num>,
    ccv_recovery_pct: Option<[Num; 2]>,
    blank_limit_pct: Option<Num>,
    blank_sample_pct: Option<Num>,
    blank_affects_below_factor: Option<Num>,
}

#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct QcFile {
    required: Option<Vec<String>>,
    lcs_recovery_pct: Option<[Num; 2]>,
    spike_recovery_pct: Option<[Num; 2]>,
    spike_parent_max_factor: Option<Num>,
    rpd_max_pct: Option<Num>,
    rpd_min_loq_factor: Option<Num>,
    ccv_recovery_pct: Option<[Num; 2]>,
    blank_limit_pct: Option<Num>,
    blank_sample_pct: Option<Num>,
    blank_affects_below_factor: Option<Num>,
    #[serde(default)]
    methods: BTreeMap<String, CriteriaFile>,
}

/// The acceptance windows for one method.
#[derive(Debug, Clone, PartialEq)]
pub struct Criteria {
    pub lcs_recovery_pct: (Decimal, Decimal),
    pub spike_recovery_pct: (Decimal, Decimal),
    pub spike_parent_max_factor: Decimal,
    pub rpd_max_pct: Decimal,
    pub rpd_min_loq_factor: Decimal,
    pub ccv_recovery_pct: (Decimal, Decimal),
    pub blank_limit_pct: Decimal,
    pub blank_sample_pct: Decimal,
    pub blank_affects_below_factor: Decimal,
}

impl Default for Criteria {
    fn default() -> Criteria {
        let d = |n: i64| Decimal::from(n);
        Criteria {
            // LCS recovery 80–120 %: EPA SW-846 6010D and 6020B, section 9 (from memory).
            lcs_recovery_pct: (d(80), d(120)),
            // Matrix spike recovery 75–125 %: EPA SW-846 6010D / 6020B and EPA 200.7 / 200.8 (from memory).
            spike_recovery_pct: (d(75), d(125)),
            // Spike not evaluated when the sample exceeds 4 × the amount added: EPA 200.7 / 200.8 (from memory).
            spike_parent_max_factor: d(4),
            // Duplicate RPD ≤ 20 %: EPA SW-846 6010D / 6020B (from memory).
            rpd_max_pct: d(20),
            // RPD applies only at ≥ 5 × the LOQ, else |a − b| ≤ LOQ: common practice (from memory).
            rpd_min_loq_factor: d(5),
            // CCV 90–110 % of the true value: EPA SW-846 6010D / 6020B, EPA 200.7 (from memory).
            ccv_recovery_pct: (d(90), d(110)),
            // Method blank below the highest of MDL, 5 % of the limit and 5 % of the
            // lowest associated result: EPA SW-846 Chapter One (from memory).
            blank_limit_pct: d(5),
            blank_sample_pct: d(5),
            // Results below 10 × a contaminated blank are qualified: common practice (from memory).
            blank_affects_below_factor: d(10),
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct QcConfig {
    pub default: Criteria,
    pub methods: BTreeMap<String, Criteria>,
    /// QC kinds every analyte and method in a batch must have.
    pub required: Vec<Kind>,
}

impl Default for QcConfig {
    fn default() -> QcConfig {
        QcConfig {
            default: Criteria::default(),
            methods: BTreeMap::new(),
            // A method blank and an LCS per preparation batch: EPA SW-846 Chapter One (from memory).
            required: vec![Kind::MethodBlank, Kind::Lcs],
        }
    }
}

impl QcConfig {
    pub fn for_method(&self, method: &str) -> &Criteria {
        self.methods
            .iter()
            .find(|(m, _)| m.eq_ignore_ascii_case(method))
            .map(|(_, c)| c)
            .unwrap_or(&self.default)
    }
}

type Overrides<'a> = [(&'a str, Option<&'a Num>); 6];

fn apply(
    base: &Criteria,
    windows: [(&str, &Option<[Num; 2]>); 3],
    values: Overrides<'_>,
) -> Result<Criteria, String> {
    let mut c = base.clone();
    for (key, w) in windows {
        if let Some([lo, hi]) = w {
            let (lo, hi) = (lo.decimal(key)?, hi.decimal(key)?);
            if lo > hi || lo < Decimal::ZERO {
                return Err(format!(
                    "qc `{key}`: [{lo}, {hi}] is not a window (low, high)"
                ));
            }
            match key {
                "lcs_recovery_pct" => c.lcs_recovery_pct = (lo, hi),
                "spike_recovery_pct" => c.spike_recovery_pct = (lo, hi),
                _ => c.ccv_recovery_pct = (lo, hi),
            }
        }
    }
    for (key, v) in values {
        if let Some(v) = v {
            let v = v.decimal(key)?;
            if v <= Decimal::ZERO {
                return Err(format!("qc `{key}`: {v} must be greater than zero"));
            }
            match key {
                "spike_parent_max_factor" => c.spike_parent_max_factor = v,
                "rpd_max_pct" => c.rpd_max_pct = v,
                "rpd_min_loq_factor" => c.rpd_min_loq_factor = v,
                "blank_limit_pct" => c.blank_limit_pct = v,
                "blank_sample_pct" => c.blank_sample_pct = v,
                _ => c.blank_affects_below_factor = v,
            }
        }
    }
    Ok(c)
}

impl CriteriaFile {
    /// These overrides laid over `base`.
    fn apply(&self, base: &Criteria) -> Result<Criteria, String> {
        apply(
            base,
            [
                ("lcs_recovery_pct", &self.lcs_recovery_pct),
                ("spike_recovery_pct", &self.spike_recovery_pct),
                ("ccv_recovery_pct", &self.ccv_recovery_pct),
            ],
            [
                (
                    "spike_parent_max_factor",
                    self.spike_parent_max_factor.as_ref(),
                ),
                ("rpd_max_pct", self.rpd_max_pct.as_ref()),
                ("rpd_min_loq_factor", self.rpd_min_loq_factor.as_ref()),
                ("blank_limit_pct", self.blank_limit_pct.as_ref()),
                ("blank_sample_pct", self.blank_sample_pct.as_ref()),
                (
                    "blank_affects_below_factor",
                    self.blank_affects_below_factor.as_ref(),
                ),
            ],
        )
    }
}

impl QcFile {
    /// The lab-wide overrides, as the per-method tables hold theirs.
    fn lab_wide(&self) -> CriteriaFile {
        CriteriaFile {
            lcs_recovery_pct: self.lcs_recovery_pct.clone(),
            spike_recovery_pct: self.spike_recovery_pct.clone(),
            spike_parent_max_factor: self.spike_parent_max_factor.clone(),
            rpd_max_pct: self.rpd_max_pct.clone(),
            rpd_min_loq_factor: self.rpd_min_loq_factor.clone(),
            ccv_recovery_pct: self.ccv_recovery_pct.clone(),
            blank_limit_pct: self.blank_limit_pct.clone(),
            blank_sample_pct: self.blank_sample_pct.clone(),
            blank_affects_below_factor: self.blank_affects_below_factor.clone(),
        }
    }

    pub fn resolve(&self) -> Result<QcConfig, String> {
        let base = self.lab_wide().apply(&Criteria::default())?;
        let mut methods = BTreeMap::new();
        for (name, m) in &self.methods {
            let c = m
                .apply(&base)
                .map_err(|e| format!("[qc.methods.\"{name}\"] {e}"))?;
            methods.insert(name.clone(), c);
        }
        let required = match &self.required {
            None => QcConfig::default().required,
            Some(list) => list
                .iter()
                .map(|k| match Kind::parse(k) {
                    Some(Kind::Sample) | None => Err(format!(
                        "qc `required`: `{k}` is not a QC kind (method-blank, lcs, matrix-spike, matrix-spike-dup, duplicate, ccv, ccb)"
                    )),
                    Some(kind) => Ok(kind),
                })
                .collect::<Result<_, _>>()?,
        };
        Ok(QcConfig {
            default: base,
            methods,
            required,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<QcConfig, String> {
        let f: QcFile = toml::from_str(text).map_err(|e| e.to_string())?;
        f.resolve()
    }

    #[test]
    fn overrides_layer_over_defaults() {
        let c = parse(
            "lcs_recovery_pct = [85, 115]\nrequired = ['lcs']\n[methods.'200.8']\nrpd_max_pct = 10.5\n",
        )
        .unwrap();
        assert_eq!(
            c.default.lcs_recovery_pct,
            (Decimal::from(85), Decimal::from(115))
        );
        assert_eq!(c.default.rpd_max_pct, Decimal::from(20));
        let m = c.for_method("200.8");
        assert_eq!(m.rpd_max_pct, Decimal::new(105, 1));
        assert_eq!(m.lcs_recovery_pct, (Decimal::from(85), Decimal::from(115)));
        assert_eq!(c.required, vec![Kind::Lcs]);
        assert_eq!(c.for_method("6010D"), &c.default);
    }

    #[test]
    fn bad_windows_are_refused() {
        assert!(parse("lcs_recovery_pct = [120, 80]\n").is_err());
        assert!(parse("rpd_max_pct = 0\n").is_err());
        assert!(parse("required = ['sample']\n").is_err());
        assert!(parse("lcs_window = [80, 120]\n").is_err());
    }
}
