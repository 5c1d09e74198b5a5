//! One reader for every CSV file we take: header row, columns in any order,
//! UTF-8 with or without BOM, LF or CRLF, cells trimmed.

use super::error::{Loc, ReadError};
use chrono::NaiveDate;
use rust_decimal::Decimal;

/// A column this file takes.
pub struct Col {
    pub name: &'static str,
    pub required: bool,
}

pub const fn req(name: &'static str) -> Col {
    Col {
        name,
        required: true,
    }
}

pub const fn opt(name: &'static str) -> Col {
    Col {
        name,
        required: false,
    }
}

/// One data row, with its columns addressed by their index in the `Col` list.
pub struct Row<'a> {
    pub file: &'a str,
    pub line: u64,
    record: &'a csv::ByteRecord,
    /// The record's cells run together, checked as UTF-8 once.
    text: &'a str,
    map: &'a [Option<usize>],
    cols: &'a [Col],
}

impl<'a> Row<'a> {
    pub fn get(&self, col: usize) -> &'a str {
        match self.map[col] {
            // Every cell edge is a character boundary (checked on reading).
            Some(i) => self
                .record
                .range(i)
                .and_then(|r| self.text.get(r))
                .map_or("", trim_cell),
            None => "",
        }
    }

    pub fn loc(&self, col: usize) -> Loc {
        Loc::new(self.file, self.line, self.cols[col].name)
    }

    pub fn text(&self, col: usize) -> String {
        self.get(col).to_string()
    }

    pub fn required(&self, col: usize) -> Result<&'a str, ReadError> {
        let v = self.get(col);
        if v.is_empty() {
            return Err(ReadError::field(
                self.loc(col),
                "empty; a value is required",
                format!("fill in `{}` on this row", self.cols[col].name),
            ));
        }
        Ok(v)
    }

    pub fn decimal(&self, col: usize) -> Result<Decimal, ReadError> {
        self.required(col)?;
        crate::numeric::parse_decimal(self.get(col)).map_err(|problem| {
            ReadError::field(
                self.loc(col),
                problem,
                "write a plain decimal number such as 12.5 or -0.03",
            )
        })
    }

    pub fn opt_decimal(&self, col: usize) -> Result<Option<Decimal>, ReadError> {
        if self.get(col).is_empty() {
            Ok(None)
        } else {
            self.decimal(col).map(Some)
        }
    }

    /// A decimal that must be greater than zero when present.
    pub fn opt_positive(&self, col: usize) -> Result<Option<Decimal>, ReadError> {
        let v = self.opt_decimal(col)?;
        if let Some(x) = v {
            if x <= Decimal::ZERO {
                return Err(ReadError::field(
                    self.loc(col),
                    format!("{x} must be greater than zero"),
                    format!("`{}` must be a positive number", self.cols[col].name),
                ));
            }
        }
        Ok(v)
    }

    pub fn date(&self, col: usize) -> Result<NaiveDate, ReadError> {
        let v = self.required(col)?;
        parse_date(v).ok_or_else(|| {
            ReadError::field(
                self.loc(col),
                format!("`{v}` is not a date"),
                "write dates as ISO 8601, YYYY-MM-DD (e.g. 2026-11-13)",
            )
        })
    }

    pub fn unit(&self, col: usize) -> Result<crate::units::Unit, ReadError> {
        let v = self.required(col)?;
        crate::units::Unit::parse(v).ok_or_else(|| {
            ReadError::field(
                self.loc(col),
                format!("unknown unit `{v}`"),
                format!("units limen knows: {}", crate::units::Unit::accepted()),
            )
        })
    }
}

/// `str::trim`, the ASCII way first: only a cell that then starts or ends
/// with a byte outside printable ASCII can have more whitespace to lose.
fn trim_cell(cell: &str) -> &str {
    let t = cell.trim_ascii();
    let plain = |b: u8| b.is_ascii() && b != 0x0b;
    match (t.as_bytes().first(), t.as_bytes().last()) {
        (Some(&a), Some(&z)) if !(plain(a) && plain(z)) => t.trim(),
        _ => t,
    }
}

