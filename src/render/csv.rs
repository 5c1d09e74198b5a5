//! The report CSV: one row per client result, a fixed header, exact and
//! rounded values side by side.

use super::Render;
use crate::numeric::plain;
use crate::report::{Report, ReportRow};

pub const HEADER: [&str; 22] = [
    "report",
    "revision",
    "lab_id",
    "client_id",
    "description",
    "analyte",
    "matrix",
    "method",
    "analyzed_on",
    "reported",
    "value",
    "value_unrounded",
    "unit",
    "state",
    "mdl",
    "loq",
    "dilution",
    "spec",
    "spec_limit",
    "verdict",
    "qualifiers",
    "limits_row",
];

pub struct Csv;

/// Text that a spreadsheet would run as a formula gets a leading apostrophe.
pub fn neutralise(text: &str) -> std::borrow::Cow<'_, str> {
    match text.chars().next() {
        Some('=' | '+' | '-' | '@' | '\t' | '\r') => format!("'{text}").into(),
        _ => text.into(),
    }
}

fn record(report: &Report, r: &ReportRow) -> [String; 22] {
    let t = |s: &str| neutralise(s).into_owned();
    [
        t(&report.header.report),
        report.header.revision.to_string(),
        t(&r.lab_id),
        t(&r.client_id),
        t(&r.description),
        t(&r.analyte),
        t(&r.matrix),
        t(&r.method),
        r.analyzed_on.to_string(),
        t(&r.reported),
        r.value.map(|v| v.to_string()).unwrap_or_default(),
        plain(r.value_unrounded),
        t(r.unit.symbol()),
        r.state.name().to_string(),
        r.mdl.to_string(),
        r.loq.to_string(),
        plain(r.dilution),
        t(r.spec.as_deref().unwrap_or("")),
        r.spec_limit.map(plain).unwrap_or_default(),
        r.verdict.map(|v| v.name()).unwrap_or("").to_string(),
        t(&r.qualifiers.join(";")),
        t(&r.limits_row),
    ]
}

impl Render for Csv {
    fn extension(&self) -> &'static str {
        "csv"
    }

    fn render(&self, report: &Report) -> Vec<u8> {
        let mut w = ::csv::WriterBuilder::new()
            .terminator(::csv::Terminator::Any(b'\n'))
            .from_writer(Vec::with_capacity(160 * (report.rows.len() + 1)));
        // Writing to a Vec cannot fail.
        let _ = w.write_record(HEADER);
        for r in &report.rows {
            let _ = w.write_record(record(report, r));
        }
        w.into_inner().unwrap_or_default()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formula_text_is_neutralised() {
        assert_eq!(neutralise("=HYPERLINK(1)"), "'=HYPERLINK(1)");
        assert_eq!(neutralise("+1"), "'+1");
        assert_eq!(neutralise("-x"), "'-x");
        assert_eq!(neutralise("@SUM"), "'@SUM");
        assert_eq!(neutralise("\tx"), "'\tx");
        assert_eq!(neutralise("Paint chip"), "Paint chip");
        assert_eq!(neutralise("< 0.600"), "< 0.600");
    }
}
