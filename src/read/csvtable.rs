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
    /// The record's text, checked as UTF-8 once.
    text: &'a str,
    /// Where each cell lies in `text`; every edge is a character boundary.
    cells: &'a [(usize, usize)],
    map: &'a [Option<usize>],
    cols: &'a [Col],
}

impl<'a> Row<'a> {
    pub fn get(&self, col: usize) -> &'a str {
        match self.map[col] {
            Some(i) => self
                .cells
                .get(i)
                .and_then(|&(a, z)| self.text.get(a..z))
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
        let v = self.required(col)?;
        self.parse_decimal(col, v)
    }

    fn parse_decimal(&self, col: usize, v: &str) -> Result<Decimal, ReadError> {
        crate::numeric::parse_decimal(v).map_err(|problem| {
            ReadError::field(
                self.loc(col),
                problem,
                "write a plain decimal number such as 12.5 or -0.03",
            )
        })
    }

    pub fn opt_decimal(&self, col: usize) -> Result<Option<Decimal>, ReadError> {
        match self.get(col) {
            "" => Ok(None),
            v => self.parse_decimal(col, v).map(Some),
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

use std::collections::VecDeque;

/// The byte source under the CSV reader, noting where each CR and LF falls,
/// so lines are counted from byte offsets without holding the file (the csv
/// crate's own line count drifts on CRLF files).
struct Tracked<R> {
    inner: R,
    /// Bytes handed on so far (after any BOM).
    pos: u64,
    /// CR and LF offsets not yet passed by a record start.
    ends: VecDeque<(u64, u8)>,
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
    fn walk(&self, ends: &VecDeque<(u64, u8)>, byte: u64) -> (u64, usize) {
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
    fn advance(&mut self, ends: &mut VecDeque<(u64, u8)>, start: u64) -> u64 {
        let (line, passed) = self.walk(ends, start);
        ends.drain(..passed);
        self.line = line;
        line
    }

    /// The line of an error at `byte`, without moving.
    fn peek(&self, ends: &VecDeque<(u64, u8)>, byte: u64) -> u64 {
        self.walk(ends, byte).0
    }
}

/// The error of a csv reader, at its line.
fn csv_err(file: &str, e: csv::Error, lines: &Lines, ends: &VecDeque<(u64, u8)>) -> ReadError {
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
            } => ragged(*len as usize, *expected_len as usize),
            _ => e.to_string(),
        },
    }
}

fn ragged(len: usize, expected: usize) -> String {
    format!("{len} cells where the header has {expected}")
}

fn ragged_row(file: &str, line: u64, len: usize, expected: usize) -> ReadError {
    ReadError::Csv {
        file: file.to_string(),
        line,
        message: ragged(len, expected),
    }
}

/// The columns of `header` in the order of `cols`, or why they will not do.
fn column_map<'h>(
    file: &str,
    header: impl Iterator<Item = &'h str>,
    cols: &[Col],
) -> Result<Vec<Option<usize>>, ReadError> {
    let names = || cols.iter().map(|c| c.name.to_string()).collect::<Vec<_>>();
    let mut map: Vec<Option<usize>> = vec![None; cols.len()];
    let mut unknown = Vec::new();
    for (i, h) in header.enumerate() {
        let h = norm_header(h);
        match cols.iter().position(|c| c.name == h) {
            Some(c) if map[c].is_some() => {
                return Err(ReadError::field(
                    Loc::new(file, 1, cols[c].name),
                    "column appears twice in the header",
                    "keep one column of each name",
                ));
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
        });
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
        });
    }
    Ok(map)
}

/// The source read line by line into one reused buffer: the quick path for
/// records that need no CSV quoting rules.
struct LineReader<R> {
    inner: R,
    buf: Vec<u8>,
    /// The unread bytes are `buf[at..len]`.
    at: usize,
    len: usize,
    eof: bool,
}

impl<R: std::io::Read> LineReader<R> {
    fn new(inner: R) -> LineReader<R> {
        LineReader {
            inner,
            buf: vec![0; 1 << 16],
            at: 0,
            len: 0,
            eof: false,
        }
    }

