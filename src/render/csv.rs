//! The report CSV: one row per client result, a fixed header, exact and
//! rounded values side by side.

use super::Render;
use crate::numeric::{DECIMAL_ROOM, decimal_ascii, plain_ascii};
use crate::report::{Report, ReportRow};
use rust_decimal::Decimal;

pub const HEADER: [&str; 25] = [
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
    "uncertainty",
    "ld",
    "beta_at_limit",
];

pub struct Csv;

/// Text that a spreadsheet would run as a formula gets a leading apostrophe.
pub fn neutralise(text: &str) -> std::borrow::Cow<'_, str> {
    match text.chars().next() {
        Some('=' | '+' | '-' | '@' | '\t' | '\r') => format!("'{text}").into(),
        _ => text.into(),
    }
}

/// What every row of one report's CSV repeats.
struct Common<'a> {
    qc_exception: Option<&'a str>,
    /// The report and revision cells, written once.
    prefix: Line,
}

impl Common<'_> {
    fn new<'a>(report: &str, revision: u32, qc_exception: Option<&'a str>) -> Common<'a> {
        let mut prefix = Line::default();
        prefix.text(report);
        prefix.unquoted(revision.to_string().as_bytes());
        Common {
            qc_exception,
            prefix,
        }
    }
}

/// The cells of shared names (analyte, matrix, method, spec, limits row),
/// by the name's address: a batch has a few dozen, met on every row, and
/// rows share one allocation per name. Each name is kept, so its address
/// stands for it while it is remembered.
#[derive(Default)]
struct Names {
    cells:
        std::collections::HashMap<usize, (std::rc::Rc<str>, Vec<u8>), crate::fasthash::BuildWords>,
}

/// Names remembered before the memory starts again: a bound on memory for a
/// file of many distinct names.
const NAMES_MOST: usize = 4096;

impl Names {
    fn cell(&mut self, line: &mut Line, name: &std::rc::Rc<str>) {
        let address = std::rc::Rc::as_ptr(name) as *const u8 as usize;
        if let Some((_, cell)) = self.cells.get(&address) {
            line.unquoted(cell);
            return;
        }
        let start = line.buf.len();
        line.text(name);
        // The comma before the cell is not the cell's.
        let from = if line.cells > 1 { start + 1 } else { start };
        if self.cells.len() >= NAMES_MOST {
            self.cells.clear();
        }
        self.cells
            .insert(address, (name.clone(), line.buf[from..].to_vec()));
    }
}

/// One CSV line, built in place: cells joined by commas, quoted (quotes
/// doubled) when they hold a comma, a quote, CR or LF, as RFC 4180 and the
/// csv crate's writer do, and ended by LF.
#[derive(Default)]
struct Line {
    buf: Vec<u8>,
    cells: usize,
}

/// Whether a cell holds a comma, a quote, CR or LF: eight bytes at a time
/// (a byte equal to one of them leaves a zero byte after the XOR).
fn needs_quotes(s: &[u8]) -> bool {
    const LO: u64 = 0x0101_0101_0101_0101;
    const HI: u64 = 0x8080_8080_8080_8080;
    let zero_in = |t: u64| t.wrapping_sub(LO) & !t & HI != 0;
    let mut words = s.chunks_exact(8);
    for w in &mut words {
        let mut x = [0u8; 8];
        x.copy_from_slice(w);
        let x = u64::from_le_bytes(x);
        if [b',', b'"', b'\r', b'\n']
            .iter()
            .any(|&c| zero_in(x ^ (LO * c as u64)))
        {
            return true;
        }
    }
    words
        .remainder()
        .iter()
        .any(|&b| matches!(b, b',' | b'"' | b'\r' | b'\n'))
}

impl Line {
    fn start(&mut self) {
        self.buf.clear();
        self.cells = 0;
    }

    /// The comma before every cell but the first.
    fn next_cell(&mut self) {
        if self.cells > 0 {
            self.buf.push(b',');
        }
        self.cells += 1;
    }

    /// A cell known to need no quoting.
    fn unquoted(&mut self, s: &[u8]) {
        self.next_cell();
        self.buf.extend_from_slice(s);
    }

    fn cell(&mut self, s: &[u8]) {
        self.next_cell();
        if needs_quotes(s) {
            self.buf.push(b'"');
            for &b in s {
                if b == b'"' {
                    self.buf.push(b'"');
                }
                self.buf.push(b);
            }
            self.buf.push(b'"');
        } else {
            self.buf.extend_from_slice(s);
        }
    }

    fn text(&mut self, s: &str) {
        self.cell(neutralise(s).as_bytes());
    }