/// An ISO 8601 calendar date, YYYY-MM-DD, checked for a real day.
pub fn parse_date(text: &str) -> Option<NaiveDate> {
    let b = text.trim().as_bytes();
    if b.len() != 10 || b[4] != b'-' || b[7] != b'-' {
        return None;
    }
    let num = |r: std::ops::Range<usize>| -> Option<u32> {
        b[r].iter().try_fold(0u32, |acc, c| {
            c.is_ascii_digit().then(|| acc * 10 + (c - b'0') as u32)
        })
    };
    NaiveDate::from_ymd_opt(num(0..4)? as i32, num(5..7)?, num(8..10)?)
}

fn norm_header(h: &str) -> String {
    h.trim().to_ascii_lowercase()
}

/// Reads `bytes` as the CSV file `file` with columns `cols`, calling `each`
/// for every data row in file order.
pub fn read_rows<E: From<ReadError>>(
    file: &str,
    bytes: &[u8],
    cols: &[Col],
    each: impl FnMut(&Row<'_>) -> Result<(), E>,
) -> Result<(), E> {
    read_rows_from(file, bytes, cols, each)
}

/// The byte source under the CSV reader, noting where each CR and LF falls,
/// so lines are counted from byte offsets without holding the file (the csv
/// crate's own line count drifts on CRLF files).
struct Tracked<R> {
    inner: R,
    /// Bytes handed on so far (after any BOM).
    pos: u64,
    /// CR and LF offsets not yet passed by a record start.
    ends: std::collections::VecDeque<(u64, u8)>,
    /// Whether anything but whitespace has been read.
    text: bool,
    /// A BOM at the very start is dropped, as if it were not there.
    at_start: bool,
}

impl<R: std::io::Read> std::io::Read for Tracked<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let mut n = self.inner.read(buf)?;
        if self.at_start {
            // Fill at least three bytes (or reach the end) to see a BOM.
            while n < 3.min(buf.len()) {
                let more = self.inner.read(&mut buf[n..])?;
                if more == 0 {
                    break;
                }
                n += more;
            }
            self.at_start = false;
            if buf[..n].starts_with(b"\xEF\xBB\xBF") {
                buf.copy_within(3..n, 0);
                n -= 3;
            }
        }
        let chunk = &buf[..n];
        for i in memchr::memchr2_iter(b'\r', b'\n', chunk) {
            self.ends.push_back((self.pos + i as u64, chunk[i]));
        }
        if !self.text {
            self.text = chunk.iter().any(|b| !b.is_ascii_whitespace());
        }
        self.pos += n as u64;
        Ok(n)
    }
}

/// Line counting over the CR/LF offsets of `Tracked`.
struct Lines {
    /// The line of the last record start.
    line: u64,
}

impl Lines {
    /// The line of a record (or error) starting at `byte`, and how many of
    /// the CR/LF offsets lie before it. A start on a CR or LF (where the csv
    /// crate reports a CRLF file's records) moves past it.
    fn walk(&self, ends: &std::collections::VecDeque<(u64, u8)>, byte: u64) -> (u64, usize) {
        let (mut s, mut line, mut passed) = (byte, self.line, 0);
        for &(p, b) in ends {
            if p > s {
                break;
            }
            if p == s {
                s += 1;
            }
            if b == b'\n' {
                line += 1;
            }
            passed += 1;
        }
        (line, passed)
    }

    /// Moves to the record starting at `start` and returns its line.
    fn advance(&mut self, ends: &mut std::collections::VecDeque<(u64, u8)>, start: u64) -> u64 {
        let (line, passed) = self.walk(ends, start);
        ends.drain(..passed);
        self.line = line;
        line
    }

    /// The line of an error at `byte`, without moving.
    fn peek(&self, ends: &std::collections::VecDeque<(u64, u8)>, byte: u64) -> u64 {
        self.walk(ends, byte).0
    }
}

