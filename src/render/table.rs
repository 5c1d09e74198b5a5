//! The terminal view of a report for `limen check`: an aligned table of the
//! client results, then what blocks the batch.

use crate::classify::Verdict;
use crate::numeric::plain;
use crate::report::{Header, Report, ReportRow};

const HEAD: [&str; 7] = [
    "lab id", "analyte", "result", "unit", "state", "limit", "verdict",
];

fn paint(text: &str, verdict: Option<Verdict>, colour: bool) -> String {
    if !colour {
        return text.to_string();
    }
    let code = match verdict {
        Some(Verdict::Pass) => "32",
        Some(Verdict::Fail) => "1;31",
        Some(Verdict::ConditionalPass | Verdict::ConditionalFail | Verdict::Inconclusive) => "33",
        None => return text.to_string(),
    };
    format!("\x1b[{code}m{text}\x1b[0m")
}

fn width(s: &str) -> usize {
    s.chars().count()
}

fn qc_section(report: &Report) -> String {
    if report.qc_checks.is_empty() {
        return "QC: no QC rows in this batch.\n\n".into();
    }
    let mut out = String::from("QC\n");
    let rows: Vec<[String; 6]> = report
        .qc_checks
        .iter()
        .map(|c| {
            [
                c.check.to_string(),
                format!("{} {}", c.analyte, c.method),
                c.rows.clone(),
                c.value.clone(),
                c.window.clone(),
                if c.note.is_empty() {
                    c.outcome.name().to_string()
                } else {
                    format!("{} ({})", c.outcome.name(), c.note)
                },
            ]
        })
        .collect();
    let mut widths = [0usize; 6];
    for r in &rows {
        for (w, c) in widths.iter_mut().zip(r) {
            *w = (*w).max(width(c));
        }
    }
    for r in &rows {
        let mut line = String::from("  ");
        for (i, c) in r.iter().enumerate() {
            let pad = widths[i] - width(c);
            if i == 3 {
                line.push_str(&" ".repeat(pad));
                line.push_str(c);
            } else {
                line.push_str(c);
                line.push_str(&" ".repeat(pad));
            }
            line.push_str("  ");
        }
        out.push_str(line.trim_end());
        out.push('\n');
    }
    if let Some(reason) = &report.qc_exception {
        out.push_str(&format!("  QC exception accepted: {reason}\n"));
    }
    out.push('\n');
    out
}

/// The cells of one result's line.
fn cells(r: &ReportRow) -> [String; 7] {
    [
        r.lab_id.clone(),
        r.analyte.to_string(),
        r.reported.clone(),
        r.unit.symbol().to_string(),
        r.state.name().to_string(),
        match (&r.spec_limit, &r.spec) {
            (Some(l), Some(s)) => format!("{} ({s})", plain(*l)),
            _ => String::new(),
        },
        match (r.verdict, r.qualifiers.is_empty()) {
            (Some(v), true) => v.name().to_string(),
            (Some(v), false) => format!("{} [{}]", v.name(), r.qualifiers.join("; ")),
            (None, true) => String::new(),
            (None, false) => format!("[{}]", r.qualifiers.join("; ")),
        },
    ]
}

/// The results table, written as rows arrive once the column widths are
/// known: `widen` over every row, then `head`, `row` for each, and `tail`.
pub struct Table {
    widths: [usize; 7],
    colour: bool,
    rows: usize,
}

impl Table {
    pub fn new(colour: bool) -> Table {
        Table {
            widths: HEAD.map(width),
            colour,
            rows: 0,
        }
    }

    pub fn widen(&mut self, r: &ReportRow) {
        for (w, c) in self.widths.iter_mut().zip(&cells(r)) {
            *w = (*w).max(width(c));
        }
    }

    fn line(&self, cols: [&str; 7], verdict: Option<Verdict>) -> String {
        let mut s = String::new();
        for (i, c) in cols.iter().enumerate() {
            let pad = self.widths[i] - width(c).min(self.widths[i]);
            // Results are numbers: right-align them so the digits line up.
            if i == 2 {
                s.push_str(&" ".repeat(pad));
                s.push_str(c);
            } else if i == 6 {
                s.push_str(&paint(c, verdict, self.colour));
            } else {
                s.push_str(c);
                s.push_str(&" ".repeat(pad));
            }
            if i + 1 < cols.len() {
                s.push_str("  ");
            }
        }
        s.trim_end().to_string() + "\n"
    }

    /// The title and the column heads.
    pub fn head(&self, h: &Header) -> String {
        let mut out = format!(
            "{} rev {} · batch {} · {} · decision rule: {}\n\n",
            h.report,
            h.revision,
            h.batch,
            h.client_name,
            h.decision_rule.name()
        );
        out.push_str(&self.line(HEAD, None));
        out.push_str(
            &self.line(
                self.widths
                    .map(|w| "─".repeat(w))
                    .each_ref()
                    .map(|s| s.as_str()),
                None,
            ),
        );
        out
    }

    pub fn row(&mut self, r: &ReportRow) -> String {
        self.rows += 1;
        let c = cells(r);
        self.line(c.each_ref().map(|s| s.as_str()), r.verdict)
    }

    /// QC and what blocks the batch, from the finished report model.
    pub fn tail(&self, report: &Report) -> String {
        let mut out = String::new();
        if self.rows == 0 {
            out.push_str("(no client results)\n");
        }
        out.push('\n');
        out.push_str(&qc_section(report));
        if report.problems.is_empty() {
            out.push_str(&format!(
                "{} client result(s); no blocking problems: the batch can be issued.\n",
                self.rows
            ));
        } else {
            out.push_str(&format!(
                "BLOCKED: {} problem(s) must be resolved before this batch is issued:\n",
                report.problems.len()
            ));
            for p in &report.problems {
                out.push_str(&format!("  - {p}\n    hint: {}\n", p.hint));
            }
        }
        out
    }
}

pub fn render(report: &Report, colour: bool) -> String {
    let mut t = Table::new(colour);
    for r in &report.rows {
        t.widen(r);
    }
    let mut out = t.head(&report.header);
    for r in &report.rows {
        out.push_str(&t.row(r));
    }
    out.push_str(&t.tail(report));
    out
}