    /// A word of limen's own vocabulary (a unit, a state, a verdict), which
    /// never needs quoting or neutralising (tested below).
    fn word(&mut self, w: &'static str) {
        self.unquoted(w.as_bytes());
    }

    /// A decimal as its `Display` writes it (never quoted), empty if absent;
    /// `plain` without meaningless trailing zeros.
    fn decimal(&mut self, v: Option<Decimal>, plain: bool) {
        let mut buf = [0; DECIMAL_ROOM];
        let text: &[u8] = match v {
            None => b"",
            Some(v) if plain => plain_ascii(v, &mut buf),
            Some(v) => decimal_ascii(v, &mut buf),
        };
        self.unquoted(text);
    }

    fn end(&mut self) {
        self.buf.push(b'\n');
    }
}

fn write_row(
    line: &mut Line,
    num: &mut String,
    names: &mut Names,
    report: &Common<'_>,
    r: &ReportRow,
) {
    line.start();
    line.buf.extend_from_slice(&report.prefix.buf);
    line.cells = report.prefix.cells;
    line.text(&r.lab_id);
    line.text(&r.client_id);
    line.text(&r.description);
    names.cell(line, &r.analyte);
    names.cell(line, &r.matrix);
    names.cell(line, &r.method);
    num.clear();
    push_date(num, r.analyzed_on);
    // Digits and '-' (a '+' before a five-digit year): never quoted.
    line.unquoted(num.as_bytes());
    line.text(&r.reported);
    line.decimal(r.value, false);
    // Over range, the reading was above the highest standard: no number
    // stands for the result, so both value columns are empty.
    let over = r.state == crate::classify::State::OverRange;
    line.decimal((!over).then_some(r.value_unrounded), true);
    line.word(r.unit.symbol());
    line.word(r.state.name());
    line.decimal(Some(r.mdl), false);
    line.decimal(Some(r.loq), false);
    line.decimal(Some(r.dilution), true);
    match &r.spec {
        Some(spec) => names.cell(line, spec),
        None => line.unquoted(b""),
    }
    line.decimal(r.spec_limit, true);
    line.word(r.verdict.map(|v| v.name()).unwrap_or(""));
    if r.qualifiers.is_empty() {
        line.cell(b"");
    } else {
        line.text(&qualifiers(report, r));
    }
    names.cell(line, &r.limits_row);
    for v in [r.uncertainty, r.ld, r.beta_at_limit] {
        line.decimal(v, false);
    }
    line.end();
}

/// A date as its Display writes it (YYYY-MM-DD), digits placed by hand for
/// the four-digit years a results file can hold.
fn push_date(out: &mut String, d: chrono::NaiveDate) {
    use chrono::Datelike;
    use std::fmt::Write as _;
    let (y, m, day) = (d.year(), d.month(), d.day());
    if !(0..=9999).contains(&y) {
        let _ = write!(out, "{d}");
        return;
    }
    let y = y as u32;
    for x in [y / 1000, y / 100 % 10, y / 10 % 10, y % 10] {
        out.push((b'0' + x as u8) as char);
    }
    for part in [m, day] {
        out.push('-');
        out.push((b'0' + (part / 10) as u8) as char);
        out.push((b'0' + (part % 10) as u8) as char);
    }
}

/// Qualifiers joined by ';'; an accepted QC exception carries its reason.
fn qualifiers(report: &Common<'_>, r: &ReportRow) -> String {
    r.qualifiers
        .iter()
        .map(|q| match (report.qc_exception, q.as_str()) {
            (Some(reason), crate::qc::QC_EXCEPTION) => {
                format!("{q} ({})", reason.replace(';', ","))
            }
            _ => q.clone(),
        })
        .collect::<Vec<_>>()
        .join(";")
}

impl Render for Csv {
    fn extension(&self) -> &'static str {
        "csv"
    }

    fn render(&self, report: &Report) -> Result<super::Output, super::RenderError> {
        Ok(super::Output {
            bytes: self.bytes(report),
            warnings: Vec::new(),
        })
    }
}

impl Csv {
    pub fn bytes(&self, report: &Report) -> Vec<u8> {
        let mut out = Vec::with_capacity(180 * (report.rows.len() + 1));
        // Writing to a Vec cannot fail.
        let _ = self.write(report, &mut out);
        out
    }

    /// Streams the CSV to `out`, so a large report is not held twice.
    pub fn write(&self, report: &Report, out: impl std::io::Write) -> std::io::Result<()> {
        let mut rows = Rows::new(&report.header, report.qc_exception.as_deref(), out)?;
        for r in &report.rows {
            rows.row(r)?;
        }
        rows.finish()
    }
}

/// A report's CSV written row by row, as an evaluation hands the rows on.
pub struct Rows<'a, W: std::io::Write> {
    out: W,
    line: Line,
    num: String,
    names: Names,
    common: Common<'a>,
}

