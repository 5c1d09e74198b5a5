//! Classified rows kept between the pass that checks a batch and the pass
//! that hands its rows on: in memory while they are few, then in an
//! unlinked temporary file, so every row is parsed and classified once and
//! memory stays flat however long the batch.

use crate::classify::{State, Verdict};
use crate::evaluated::{EvalError, ReportRow};
use crate::units::Unit;
use chrono::{Datelike, NaiveDate};
use rust_decimal::Decimal;
use std::collections::HashMap;
use std::io::{BufReader, Read, Seek, Write};
use std::rc::Rc;

/// Encoded bytes held before they go to the file.
const IN_MEMORY: usize = 4 << 20;

pub struct Spool {
    /// Rows not yet in the file (all of them while there is no file).
    held: Vec<u8>,
    file: Option<std::fs::File>,
    /// Hold every row in memory (the caller keeps them all anyway).
    unbounded: bool,
    rows: usize,
    /// Shared names (analyte, matrix, method, spec, citation, limits row),
    /// numbered in the order met; found again by address, since rows share
    /// one allocation per name.
    names: Vec<Rc<str>>,
    by_address: HashMap<usize, u32, crate::fasthash::BuildWords>,
    /// The last name met in each of the six places of a row, by address:
    /// most rows repeat the row before.
    last: [(usize, u32); 6],
    /// The row before's line and its lab id, client id and description:
    /// the rows of one sample (one per analyte) repeat these, and a repeat
    /// is written as a flag.
    previous_line: u64,
    previous: [String; 3],
}

impl Spool {
    /// Spills to a temporary file beyond a few megabytes.
    pub fn new() -> Spool {
        Spool::with(false)
    }

    /// Never spills: for a caller that holds every row in the end.
    pub fn in_memory() -> Spool {
        Spool::with(true)
    }

    fn with(unbounded: bool) -> Spool {
        Spool {
            held: Vec::new(),
            file: None,
            unbounded,
            rows: 0,
            names: Vec::new(),
            by_address: HashMap::default(),
            last: [(0, 0); 6],
            previous_line: 0,
            previous: Default::default(),
        }
    }

    pub fn len(&self) -> usize {
        self.rows
    }

    pub fn is_empty(&self) -> bool {
        self.rows == 0
    }

    pub fn push(&mut self, r: &ReportRow) -> Result<(), EvalError> {
        let start = self.held.len();
        self.held.extend_from_slice(&[0; 4]);
        self.encode(r);
        let len = (self.held.len() - start - 4) as u32;
        self.held[start..start + 4].copy_from_slice(&len.to_le_bytes());
        self.rows += 1;
        if !self.unbounded && self.held.len() >= IN_MEMORY {
            self.spill()?;
        }
        Ok(())
    }

    fn spill(&mut self) -> Result<(), EvalError> {
        if self.file.is_none() {
            self.file = Some(scratch().map_err(failed)?);
        }
        if let Some(f) = &mut self.file {
            f.write_all(&self.held).map_err(failed)?;
        }
        self.held.clear();
        Ok(())
    }

    /// Every row pushed, in order; may be run again. The row handed on is
    /// one value refilled each time (its strings keep their room), so
    /// reading back allocates next to nothing. `each` may change its
    /// qualifiers only: what repeats from the row before is not written
    /// again, but left as it was.
    pub fn replay<E: From<EvalError>>(
        &mut self,
        mut each: impl FnMut(&mut ReportRow) -> Result<(), E>,
    ) -> Result<(), E> {
        let names = &self.names;
        let mut slot: Option<ReportRow> = None;
        let mut each = |b: &[u8]| -> Result<(), E> {
            let d = Decoder { b, at: 0, names };
            let r = match &mut slot {
                Some(r) => {
                    d.fill(r)?;
                    r
                }
                None => slot.insert(d.row()?),
            };
            each(r)
        };
        match &mut self.file {
            None => replay_held(&self.held, &mut each)?,
            Some(f) => {
                f.flush().map_err(failed)?;
                f.rewind().map_err(failed)?;
                let mut r = BufReader::with_capacity(1 << 16, &mut *f);
                let mut body = Vec::new();
                let mut len = [0u8; 4];
                loop {
                    match r.read_exact(&mut len) {
                        Ok(()) => {}
                        Err(e) if e.kind() == std::io::ErrorKind::UnexpectedEof => break,
                        Err(e) => return Err(failed(e).into()),
                    }
                    body.resize(u32::from_le_bytes(len) as usize, 0);
                    r.read_exact(&mut body).map_err(failed)?;
                    each(&body)?;
                }
                replay_held(&self.held, &mut each)?;
                // Back to the end, should more rows be pushed.
                f.seek(std::io::SeekFrom::End(0)).map_err(failed)?;
            }
        }
        Ok(())
    }