    /// Reads more after the unread bytes (moved to the front first).
    fn fill(&mut self) -> std::io::Result<()> {
        if self.at > 0 {
            self.buf.copy_within(self.at..self.len, 0);
            self.len -= self.at;
            self.at = 0;
        }
        if self.len == self.buf.len() {
            self.buf.resize(self.buf.len() * 2, 0);
        }
        loop {
            match self.inner.read(&mut self.buf[self.len..]) {
                Ok(0) => {
                    self.eof = true;
                    return Ok(());
                }
                Ok(n) => {
                    self.len += n;
                    return Ok(());
                }
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e),
            }
        }
    }

    /// The next line, without its LF, as a range of `buf` and whether an
    /// LF ended it; None at the end. It stays unread until the caller moves
    /// `at` past it.
    fn peek_line(&mut self) -> std::io::Result<Option<(usize, usize, bool)>> {
        let mut from = self.at;
        loop {
            if let Some(i) = memchr::memchr(b'\n', &self.buf[from..self.len]) {
                let end = from + i;
                return Ok(Some((self.at, end, true)));
            }
            if self.eof {
                return Ok((self.at < self.len).then_some((self.at, self.len, false)));
            }
            let seen = self.len - self.at;
            self.fill()?;
            from = self.at + seen;
        }
    }

    /// `prefix`, the unread bytes, then the rest of the source.
    fn rest(self, prefix: &[u8]) -> std::io::Chain<std::io::Cursor<Vec<u8>>, R> {
        let mut head = prefix.to_vec();
        head.extend_from_slice(&self.buf[self.at..self.len]);
        std::io::Read::chain(std::io::Cursor::new(head), self.inner)
    }
}

const BOM: &[u8] = b"\xEF\xBB\xBF";

/// A line the quick path reads as the csv crate would: no quote and no CR
/// but the one before its LF.
fn plain_line(line: &[u8]) -> Option<&[u8]> {
    let line = line.strip_suffix(b"\r").unwrap_or(line);
    memchr::memchr2(b'"', b'\r', line).is_none().then_some(line)
}