impl<'a, W: std::io::Write> Rows<'a, W> {
    /// Writes the header line.
    pub fn new(
        header: &'a crate::report::Header,
        qc_exception: Option<&'a str>,
        mut out: W,
    ) -> std::io::Result<Self> {
        let mut line = Line::default();
        for h in HEADER {
            line.cell(h.as_bytes());
        }
        line.end();
        out.write_all(&line.buf)?;
        Ok(Rows {
            out,
            line,
            num: String::new(),
            names: Names::default(),
            common: Common::new(&header.report, header.revision, qc_exception),
        })
    }

    pub fn row(&mut self, r: &ReportRow) -> std::io::Result<()> {
        write_row(
            &mut self.line,
            &mut self.num,
            &mut self.names,
            &self.common,
            r,
        );
        self.out.write_all(&self.line.buf)
    }

    pub fn finish(mut self) -> std::io::Result<()> {
        self.out.flush()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // A name's cell is made once and written again from memory, quoted and
    // neutralised as `text` writes it; the memory has a bound.
    #[test]
    fn names_are_written_again_from_memory_up_to_a_bound() {
        let mut names = Names::default();
        let mut line = Line::default();
        line.start();
        line.unquoted(b"first");
        let odd: Vec<std::rc::Rc<str>> = ["Pb", "a,b", "=cmd"].map(std::rc::Rc::from).into();
        for n in odd.iter().chain(&odd) {
            names.cell(&mut line, n);
        }
        assert_eq!(names.cells.len(), 3);
        let once = "first,Pb,\"a,b\",'=cmd";
        assert_eq!(
            String::from_utf8(line.buf.clone()).unwrap(),
            format!("{once},Pb,\"a,b\",'=cmd")
        );
        let many: Vec<std::rc::Rc<str>> = (0..NAMES_MOST + 10)
            .map(|i| std::rc::Rc::from(format!("N{i}").as_str()))
            .collect();
        for n in &many {
            names.cell(&mut line, n);
            assert!(names.cells.len() <= NAMES_MOST);
        }
        assert!(names.cells.len() >= 10, "remembered again after the bound");
    }

    // The reference is the csv crate's writer (RFC 4180 quoting).
    proptest::proptest! {
        #[test]
        fn lines_are_quoted_as_the_csv_crate_quotes_them(
            cells in proptest::collection::vec("[a-z ,\"\r\n'é;=-]{0,6}|[a-z ,\"\r\n'é;=-]{7,30}|[a-zé]{0,30}[,\"\r\n]?[a-z]{0,30}", 25)
        ) {
            let mut line = Line::default();
            line.start();
            for c in &cells {
                line.cell(c.as_bytes());
            }
            line.end();
            let mut w = ::csv::WriterBuilder::new()
                .terminator(::csv::Terminator::Any(b'\n'))
                .from_writer(Vec::new());
            w.write_record(&cells).unwrap();
            proptest::prop_assert_eq!(line.buf, w.into_inner().unwrap());
        }
    }

    #[test]
    fn vocabulary_words_need_no_quoting() {
        let words = crate::units::Unit::ALL
            .iter()
            .map(|u| u.symbol())
            .chain(crate::classify::State::ALL.iter().map(|s| s.name()))
            .chain(crate::classify::Verdict::ALL.iter().map(|v| v.name()));
        let mut n = 0;
        for w in words {
            n += 1;
            let mut quoted = Line::default();
            quoted.text(w);
            let mut plain = Line::default();
            plain.word(w);
            assert_eq!(quoted.buf, plain.buf, "{w}");
        }
        assert!(n >= 10, "{n} words");
    }

    #[test]
    fn a_special_byte_is_seen_at_every_place_of_a_word() {
        for len in 0..26 {
            for at in 0..len {
                for special in [b',', b'"', b'\r', b'\n'] {
                    let mut s = vec![b'a'; len];
                    s[at] = special;
                    assert!(needs_quotes(&s), "{len} {at} {special}");
                    // Neighbours of the specials (and high bytes) are not.
                    for near in [special - 1, special + 1, special | 0x80, 0xff, 0] {
                        s[at] = near;
                        assert!(!needs_quotes(&s), "{len} {at} {near}");
                    }
                }
            }
        }
    }

    // The reference is chrono's own Display of the date.
    proptest::proptest! {
        #[test]
        fn dates_are_written_as_chrono_writes_them(days in -800_000i32..4_000_000) {
            if let Some(d) = chrono::NaiveDate::from_num_days_from_ce_opt(days) {
                let mut s = String::new();
                push_date(&mut s, d);
                proptest::prop_assert_eq!(s, d.to_string());
            }
        }
    }

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