/// Reads the CSV file `file` from `source` with columns `cols`, calling
/// `each` for every data row in file order. Memory stays flat in the file's
/// length: only the current record is held.
// Long (about 120 lines) on purpose: header checks and the row loop share
// the column map and the reused record; this is the hot path of every CSV.
pub fn read_rows_from<E: From<ReadError>>(
    file: &str,
    source: impl std::io::Read,
    cols: &[Col],
    mut each: impl FnMut(&Row<'_>) -> Result<(), E>,
) -> Result<(), E> {
    let names = || cols.iter().map(|c| c.name.to_string()).collect::<Vec<_>>();
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(false)
        .buffer_capacity(1 << 16)
        .from_reader(Tracked {
            inner: source,
            pos: 0,
            ends: Default::default(),
            text: false,
            at_start: true,
        });
    let mut lines = Lines { line: 1 };
    let csv_err = |e: csv::Error, lines: &Lines, ends: &std::collections::VecDeque<(u64, u8)>| {
        if let csv::ErrorKind::Io(source) = e.kind() {
            return ReadError::Io {
                file: file.to_string(),
                source: std::io::Error::new(source.kind(), source.to_string()),
            };
        }
        ReadError::Csv {
            file: file.to_string(),
            line: e
                .position()
                .map(|p| lines.peek(ends, p.byte()))
                .unwrap_or(1),
            message: match e.kind() {
                csv::ErrorKind::Utf8 { .. } => "not valid UTF-8 text".into(),
                csv::ErrorKind::UnequalLengths {
                    expected_len, len, ..
                } => format!("{len} cells where the header has {expected_len}"),
                _ => e.to_string(),
            },
        }
    };
    let empty = || ReadError::Empty {
        file: file.to_string(),
        expected: names(),
    };
    let header = match reader.headers() {
        Ok(h) => h.clone(),
        Err(e) => {
            let r = reader.get_ref();
            return Err(csv_err(e, &lines, &r.ends).into());
        }
    };
    if header.iter().all(|h| h.trim().is_empty()) {
        // A file of whitespace only is empty, not a file of blank columns:
        // read on to tell.
        let mut record = csv::ByteRecord::new();
        while let Ok(true) = reader.read_byte_record(&mut record) {}
        if !reader.get_ref().text {
            return Err(empty().into());
        }
    }
    let mut map: Vec<Option<usize>> = vec![None; cols.len()];
    let mut unknown = Vec::new();
    for (i, h) in header.iter().enumerate() {
        let h = norm_header(h);
        match cols.iter().position(|c| c.name == h) {
            Some(c) if map[c].is_some() => {
                return Err(ReadError::field(
                    Loc::new(file, 1, cols[c].name),
                    "column appears twice in the header",
                    "keep one column of each name",
                )
                .into());
            }
            Some(c) => map[c] = Some(i),
            None if h.is_empty() => unknown.push("(blank header cell)".to_string()),
            None => unknown.push(h),
        }
    }
    if !unknown.is_empty() {
        return Err(ReadError::UnknownColumns {
            file: file.to_string(),
            columns: unknown,
            known: names(),
        }
        .into());
    }
    let missing: Vec<String> = cols
        .iter()
        .zip(&map)
        .filter(|(c, m)| c.required && m.is_none())
        .map(|(c, _)| c.name.to_string())
        .collect();
    if !missing.is_empty() {
        return Err(ReadError::MissingColumns {
            file: file.to_string(),
            columns: missing,
        }
        .into());
    }
    // Bytes, then one UTF-8 check of the whole record: a check per cell
    // costs more than the parse on a long file.
    let mut record = csv::ByteRecord::new();
    loop {
        match reader.read_byte_record(&mut record) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => {
                let r = reader.get_ref();
                return Err(csv_err(e, &lines, &r.ends).into());
            }
        }
        let start = record.position().map(|p| p.byte()).unwrap_or(0);
        let line = lines.advance(&mut reader.get_mut().ends, start);
        let text = match std::str::from_utf8(record.as_slice()) {
            // A character split across two cells is as invalid as a broken one.
            Ok(t)
                if (0..record.len()).all(|i| {
                    record
                        .range(i)
                        .is_some_and(|r| t.is_char_boundary(r.start) && t.is_char_boundary(r.end))
                }) =>
            {
                t
            }
            _ => {
                return Err(ReadError::Csv {
                    file: file.to_string(),
                    line,
                    message: "not valid UTF-8 text".into(),
                }
                .into());
            }
        };
        if (0..record.len()).all(|i| {
            record
                .range(i)
                .and_then(|r| text.get(r))
                .is_none_or(|c| c.trim().is_empty())
        }) {
            continue;
        }
        let row = Row {
            file,
            line,
            record: &record,
            text,
            map: &map,
            cols,
        };
        each(&row)?;
    }
    Ok(())
}