    fn name(&mut self, place: usize, s: &Rc<str>) -> u32 {
        let address = Rc::as_ptr(s) as *const u8 as usize;
        // A kept name's address is never 0 and never reused (see below).
        if self.last[place].0 == address {
            return self.last[place].1;
        }
        let i = self.name_by_address(s, address);
        self.last[place] = (address, i);
        i
    }

    fn name_by_address(&mut self, s: &Rc<str>, address: usize) -> u32 {
        if let Some(&i) = self.by_address.get(&address) {
            return i;
        }
        let i = self.names.len() as u32;
        // Kept alive here, so the address cannot be reused by another name.
        self.names.push(s.clone());
        self.by_address.insert(address, i);
        i
    }

    fn encode(&mut self, r: &ReportRow) {
        let names = [
            self.name(0, &r.analyte),
            self.name(1, &r.matrix),
            self.name(2, &r.method),
            self.name(3, &r.spec_citation),
            self.name(4, &r.limits_row),
            // 0 for none, else the name's number + 1.
            match &r.spec {
                Some(s) => self.name(5, s) + 1,
                None => 0,
            },
        ];
        let b = &mut self.held;
        put_varint(b, r.line.wrapping_sub(self.previous_line));
        self.previous_line = r.line;
        // A flag a text, set where it repeats the row before's.
        let flags = b.len();
        b.push(0);
        let texts = [&r.lab_id, &r.client_id, &r.description];
        for (k, (text, previous)) in texts.into_iter().zip(&mut self.previous).enumerate() {
            if text == previous {
                b[flags] |= 1 << k;
            } else {
                put_text(b, text);
                previous.clone_from(text);
            }
        }
        put_text(b, &r.reported);
        for n in names {
            put_varint(b, n as u64);
        }
        b.extend_from_slice(&r.analyzed_on.num_days_from_ce().to_le_bytes());
        b.push(index_of(&Unit::ALL, r.unit));
        b.push(index_of(&State::ALL, r.state));
        b.push(r.verdict.map_or(u8::MAX, |v| index_of(&Verdict::ALL, v)));
        b.push(r.weak_pass as u8);
        for d in [
            r.value_unrounded,
            r.mdl,
            r.loq,
            r.mdl_unrounded,
            r.loq_unrounded,
            r.dilution,
        ] {
            put_decimal(b, d);
        }
        for d in [
            r.value,
            r.spec_limit,
            r.uncertainty_pct,
            r.uncertainty,
            r.ld,
            r.beta_at_limit,
        ] {
            match d {
                Some(d) => {
                    b.push(1);
                    put_decimal(b, d);
                }
                None => b.push(0),
            }
        }
        b.push(r.qualifiers.len() as u8);
        for q in &r.qualifiers {
            put_text(b, q);
        }
    }
}

impl Default for Spool {
    fn default() -> Self {
        Spool::new()
    }
}

/// The rows still in memory, in order, as their encoded bodies.
fn replay_held<E: From<EvalError>>(
    held: &[u8],
    each: &mut impl FnMut(&[u8]) -> Result<(), E>,
) -> Result<(), E> {
    let mut at = 0;
    while at < held.len() {
        let len = u32::from_le_bytes(take(held, at)?) as usize;
        let body = held.get(at + 4..at + 4 + len).ok_or_else(corrupt)?;
        each(body)?;
        at += 4 + len;
    }
    Ok(())
}

fn index_of<T: PartialEq + Copy>(all: &[T], x: T) -> u8 {
    all.iter().position(|y| *y == x).unwrap_or(0) as u8
}

fn failed(source: std::io::Error) -> EvalError {
    EvalError::Scratch {
        dir: std::env::temp_dir(),
        source,
    }
}

fn corrupt() -> EvalError {
    failed(std::io::Error::new(
        std::io::ErrorKind::InvalidData,
        "a row read back is not as written",
    ))
}

