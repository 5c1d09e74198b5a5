use super::csvtable::parse_date;
use super::error::{Loc, ReadError};
use chrono::NaiveDate;

pub fn line_at(text: &str, offset: usize) -> u64 {
    text.as_bytes()[..offset.min(text.len())]
        .iter()
        .filter(|b| **b == b'\n')
        .count() as u64
        + 1
}

pub fn parse<T: serde::de::DeserializeOwned>(file: &str, text: &str) -> Result<T, ReadError> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    toml::from_str(text).map_err(|e| ReadError::Toml {
        file: file.to_string(),
        line: e.span().map(|s| line_at(text, s.start)).unwrap_or(1),
        message: e.message().trim().to_string(),
    })
}

/// A date given either as a TOML date or as an ISO 8601 string.
pub fn date(
    file: &str,
    text: &str,
    key: &str,
    value: &toml::Spanned<toml::Value>,
) -> Result<NaiveDate, ReadError> {
    let parsed = match value.get_ref() {
        toml::Value::Datetime(dt) => match (dt.date, dt.time) {
            (Some(d), None) => NaiveDate::from_ymd_opt(d.year as i32, d.month as u32, d.day as u32),
            _ => None,
        },
        toml::Value::String(s) => parse_date(s),
        _ => None,
    };
    parsed.ok_or_else(|| {
        ReadError::field(
            Loc::new(file, line_at(text, value.span().start), key),
            match value.get_ref() {
                toml::Value::String(s) => format!("`{s}` is not a date"),
                toml::Value::Datetime(dt) => format!("`{dt}` is not a plain date"),
                other => format!("a {} is not a date", other.type_str()),
            },
            "write the date as 2026-11-20 (a TOML date) or \"2026-11-20\"",
        )
    })
}