pub fn read_file(path: &std::path::Path) -> Result<Vec<u8>, ReadError> {
    std::fs::read(path).map_err(|source| ReadError::Io {
        file: path.display().to_string(),
        source,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // The reference is the standard library's Unicode `str::trim`.
    proptest::proptest! {
        #[test]
        fn cells_trim_as_str_trim_does(
            cell in "[ \t\r\n\u{0b}\u{0c}\u{85}\u{a0}\u{2003}\u{3000}a-zé,.]{0,12}"
        ) {
            proptest::prop_assert_eq!(trim_cell(&cell), cell.trim());
        }
    }

    const COLS: &[Col] = &[req("a"), opt("b")];

    fn collect(bytes: &[u8]) -> Result<Vec<(u64, String, String)>, ReadError> {
        let mut out = Vec::new();
        read_rows("t.csv", bytes, COLS, |r| {
            out.push((r.line, r.text(0), r.text(1)));
            Ok::<(), ReadError>(())
        })?;
        Ok(out)
    }

    #[test]
    fn a_character_split_across_two_cells_is_not_utf8() {
        // Each cell alone is broken; run together they would read as "é".
        let e = collect(b"a,b\nok,\xc3\xa9\n\xc3,\xa9\n").unwrap_err();
        assert!(
            matches!(&e, ReadError::Csv { line: 3, message, .. } if message == "not valid UTF-8 text"),
            "{e}"
        );
        assert_eq!(
            collect("a,b\n é ,\u{a0}x\u{3000}\n".as_bytes()).unwrap(),
            [(2, "é".to_string(), "x".to_string())]
        );
    }

    #[test]
    fn bom_crlf_any_order_and_missing_optional() {
        let rows = collect(b"\xEF\xBB\xBFb,A\r\nx, 1 \r\ny,2\r\n").unwrap();
        assert_eq!(rows[0], (2, "1".into(), "x".into()));
        assert_eq!(rows[1], (3, "2".into(), "y".into()));
        let rows = collect(b"a\n5\n").unwrap();
        assert_eq!(rows[0], (2, "5".into(), "".into()));
    }

    #[test]
    fn dates_are_iso_calendar_dates() {
        assert_eq!(
            parse_date("2026-11-13"),
            NaiveDate::from_ymd_opt(2026, 11, 13)
        );
        assert_eq!(
            parse_date(" 2024-02-29 "),
            NaiveDate::from_ymd_opt(2024, 2, 29)
        );
        for bad in [
            "2026-02-29",
            "2026-13-01",
            "2026-1-13",
            "13/11/2026",
            "2026-11-1x",
            "",
        ] {
            assert_eq!(parse_date(bad), None, "{bad}");
        }
    }

    #[test]
    fn header_errors_name_the_columns() {
        let e = collect(b"b,c\n1,2\n").unwrap_err();
        match e {
            ReadError::UnknownColumns { columns, .. } => assert_eq!(columns, vec!["c"]),
            other => panic!("{other}"),
        }
        let e = collect(b"b\n1\n").unwrap_err();
        assert_eq!(e.to_string(), "t.csv:1: missing column(s): a");
        assert!(matches!(collect(b"").unwrap_err(), ReadError::Empty { .. }));
        assert!(matches!(
            collect(b"a,a\n1,2\n").unwrap_err(),
            ReadError::Field { .. }
        ));
    }

    #[test]
    fn ragged_rows_and_bad_utf8_report_their_line() {
        let e = collect(b"a,b\n1,2\n3\n").unwrap_err();
        assert_eq!(
            e.to_string(),
            "t.csv:3: malformed CSV: 1 cells where the header has 2"
        );
        let e = collect(b"a\n\xff\n").unwrap_err();
        assert!(
            e.to_string()
                .starts_with("t.csv:2: malformed CSV: not valid UTF-8")
        );
    }
}