fn take<const N: usize>(b: &[u8], at: usize) -> Result<[u8; N], EvalError> {
    b.get(at..at + N)
        .and_then(|s| s.try_into().ok())
        .ok_or_else(corrupt)
}

/// A new file in the temporary folder, removed from the folder at once on
/// Unix (the open handle keeps it), so nothing is left behind by a crash.
fn scratch() -> std::io::Result<std::fs::File> {
    let dir = std::env::temp_dir();
    let stamp = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_nanos());
    for attempt in 0..100u32 {
        let path = dir.join(format!(
            ".limen-rows-{}-{stamp}-{attempt}",
            std::process::id()
        ));
        let mut options = std::fs::OpenOptions::new();
        options.read(true).write(true).create_new(true);
        // Client results: readable by this user alone, for the moment the
        // name exists.
        #[cfg(unix)]
        std::os::unix::fs::OpenOptionsExt::mode(&mut options, 0o600);
        match options.open(&path) {
            Ok(f) => {
                let _ = std::fs::remove_file(&path);
                return Ok(f);
            }
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => continue,
            Err(e) => return Err(e),
        }
    }
    Err(std::io::Error::new(
        std::io::ErrorKind::AlreadyExists,
        "no free name for a temporary file",
    ))
}

/// A number in 7-bit groups, low first, the high bit set on all but the
/// last: line steps, lengths and name numbers mostly take one byte.
fn put_varint(b: &mut Vec<u8>, mut x: u64) {
    while x >= 0x80 {
        b.push(x as u8 | 0x80);
        x >>= 7;
    }
    b.push(x as u8);
}

/// A string: its length, then its bytes.
fn put_text(b: &mut Vec<u8>, s: &str) {
    put_varint(b, s.len() as u64);
    b.extend_from_slice(s.as_bytes());
}

/// A decimal in as few bytes as its mantissa needs: scale and sign, the
/// mantissa's length, then the mantissa (little-endian). A rounded limit
/// takes 4 bytes rather than 16; `Decoder::decimal` reads it back exactly
/// (scale and sign of zero kept).
fn put_decimal(b: &mut Vec<u8>, d: Decimal) {
    let full = d.serialize();
    let mantissa = &full[4..];
    let n = mantissa.iter().rposition(|x| *x != 0).map_or(0, |k| k + 1);
    b.push(full[2] | (full[3] & 0x80));
    b.push(n as u8);
    b.extend_from_slice(&mantissa[..n]);
}

fn keep_or_set(slot: &mut Rc<str>, name: &Rc<str>) {
    if !Rc::ptr_eq(slot, name) {
        *slot = name.clone();
    }
}

struct Decoder<'a> {
    b: &'a [u8],
    at: usize,
    names: &'a [Rc<str>],
}

impl<'a> Decoder<'a> {
    fn bytes<const N: usize>(&mut self) -> Result<[u8; N], EvalError> {
        let x = take(self.b, self.at)?;
        self.at += N;
        Ok(x)
    }

    fn u8(&mut self) -> Result<u8, EvalError> {
        Ok(self.bytes::<1>()?[0])
    }

    fn varint(&mut self) -> Result<u64, EvalError> {
        let mut x = 0u64;
        for shift in (0..64).step_by(7) {
            let byte = self.u8()?;
            x |= ((byte & 0x7f) as u64) << shift;
            if byte & 0x80 == 0 {
                return Ok(x);
            }
        }
        Err(corrupt())
    }

    fn string_into(&mut self, out: &mut String) -> Result<(), EvalError> {
        let len = usize::try_from(self.varint()?).map_err(|_| corrupt())?;
        let s = self.b.get(self.at..self.at + len).ok_or_else(corrupt)?;
        self.at += len;
        out.clear();
        out.push_str(std::str::from_utf8(s).map_err(|_| corrupt())?);
        Ok(())
    }

    fn string(&mut self) -> Result<String, EvalError> {
        let mut s = String::new();
        self.string_into(&mut s)?;
        Ok(s)
    }

    /// The next name into `slot`, which usually holds it already (from the
    /// row before): then it is left as it is, with no count to change.
    fn name_into(&mut self, slot: &mut Rc<str>) -> Result<(), EvalError> {
        let i = self.varint()?;
        keep_or_set(slot, self.name_at(i)?);
        Ok(())
    }