/// Reads the CSV file `file` from `source` with columns `cols`, calling
/// `each` for every data row in file order. Memory stays flat in the file's
/// length: only the current record is held.
///
/// Lines without quotes are split on their commas here; from the first
/// line that has one (or a CR of its own) to the end of the file, the csv
/// crate reads the records. Both give the same rows, lines and errors
/// (checked in the tests against the csv crate alone).
pub fn read_rows_from<E: From<ReadError>>(
    file: &str,
    source: impl std::io::Read,
    cols: &[Col],
    each: impl FnMut(&Row<'_>) -> Result<(), E>,
) -> Result<(), E> {
    read_rows_by(file, source, cols, Reader::Quick, None, each)
}

/// Rows a pass has no use for, told by one cell: the column (its index in
/// the `Col` list) and a test of the cell's bytes, trimmed of ASCII
/// whitespace. A line without quotes whose cell passes the test is passed
/// over unchecked (not split, not checked as UTF-8), so a pass that skips
/// must leave the file's errors to another that reads every row.
pub type Skip = (usize, fn(&[u8]) -> bool);

/// `read_rows_from`, passing over the rows `skip` tells.
pub fn read_rows_skipping<E: From<ReadError>>(
    file: &str,
    source: impl std::io::Read,
    cols: &[Col],
    skip: Option<Skip>,
    each: impl FnMut(&Row<'_>) -> Result<(), E>,
) -> Result<(), E> {
    read_rows_by(file, source, cols, Reader::Quick, skip, each)
}

/// The `n`th cell (from 0) of a line without quotes.
fn nth_cell(line: &[u8], n: usize) -> Option<&[u8]> {
    let mut from = 0;
    let mut commas = memchr::memchr_iter(b',', line);
    for _ in 0..n {
        from = commas.next()? + 1;
    }
    let to = commas.next().unwrap_or(line.len());
    Some(&line[from..to])
}

#[derive(Clone, Copy, PartialEq)]
enum Reader {
    Quick,
    #[cfg(test)]
    CsvOnly,
}

fn read_rows_by<E: From<ReadError>>(
    file: &str,
    source: impl std::io::Read,
    cols: &[Col],
    reader: Reader,
    skip: Option<Skip>,
    mut each: impl FnMut(&Row<'_>) -> Result<(), E>,
) -> Result<(), E> {
    let io = |source: std::io::Error| ReadError::Io {
        file: file.to_string(),
        source,
    };
    let mut lines = LineReader::new(source);
    // The BOM, and a header the quick path can take.
    let mut header = None;
    let mut boms = 0;
    if reader == Reader::Quick {
        while lines.len < 6 && !lines.eof {
            lines.fill().map_err(io)?;
        }
        // As the csv crate's path reads a file: its source drops a BOM,
        // and csv_core drops another that follows.
        for _ in 0..2 {
            if lines.buf[lines.at..lines.len].starts_with(BOM) {
                lines.at += 3;
                boms += 1;
            }
        }
        if let Some((a, z, _)) = lines.peek_line().map_err(io)? {
            header = plain_line(&lines.buf[a..z])
                .and_then(|h| std::str::from_utf8(h).ok())
                .filter(|h| !h.trim().is_empty())
                .map(|h| (h.to_string(), z));
        }
    }
    let Some((header, header_end)) = header else {
        // The csv crate's path drops the BOMs itself.
        return csv_rows(file, lines.rest(&BOM.repeat(boms)), None, cols, each);
    };
    let width = header.split(',').count();
    let map = column_map(file, header.split(','), cols)?;
    lines.at = (header_end + 1).min(lines.len);
    let mut line = 1u64;
    let mut cells: Vec<(usize, usize)> = Vec::with_capacity(width);
    while let Some((a, z, lf)) = lines.peek_line().map_err(io)? {
        line += 1;
        let Some(bytes) = plain_line(&lines.buf[a..z]) else {
            // The csv crate from here on, with the line count carried over.
            // The LF before the line keeps csv_core from dropping a BOM
            // that starts it, as it would at the start of a file.
            let rest = lines.rest(b"\n");
            return csv_rows(file, rest, Some((width, &map, line - 1)), cols, each);
        };
        let next = if lf { z + 1 } else { z };
        let passed_over = |(col, test): Skip| {
            map[col]
                .and_then(|i| nth_cell(bytes, i))
                .is_some_and(|cell| test(cell.trim_ascii()))
        };
        if bytes.is_empty() || skip.is_some_and(passed_over) {
            lines.at = next;
            continue;
        }
        split_commas(bytes, &mut cells);
        if cells.len() != width {
            return Err(ragged_row(file, line, cells.len(), width).into());
        }
        let Ok(text) = std::str::from_utf8(bytes) else {
            return Err(not_utf8(file, line).into());
        };
        deliver(file, line, text, &cells, &map, cols, &mut each)?;
        lines.at = next;
    }
    Ok(())
}

/// The cells of a line split at its commas, eight bytes at a time.
fn split_commas(line: &[u8], cells: &mut Vec<(usize, usize)>) {
    const LOW7: u64 = 0x7f7f_7f7f_7f7f_7f7f;
    const COMMAS: u64 = 0x2c2c_2c2c_2c2c_2c2c;
    cells.clear();
    let mut from = 0;
    let mut at = 0;
    let mut words = line.chunks_exact(8);
    for w in &mut words {
        let mut x = [0u8; 8];
        x.copy_from_slice(w);
        // The high bit of each byte that was a comma, and of no other.
        let t = u64::from_le_bytes(x) ^ COMMAS;
        let mut hits = !(((t & LOW7) + LOW7) | t | LOW7);
        while hits != 0 {
            let c = at + hits.trailing_zeros() as usize / 8;
            cells.push((from, c));
            from = c + 1;
            hits &= hits - 1;
        }
        at += 8;
    }
    for (k, &b) in words.remainder().iter().enumerate() {
        if b == b',' {
            cells.push((from, at + k));
            from = at + k + 1;
        }
    }
    cells.push((from, line.len()));
}

fn not_utf8(file: &str, line: u64) -> ReadError {
    ReadError::Csv {
        file: file.to_string(),
        line,
        message: "not valid UTF-8 text".into(),
    }
}

/// Hands on a record unless all its cells are blank.
fn deliver<E>(
    file: &str,
    line: u64,
    text: &str,
    cells: &[(usize, usize)],
    map: &[Option<usize>],
    cols: &[Col],
    each: &mut impl FnMut(&Row<'_>) -> Result<(), E>,
) -> Result<(), E> {
    let blank = |&(a, z): &(usize, usize)| match text.as_bytes().get(a) {
        // Most rows answer at their first byte.
        Some(b) if a < z && b.is_ascii_graphic() => false,
        _ => text.get(a..z).is_none_or(|c| c.trim().is_empty()),
    };
    if cells.iter().all(blank) {
        return Ok(());
    }
    each(&Row {
        file,
        line,
        text,
        cells,
        map,
        cols,
    })
}

/// The records from `source` through the csv crate: the whole file with its
/// header when `after` is None, else the records after the header, whose
/// width and columns are known, from the line given on.
// Long (about 100 lines) on purpose: header checks and the row loop share
// the column map and the reused record; the general path of every CSV.
fn csv_rows<E: From<ReadError>>(
    file: &str,
    source: impl std::io::Read,
    after: Option<(usize, &[Option<usize>], u64)>,
    cols: &[Col],
    mut each: impl FnMut(&Row<'_>) -> Result<(), E>,
) -> Result<(), E> {
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(after.is_none())
        // Past the header the width is checked here, against the header's.
        .flexible(after.is_some())
        .buffer_capacity(1 << 16)
        .from_reader(Tracked {
            inner: source,
            pos: 0,
            ends: Default::default(),
            text: after.is_some(),
            at_start: after.is_none(),
        });
    let mut lines = Lines {
        line: after.map_or(1, |(_, _, line)| line),
    };
    let owned_map;
    let (width, map) = match after {
        Some((width, map, _)) => (Some(width), map),
        None => {
            let header = match reader.headers() {
                Ok(h) => h.clone(),
                Err(e) => {
                    let r = reader.get_ref();
                    return Err(csv_err(file, e, &lines, &r.ends).into());
                }
            };
            if header.iter().all(|h| h.trim().is_empty()) {
                // A file of whitespace only is empty, not a file of blank
                // columns: read on to tell.
                let mut record = csv::ByteRecord::new();
                while let Ok(true) = reader.read_byte_record(&mut record) {}
                if !reader.get_ref().text {
                    return Err(ReadError::Empty {
                        file: file.to_string(),
                        expected: cols.iter().map(|c| c.name.to_string()).collect(),
                    }
                    .into());
                }
            }
            owned_map = column_map(file, header.iter(), cols)?;
            (None, &owned_map[..])
        }
    };
    // Bytes, then one UTF-8 check of the whole record: a check per cell
    // costs more than the parse on a long file.
    let mut record = csv::ByteRecord::new();
    let mut cells: Vec<(usize, usize)> = Vec::new();
    loop {
        match reader.read_byte_record(&mut record) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => {
                let r = reader.get_ref();
                return Err(csv_err(file, e, &lines, &r.ends).into());
            }
        }
        let start = record.position().map(|p| p.byte()).unwrap_or(0);
        let line = lines.advance(&mut reader.get_mut().ends, start);
        if let Some(width) = width {
            if record.len() != width {
                return Err(ragged_row(file, line, record.len(), width).into());
            }
        }
        cells.clear();
        cells.extend((0..record.len()).filter_map(|i| record.range(i).map(|r| (r.start, r.end))));
        let text = match std::str::from_utf8(record.as_slice()) {
            // A character split across two cells is as invalid as a broken one.
            Ok(t)
                if cells
                    .iter()
                    .all(|&(a, z)| t.is_char_boundary(a) && t.is_char_boundary(z)) =>
            {
                t
            }
            _ => return Err(not_utf8(file, line).into()),
        };
        deliver(file, line, text, &cells, map, cols, &mut each)?;
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

    /// Rows (line and both cells) or the error's text.
    fn read_as(bytes: &[u8], reader: Reader) -> Result<Vec<(u64, String, String)>, String> {
        let mut out = Vec::new();
        read_rows_by("t.csv", bytes, COLS, reader, None, |r| {
            out.push((r.line, r.text(0), r.text(1)));
            Ok::<(), ReadError>(())
        })
        .map_err(|e| e.to_string())?;
        Ok(out)
    }

    // Reference: the csv crate reading the whole file. Pieces that matter
    // to the split: commas, quotes, CR and LF alone and together, blanks,
    // a BOM, a broken and a whole two-byte character, and long lines that
    // cross the reader's buffer.
    fn piece() -> impl proptest::strategy::Strategy<Value = Vec<u8>> {
        proptest::prop_oneof![
            proptest::strategy::Just(b"x".to_vec()),
            proptest::strategy::Just(b"7".to_vec()),
            proptest::strategy::Just(b",".to_vec()),
            proptest::strategy::Just(b"\n".to_vec()),
            proptest::strategy::Just(b"\r\n".to_vec()),
            proptest::strategy::Just(b"\r".to_vec()),
            proptest::strategy::Just(b"\"".to_vec()),
            proptest::strategy::Just(b" ".to_vec()),
            proptest::strategy::Just(b"\xEF\xBB\xBF".to_vec()),
            proptest::strategy::Just("é".as_bytes().to_vec()),
            proptest::strategy::Just(b"\xc3".to_vec()),
            proptest::strategy::Just(vec![b'y'; 70_000]),
        ]
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(2000))]
        #[test]
        fn the_quick_reader_reads_as_the_csv_crate(
            bom in proptest::bool::ANY,
            header in proptest::sample::select(vec!["a,b\n", "b,a\r\n", "a\n", "\"a\",b\n", "\na,b\n", "a,c\n", ""]),
            body in proptest::collection::vec(piece(), 0..24),
        ) {
            let mut bytes = Vec::new();
            if bom {
                bytes.extend_from_slice(b"\xEF\xBB\xBF");
            }
            bytes.extend_from_slice(header.as_bytes());
            for p in &body {
                bytes.extend_from_slice(p);
            }
            proptest::prop_assert_eq!(
                read_as(&bytes, Reader::Quick),
                read_as(&bytes, Reader::CsvOnly)
            );
        }
    }

    // Reference: the standard library's split on ',' of every placement of
    // commas (and their neighbours and high bytes) in lines of 0 to 24 bytes.
    #[test]
    fn commas_are_found_at_every_place_of_a_word() {
        let fill = [b'a', b'+', b'-', 0xac, 0xff, 0x00];
        for len in 0..25 {
            for mask in [0u32, 1, 0b101, 0x00ff_ffff, 0x0055_5555, 0x0080_0001] {
                for (k, &other) in fill.iter().enumerate() {
                    let line: Vec<u8> = (0..len)
                        .map(|i| {
                            if mask >> i & 1 == 1 || (i + k) % 7 == 3 {
                                b','
                            } else {
                                other
                            }
                        })
                        .collect();
                    let mut cells = Vec::new();
                    split_commas(&line, &mut cells);
                    let got: Vec<&[u8]> = cells.iter().map(|&(a, z)| &line[a..z]).collect();
                    let want: Vec<&[u8]> = line.split(|b| *b == b',').collect();
                    assert_eq!(got, want, "{line:?}");
                }
            }
        }
    }

    #[test]
    fn skipped_rows_are_passed_over_unread_and_the_rest_read_in_full() {
        let bytes = b"b,a\nskip,1\n SKIP ,\xff\nskip\nkeep,2\n\"skip\",3\nkeep,\xff\n";
        let mut seen = Vec::new();
        let skip: Skip = (1, |c| c.eq_ignore_ascii_case(b"skip"));
        let e = read_rows_skipping("t.csv", &bytes[..], COLS, Some(skip), |r| {
            seen.push((r.line, r.text(1)));
            Ok::<(), ReadError>(())
        })
        .unwrap_err();
        // Lines 2 to 4 are passed over, bad bytes and all; line 6 has a quote
        // and is read in full; line 7 is not UTF-8.
        assert_eq!(seen, [(5, "keep".to_string()), (6, "skip".to_string())]);
        assert_eq!(
            e.to_string(),
            "t.csv:7: malformed CSV: not valid UTF-8 text"
        );
        // Without the skip the first bad line stops the read.
        let e = read_as(bytes, Reader::Quick).unwrap_err();
        assert_eq!(e, "t.csv:3: malformed CSV: not valid UTF-8 text");
    }

    #[test]
    fn a_quote_hands_the_rest_of_the_file_to_the_csv_reader() {
        let bytes = b"a,b\n1,x\n\"2\",\"y\nz\"\n3,w\n\n4\n";
        let quick = read_as(bytes, Reader::Quick);
        assert_eq!(quick, read_as(bytes, Reader::CsvOnly));
        // The quoted cell spans lines 3 and 4; the line count carries on.
        assert_eq!(
            quick.unwrap_err(),
            "t.csv:7: malformed CSV: 1 cells where the header has 2"
        );
        let ok = b"a,b\n1,x\n\"2\",\"y\nz\"\n3,w\n";
        assert_eq!(
            read_as(ok, Reader::Quick).unwrap(),
            [
                (2, "1".to_string(), "x".to_string()),
                (3, "2".to_string(), "y\nz".to_string()),
                (5, "3".to_string(), "w".to_string())
            ]
        );
    }

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