    fn name_at(&self, i: u64) -> Result<&'a Rc<str>, EvalError> {
        usize::try_from(i)
            .ok()
            .and_then(|i| self.names.get(i))
            .ok_or_else(corrupt)
    }

    fn decimal(&mut self) -> Result<Decimal, EvalError> {
        let [head, n] = self.bytes::<2>()?;
        let n = n as usize;
        if n > 12 || head & 0x7f > 28 {
            return Err(corrupt());
        }
        let m = self.b.get(self.at..self.at + n).ok_or_else(corrupt)?;
        self.at += n;
        let mut full = [0u8; 16];
        full[2] = head & 0x7f;
        full[3] = head & 0x80;
        full[4..4 + n].copy_from_slice(m);
        Ok(Decimal::deserialize(full))
    }

    fn optional(&mut self) -> Result<Option<Decimal>, EvalError> {
        Ok(match self.u8()? {
            0 => None,
            _ => Some(self.decimal()?),
        })
    }

    fn pick<T: Copy>(&mut self, all: &[T]) -> Result<T, EvalError> {
        all.get(self.u8()? as usize).copied().ok_or_else(corrupt)
    }

    fn row(self) -> Result<ReportRow, EvalError> {
        let mut r = ReportRow {
            line: 0,
            lab_id: String::new(),
            client_id: String::new(),
            description: String::new(),
            analyte: Rc::from(""),
            matrix: Rc::from(""),
            method: Rc::from(""),
            analyzed_on: NaiveDate::MIN,
            reported: String::new(),
            value: None,
            value_unrounded: Decimal::ZERO,
            unit: Unit::ALL[0],
            state: State::ALL[0],
            mdl: Decimal::ZERO,
            loq: Decimal::ZERO,
            mdl_unrounded: Decimal::ZERO,
            loq_unrounded: Decimal::ZERO,
            dilution: Decimal::ZERO,
            spec: None,
            spec_limit: None,
            spec_citation: Rc::from(""),
            verdict: None,
            uncertainty_pct: None,
            uncertainty: None,
            ld: None,
            beta_at_limit: None,
            weak_pass: false,
            qualifiers: Vec::new(),
            limits_row: Rc::from(""),
        };
        self.fill(&mut r)?;
        Ok(r)
    }

    /// Overwrites every field of `r` with the next row's; `r` holds the
    /// row before (or is new, as the encoder's first "row before" is).
    fn fill(mut self, r: &mut ReportRow) -> Result<(), EvalError> {
        r.line = r.line.wrapping_add(self.varint()?);
        let same = self.u8()?;
        for (k, text) in [&mut r.lab_id, &mut r.client_id, &mut r.description]
            .into_iter()
            .enumerate()
        {
            if same & (1 << k) == 0 {
                self.string_into(text)?;
            }
        }
        self.string_into(&mut r.reported)?;
        self.name_into(&mut r.analyte)?;
        self.name_into(&mut r.matrix)?;
        self.name_into(&mut r.method)?;
        self.name_into(&mut r.spec_citation)?;
        self.name_into(&mut r.limits_row)?;
        match (self.varint()?, &mut r.spec) {
            (0, spec) => *spec = None,
            (i, Some(spec)) => keep_or_set(spec, self.name_at(i - 1)?),
            (i, spec) => *spec = Some(self.name_at(i - 1)?.clone()),
        }
        let days = i32::from_le_bytes(self.bytes()?);
        r.analyzed_on = NaiveDate::from_num_days_from_ce_opt(days).ok_or_else(corrupt)?;
        r.unit = self.pick(&Unit::ALL)?;
        r.state = self.pick(&State::ALL)?;
        r.verdict = match self.u8()? {
            u8::MAX => None,
            i => Some(*Verdict::ALL.get(i as usize).ok_or_else(corrupt)?),
        };
        r.weak_pass = self.u8()? != 0;
        r.value_unrounded = self.decimal()?;
        r.mdl = self.decimal()?;
        r.loq = self.decimal()?;
        r.mdl_unrounded = self.decimal()?;
        r.loq_unrounded = self.decimal()?;
        r.dilution = self.decimal()?;
        r.value = self.optional()?;
        r.spec_limit = self.optional()?;
        r.uncertainty_pct = self.optional()?;
        r.uncertainty = self.optional()?;
        r.ld = self.optional()?;
        r.beta_at_limit = self.optional()?;
        let n = self.u8()?;
        r.qualifiers.clear();
        for _ in 0..n {
            let q = self.string()?;
            r.qualifiers.push(q);
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::str::FromStr;

    fn d(s: &str) -> Decimal {
        Decimal::from_str(s).unwrap()
    }

    fn row(i: u64, names: &[Rc<str>]) -> ReportRow {
        // The rows of a sample repeat its ids (three rows here) and, less
        // often, its description (two); lines step by one, sometimes more.
        ReportRow {
            line: i + 2 + (i / 7) * 300,
            lab_id: format!("L{}", i / 3),
            client_id: if i % 9 < 3 {
                String::new()
            } else {
                format!("C-{}", i / 3)
            },
            description: format!("chip é {}", i / 2),
            analyte: names[(i % 2) as usize].clone(),
            matrix: names[2].clone(),
            method: names[3].clone(),
            analyzed_on: NaiveDate::from_ymd_opt(2026, 11, 1 + (i % 28) as u32).unwrap(),
            reported: if i % 4 == 0 {
                "< 0.600".into()
            } else {
                format!("{i}.5")
            },
            value: (i % 4 != 0).then(|| d("12.5") + Decimal::from(i)),
            value_unrounded: d("12.4999") + Decimal::from(i),
            unit: Unit::ALL[(i % 10) as usize],
            state: State::ALL[(i % 4) as usize],
            mdl: d("0.600"),
            loq: d("2.00"),
            mdl_unrounded: d("0.59871"),
            loq_unrounded: d("1.99571"),
            dilution: Decimal::from(1 + i % 3),
            spec: (i % 5 != 0).then(|| names[4].clone()),
            spec_limit: (i % 5 != 0).then(|| d("90")),
            spec_citation: names[5].clone(),
            verdict: (i % 6 != 5).then(|| Verdict::ALL[(i % 5) as usize]),
            uncertainty_pct: (i % 2 == 0).then(|| d("10")),
            uncertainty: (i % 2 == 0).then(|| d("1.2")),
            ld: (i % 7 == 0).then(|| d("-0.031")),
            beta_at_limit: (i % 7 == 0).then(|| d("0.000001")),
            weak_pass: i % 9 == 0,
            qualifiers: (0..i % 3).map(|k| format!("q{k}")).collect(),
            limits_row: names[(6 + i % 2) as usize].clone(),
        }
    }

    fn names() -> Vec<Rc<str>> {
        [
            "Pb",
            "Cd",
            "paint",
            "6010D",
            "US-PAINT-PB",
            "16 CFR 1303",
            "MDL-1",
            "limits.csv:7",
        ]
        .into_iter()
        .map(Rc::from)
        .collect()
    }

    /// `d` written short and read back; every byte written is read.
    fn round_trip(d: Decimal) -> Decimal {
        let mut b = Vec::new();
        put_decimal(&mut b, d);
        let names = [];
        let mut dec = Decoder {
            b: &b,
            at: 0,
            names: &names,
        };
        let back = dec.decimal().unwrap();
        assert_eq!(dec.at, b.len());
        back
    }

    // Reference: rust_decimal's own 16-byte serialization, which the spool
    // once wrote whole: the short form must give back the same bytes
    // (equal decimals of another scale would print otherwise).
    proptest::proptest! {
        #[test]
        fn decimals_come_back_bit_for_bit(
            lo in proptest::prelude::any::<u32>(),
            mid in proptest::prelude::any::<u32>(),
            hi in proptest::prelude::any::<u32>(),
            negative in proptest::prelude::any::<bool>(),
            scale in 0u32..=28,
            width in 0usize..3,
        ) {
            let parts = [lo, if width > 0 { mid } else { 0 }, if width > 1 { hi } else { 0 }];
            let d = Decimal::from_parts(parts[0], parts[1], parts[2], negative, scale);
            proptest::prop_assert_eq!(round_trip(d).serialize(), d.serialize());
        }
    }

    #[test]
    fn varints_come_back_at_every_width_and_damage_is_an_error() {
        let names = [];
        let read = |b: &[u8]| {
            let mut dec = Decoder {
                b,
                at: 0,
                names: &names,
            };
            dec.varint().map(|x| (x, dec.at))
        };
        for x in [
            0,
            1,
            127,
            128,
            300,
            16_383,
            16_384,
            u32::MAX as u64,
            u64::MAX,
        ] {
            let mut b = Vec::new();
            put_varint(&mut b, x);
            assert_eq!(read(&b).unwrap(), (x, b.len()), "{x}");
        }
        let mut b = Vec::new();
        put_varint(&mut b, 300);
        assert_eq!(b, [0xac, 0x02]);
        // Cut short, or longer than a u64 can be.
        assert!(read(&b[..1]).is_err());
        assert!(read(&[0xff; 11]).is_err());
    }

    #[test]
    fn zeros_keep_their_scale_and_sign() {
        for d in [d("0"), d("0.000"), -d("0.0"), d("1.20"), d("-0.031")] {
            let back = round_trip(d);
            assert_eq!(back.serialize(), d.serialize(), "{d}");
            assert_eq!(back.to_string(), d.to_string());
        }
    }

    #[test]
    fn rows_come_back_as_pushed_from_memory_and_from_the_file() {
        let names = names();
        // Enough rows to pass the in-memory size several times.
        let many = (IN_MEMORY / 60) as u64 * 3;
        for (spool, n) in [(Spool::in_memory(), 500), (Spool::new(), many)] {
            let mut spool = spool;
            for i in 0..n {
                spool.push(&row(i, &names)).unwrap();
            }
            assert_eq!(spool.file.is_some(), n == many);
            for _ in 0..2 {
                let mut i = 0;
                spool
                    .replay(|r| {
                        assert_eq!(*r, row(i, &names));
                        i += 1;
                        Ok::<(), EvalError>(())
                    })
                    .unwrap();
                assert_eq!(i, n);
            }
        }
    }

    #[test]
    fn spills_only_past_the_memory_it_may_hold_and_counts_rows() {
        let names = names();
        let many = (IN_MEMORY / 60) as u64 * 2;
        let mut small = Spool::new();
        assert!(small.is_empty());
        for i in 0..500 {
            small.push(&row(i, &names)).unwrap();
        }
        assert!(!small.is_empty());
        assert_eq!(small.len(), 500);
        assert!(small.file.is_none(), "500 rows stay in memory");
        let (mut large, mut kept) = (Spool::new(), Spool::in_memory());
        for i in 0..many {
            large.push(&row(i, &names)).unwrap();
            kept.push(&row(i, &names)).unwrap();
        }
        assert!(large.file.is_some());
        assert!(
            large.held.len() < IN_MEMORY,
            "memory is given back on spilling"
        );
        assert!(kept.file.is_none(), "in_memory never spills");
        assert_eq!((large.len(), kept.len()), (many as usize, many as usize));
    }

    // A sample's rows repeat its ids and description: each repeat costs its
    // flag bit, not its bytes. Two rows alike but for those three texts
    // differ in size by exactly the texts (a length byte and the bytes each).
    #[test]
    fn texts_repeated_from_the_row_before_are_not_written_again() {
        let names = names();
        let mut spool = Spool::in_memory();
        let first = row(4, &names);
        spool.push(&first).unwrap();
        let before = spool.held.len();
        spool.push(&first).unwrap();
        let repeated = spool.held.len() - before;
        let mut other = first.clone();
        other.lab_id = "L-other".into();
        other.client_id = "C-other".into();
        other.description = "another chip".into();
        let before = spool.held.len();
        spool.push(&other).unwrap();
        let new = spool.held.len() - before;
        assert_eq!(new - repeated, (1 + 7) + (1 + 7) + (1 + 12));
        // And each comes back as pushed.
        let mut back = Vec::new();
        spool
            .replay(|r| {
                back.push(r.clone());
                Ok::<(), EvalError>(())
            })
            .unwrap();
        assert_eq!(back, [first.clone(), first, other]);
    }

    #[test]
    fn names_come_back_shared() {
        let names = names();
        let mut spool = Spool::in_memory();
        spool.push(&row(1, &names)).unwrap();
        spool
            .replay(|r| {
                assert!(Rc::ptr_eq(&r.analyte, &names[1]));
                Ok::<(), EvalError>(())
            })
            .unwrap();
    }
}
