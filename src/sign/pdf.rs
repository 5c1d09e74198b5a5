//! Placing a signature in a finished PDF as an incremental update (ISO
//! 32000-1, 7.5.6): the original bytes stay as they are, and a signature
//! dictionary, an invisible signature widget on the first page, that page
//! and the catalog (now with an /AcroForm) are appended with their own
//! cross-reference section. The /ByteRange covers the whole file but the
//! /Contents hole (12.8.1).
//!
//! The writer expects a classic cross-reference table, as the certificate
//! writer produces; the reader accepts any file and never panics.

use std::collections::BTreeMap;

/// Space for the four /ByteRange numbers, filled in once the offsets are
/// known.
const RANGE_WIDTH: usize = 44;

/// What a signature dictionary says about itself, besides the CMS.
pub struct Fields<'a> {
    /// The signer's name, /Name.
    pub name: &'a str,
    pub reason: &'a str,
    pub location: &'a str,
    /// /M, as seconds since 1970 (UTC).
    pub at: i64,
}

fn find(hay: &[u8], needle: &[u8], from: usize) -> Option<usize> {
    hay.get(from..)?
        .windows(needle.len())
        .position(|w| w == needle)
        .map(|p| p + from)
}

fn rfind(hay: &[u8], needle: &[u8]) -> Option<usize> {
    hay.windows(needle.len()).rposition(|w| w == needle)
}

fn skip_ws(b: &[u8], mut i: usize) -> usize {
    while i < b.len() && matches!(b[i], b' ' | b'\n' | b'\r' | b'\t' | b'\x0c' | 0) {
        i += 1;
    }
    i
}

fn number(b: &[u8], i: usize) -> Option<(u64, usize)> {
    let start = skip_ws(b, i);
    let mut end = start;
    while end < b.len() && b[end].is_ascii_digit() && end - start < 19 {
        end += 1;
    }
    let n = std::str::from_utf8(b.get(start..end)?).ok()?.parse().ok()?;
    Some((n, end))
}

/// `/Key N 0 R` inside `dict`: the object number N.
fn reference(dict: &[u8], key: &[u8]) -> Option<u64> {
    let at = find(dict, key, 0)? + key.len();
    let (n, after) = number(dict, at)?;
    let (_, after) = number(dict, after)?;
    (dict.get(skip_ws(dict, after)) == Some(&b'R')).then_some(n)
}

/// The trailer of the last cross-reference section and where that section
/// starts.
struct Trailer {
    dict: Vec<u8>,
    xref: usize,
}

fn trailer(pdf: &[u8]) -> Result<Trailer, String> {
    let sx = rfind(pdf, b"startxref").ok_or("no startxref")?;
    let (xref, _) = number(pdf, sx + 9).ok_or("no number after startxref")?;
    let xref = usize::try_from(xref).map_err(|_| "startxref too large")?;
    if pdf.get(xref..xref + 4) != Some(b"xref") {
        return Err("the cross-reference section is not a classic table".into());
    }
    let t = find(pdf, b"trailer", xref).ok_or("no trailer")?;
    let open = find(pdf, b"<<", t).ok_or("no trailer dictionary")?;
    let close = rfind(&pdf[..sx], b">>").ok_or("no end of the trailer dictionary")?;
    if close < open {
        return Err("a broken trailer dictionary".into());
    }
    Ok(Trailer {
        dict: pdf[open..close + 2].to_vec(),
        xref,
    })
}

/// Object number -> byte offset, from the classic table at `xref`.
fn xref_table(pdf: &[u8], xref: usize) -> Result<BTreeMap<u64, usize>, String> {
    let mut out = BTreeMap::new();
    let mut i = xref + 4;
    loop {
        let j = skip_ws(pdf, i);
        if pdf.get(j..j + 7) == Some(b"trailer") {
            return Ok(out);
        }
        let (first, a) = number(pdf, j).ok_or("a bad cross-reference subsection")?;
        let (count, b) = number(pdf, a).ok_or("a bad cross-reference subsection")?;
        i = b;
        for k in 0..count {
            let (off, c) = number(pdf, i).ok_or("a bad cross-reference entry")?;
            let (_, d) = number(pdf, c).ok_or("a bad cross-reference entry")?;
            let e = skip_ws(pdf, d);
            let kind = *pdf.get(e).ok_or("a truncated cross-reference entry")?;
            if kind == b'n' {
                out.insert(
                    first + k,
                    usize::try_from(off).map_err(|_| "offset too large")?,
                );
            }
            i = e + 1;
        }
    }
}

/// The dictionary text of object `n`, from `N 0 obj` to `endobj`.
fn object(pdf: &[u8], table: &BTreeMap<u64, usize>, n: u64) -> Result<Vec<u8>, String> {
    let at = *table
        .get(&n)
        .ok_or(format!("object {n} is not in the table"))?;
    let head = format!("{n} 0 obj");
    if pdf.get(at..at + head.len()) != Some(head.as_bytes()) {
        return Err(format!("object {n} is not where the table says"));
    }
    let end = find(pdf, b"endobj", at).ok_or(format!("object {n} has no endobj"))?;
    let body = &pdf[at + head.len()..end];
    let s = skip_ws(body, 0);
    let e = body
        .iter()
        .rposition(|c| !c.is_ascii_whitespace())
        .map_or(s, |p| p + 1);
    let dict = &body[s..e];
    if !dict.starts_with(b"<<") || !dict.ends_with(b">>") || find(dict, b"stream", 0).is_some() {
        return Err(format!("object {n} is not a plain dictionary"));
    }
    Ok(dict.to_vec())
}

/// `dict` with `entry` added before its closing `>>`.
fn with_entry(dict: &[u8], entry: &str) -> Vec<u8> {
    let mut out = dict[..dict.len() - 2].to_vec();
    out.extend_from_slice(entry.as_bytes());
    out.extend_from_slice(b">>");
    out
}

/// A text string as UTF-16BE hex with its byte-order mark (ISO 32000-1,
/// 7.9.2.2), so any name or reason is written exactly.
fn text(s: &str) -> String {
    let mut out = String::from("<FEFF");
    for u in s.encode_utf16() {
        out.push_str(&format!("{u:04X}"));
    }
    out.push('>');
    out
}

/// A PDF date (ISO 32000-1, 7.9.4) in UTC.
fn date(epoch: i64) -> String {
    let t = chrono::DateTime::from_timestamp(epoch, 0).unwrap_or_default();
    t.format("D:%Y%m%d%H%M%SZ").to_string()
}

/// Where the signature's parts lie in the updated file.
pub struct Prepared {
    pub bytes: Vec<u8>,
    /// Offsets of the /Contents hole: the `<` and one past the `>`.
    hole: (usize, usize),
}

impl Prepared {
    /// The signed bytes: everything but the hole.
    pub fn signed(&self) -> [&[u8]; 2] {
        [&self.bytes[..self.hole.0], &self.bytes[self.hole.1..]]
    }

    /// Writes the CMS into the hole; false when it does not fit.
    pub fn fill(&mut self, cms: &[u8]) -> bool {
        let room = self.hole.1 - self.hole.0 - 2;
        if cms.len() * 2 > room {
            return false;
        }
        let mut hex = String::with_capacity(room);
        for b in cms {
            hex.push_str(&format!("{b:02X}"));
        }
        let at = self.hole.0 + 1;
        self.bytes[at..at + hex.len()].copy_from_slice(hex.as_bytes());
        true
    }
}

/// Appends the signature's objects to `pdf` with a /Contents hole of
/// `room` bytes and the /ByteRange filled in.
pub fn prepare(pdf: &[u8], room: usize, f: &Fields<'_>) -> Result<Prepared, String> {
    let tr = trailer(pdf)?;
    let table = xref_table(pdf, tr.xref)?;
    let root = reference(&tr.dict, b"/Root").ok_or("the trailer has no /Root")?;
    let (size, _) = number(&tr.dict, find(&tr.dict, b"/Size", 0).ok_or("no /Size")? + 5)
        .ok_or("a bad /Size")?;
    let catalog = object(pdf, &table, root)?;
    if find(&catalog, b"/AcroForm", 0).is_some() {
        return Err("the document already has a form".into());
    }
    let pages = reference(&catalog, b"/Pages").ok_or("the catalog has no /Pages")?;
    let pages_dict = object(pdf, &table, pages)?;
    let kids = find(&pages_dict, b"/Kids", 0).ok_or("the page tree has no /Kids")?;
    let open = find(&pages_dict, b"[", kids).ok_or("a bad /Kids")?;
    let (first_page, _) = number(&pages_dict, open + 1).ok_or("a bad /Kids")?;
    let page = object(pdf, &table, first_page)?;

    let sig = size;
    let widget = size + 1;
    let page = match find(&page, b"/Annots", 0) {
        Some(a) => {
            let open = find(&page, b"[", a).ok_or("a bad /Annots")?;
            let mut p = page[..open + 1].to_vec();
            p.extend_from_slice(format!("{widget} 0 R ").as_bytes());
            p.extend_from_slice(&page[open + 1..]);
            p
        }
        None => with_entry(&page, &format!("/Annots[{widget} 0 R]")),
    };
    let catalog = with_entry(
        &catalog,
        &format!("/AcroForm<</Fields[{widget} 0 R]/SigFlags 3>>"),
    );

    let mut out = pdf.to_vec();
    if !out.ends_with(b"\n") {
        out.push(b'\n');
    }
    let mut offsets = BTreeMap::new();
    offsets.insert(sig, out.len());
    out.extend_from_slice(
        format!(
            "{sig} 0 obj\n<</Type/Sig/Filter/Adobe.PPKLite/SubFilter/ETSI.CAdES.detached/ByteRange["
        )
        .as_bytes(),
    );
    let range_at = out.len();
    out.extend_from_slice(&[b' '; RANGE_WIDTH]);
    out.extend_from_slice(b"]/Contents");
    let hole_start = out.len();
    out.push(b'<');
    out.resize(out.len() + room, b'0');
    out.push(b'>');
    let hole_end = out.len();
    out.extend_from_slice(
        format!(
            "/M({})/Name{}/Reason{}/Location{}>>\nendobj\n",
            date(f.at),
            text(f.name),
            text(f.reason),
            text(f.location)
        )
        .as_bytes(),
    );
    for (n, dict) in [
        (
            widget,
            format!(
                "<</Type/Annot/Subtype/Widget/FT/Sig/T(Signature1)/V {sig} 0 R/Rect[0 0 0 0]/F 132/P {first_page} 0 R>>"
            )
            .into_bytes(),
        ),
        (first_page, page),
        (root, catalog),
    ] {
        offsets.insert(n, out.len());
        out.extend_from_slice(format!("{n} 0 obj\n").as_bytes());
        out.extend_from_slice(&dict);
        out.extend_from_slice(b"\nendobj\n");
    }
    let xref_at = out.len();
    out.extend_from_slice(b"xref\n");
    let nums: Vec<u64> = offsets.keys().copied().collect();
    let mut i = 0;
    while i < nums.len() {
        let mut j = i;
        while j + 1 < nums.len() && nums[j + 1] == nums[j] + 1 {
            j += 1;
        }
        out.extend_from_slice(format!("{} {}\n", nums[i], j - i + 1).as_bytes());
        for n in &nums[i..=j] {
            out.extend_from_slice(format!("{:010} 00000 n \n", offsets[n]).as_bytes());
        }
        i = j + 1;
    }
    let mut trailer = format!("trailer\n<</Size {}/Root {root} 0 R", size + 2);
    if let Some(info) = reference(&tr.dict, b"/Info") {
        trailer.push_str(&format!("/Info {info} 0 R"));
    }
    if let Some(id) = find(&tr.dict, b"/ID", 0) {
        let close = find(&tr.dict, b"]", id).ok_or("a bad /ID")?;
        trailer.push_str(&String::from_utf8_lossy(&tr.dict[id..=close]));
    }
    trailer.push_str(&format!(
        "/Prev {}>>\nstartxref\n{xref_at}\n%%EOF\n",
        tr.xref
    ));
    out.extend_from_slice(trailer.as_bytes());

    let range = format!("0 {hole_start} {hole_end} {}", out.len() - hole_end);
    if range.len() > RANGE_WIDTH {
        return Err("the file is too large to sign".into());
    }
    out[range_at..range_at + range.len()].copy_from_slice(range.as_bytes());
    Ok(Prepared {
        bytes: out,
        hole: (hole_start, hole_end),
    })
}

/// A signature found in a file: what its dictionary says, before any
/// cryptography.
#[derive(Debug)]
pub struct Found {
    pub range: [u64; 4],
    /// Offsets of the /Contents `<` and one past its `>`.
    pub hole: (usize, usize),
    pub cms: Vec<u8>,
    pub at: Option<String>,
}

/// The last signature dictionary in the file: Ok(None) when there is none,
/// Err when there is one but it cannot be read.
pub fn locate(pdf: &[u8]) -> Result<Option<Found>, String> {
    let Some(br) = rfind(pdf, b"/ByteRange") else {
        // A signature field or dictionary whose range was defaced is a
        // damaged signature, not an unsigned file.
        for mark in [
            &b"/FT/Sig"[..],
            b"/Type/Sig",
            b"/Adobe.PPKLite",
            b"ETSI.CAdES",
        ] {
            if find(pdf, mark, 0).is_some() {
                return Err("a signature whose /ByteRange cannot be found".into());
            }
        }
        return Ok(None);
    };
    let open = find(pdf, b"[", br).ok_or("a /ByteRange without numbers")?;
    let mut range = [0u64; 4];
    let mut i = open + 1;
    for r in &mut range {
        let (n, after) = number(pdf, i).ok_or("a /ByteRange that is not four numbers")?;
        *r = n;
        i = after;
    }
    if pdf.get(skip_ws(pdf, i)) != Some(&b']') {
        return Err("a /ByteRange that is not four numbers".into());
    }
    // The /Contents of the same dictionary: the nearest one either side.
    let end = find(pdf, b"endobj", br).unwrap_or(pdf.len());
    let start = rfind(&pdf[..br], b" obj").unwrap_or(0);
    let dict = &pdf[start..end];
    let c = find(dict, b"/Contents", 0).ok_or("a signature without /Contents")?;
    let lt = skip_ws(dict, c + 9);
    if dict.get(lt) != Some(&b'<') {
        return Err("the signature /Contents is not a hex string".into());
    }
    let gt = find(dict, b">", lt).ok_or("an unterminated /Contents")?;
    let hex = &dict[lt + 1..gt];
    let mut cms = Vec::with_capacity(hex.len() / 2);
    let digits: Vec<u8> = hex
        .iter()
        .copied()
        .filter(|c| !c.is_ascii_whitespace())
        .collect();
    for pair in digits.chunks(2) {
        let s = std::str::from_utf8(pair).map_err(|_| "a /Contents that is not hex")?;
        cms.push(u8::from_str_radix(s, 16).map_err(|_| "a /Contents that is not hex")?);
    }
    let at = find(dict, b"/M(", 0).and_then(|m| {
        let close = find(dict, b")", m)?;
        Some(String::from_utf8_lossy(&dict[m + 3..close]).into_owned())
    });
    Ok(Some(Found {
        range,
        hole: (start + lt, start + gt + 1),
        cms,
        at,
    }))
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// A minimal one-page PDF with a classic table, as the certificate
    /// writer lays one out.
    pub(crate) fn tiny() -> Vec<u8> {
        let objs = [
            "<</Type/Pages/Count 1/Kids[2 0 R]>>",
            "<</Type/Page/MediaBox[0 0 10 10]/Parent 1 0 R/Annots[]>>",
            "<</Type/Catalog/Pages 1 0 R>>",
        ];
        let mut out = b"%PDF-1.3\n".to_vec();
        let mut offs = Vec::new();
        for (i, o) in objs.iter().enumerate() {
            offs.push(out.len());
            out.extend_from_slice(format!("{} 0 obj\n{o}\nendobj\n", i + 1).as_bytes());
        }
        let x = out.len();
        out.extend_from_slice(b"xref\n0 4\n0000000000 65535 f \n");
        for o in offs {
            out.extend_from_slice(format!("{o:010} 00000 n \n").as_bytes());
        }
        out.extend_from_slice(
            format!("trailer\n<</Root 3 0 R/ID[(A)(A)]/Size 4>>\nstartxref\n{x}\n%%EOF").as_bytes(),
        );
        out
    }

    const F: Fields<'static> = Fields {
        name: "Dr Ø",
        reason: "r",
        location: "l",
        at: 1_795_000_000,
    };

    #[test]
    fn the_update_keeps_the_original_and_covers_all_but_the_hole() {
        let pdf = tiny();
        let mut p = prepare(&pdf, 20, &F).unwrap();
        assert!(p.bytes.starts_with(&pdf));
        assert!(p.fill(&[0xAB; 10]));
        assert!(!p.fill(&[0; 11]));
        let found = locate(&p.bytes).unwrap().unwrap();
        let len = p.bytes.len() as u64;
        // ISO 32000-1 12.8.1: [0 hole-start hole-end rest], the whole file.
        assert_eq!(found.range[0], 0);
        assert_eq!(found.range[1], found.hole.0 as u64);
        assert_eq!(found.range[2], found.hole.1 as u64);
        assert_eq!(found.range[2] + found.range[3], len);
        assert_eq!(&found.cms[..10], &[0xAB; 10]);
        // 1795000000 s is 2026-11-18T11:06:40Z (GNU date -u).
        assert_eq!(found.at.as_deref(), Some("D:20261118110640Z"));
        let text = String::from_utf8_lossy(&p.bytes);
        assert!(text.contains("/Annots[5 0 R ]"), "{text}");
        assert!(text.contains("/AcroForm<</Fields[5 0 R]/SigFlags 3>>"));
        assert!(text.contains("/Prev "));
        assert!(text.contains("/Name<FEFF00440072002000D8>"));
        // The new table's entries point at their objects.
        let tr = trailer(&p.bytes).unwrap();
        let table = xref_table(&p.bytes, tr.xref).unwrap();
        for (n, off) in table {
            assert!(p.bytes[off..].starts_with(format!("{n} 0 obj").as_bytes()));
        }
    }

    #[test]
    fn files_it_cannot_sign_are_refused_and_unsigned_ones_are_none() {
        assert!(prepare(b"%PDF-1.3\nhello", 10, &F).is_err());
        let mut t = tiny();
        t.truncate(t.len() - 20);
        assert!(prepare(&t, 10, &F).is_err());
        assert!(locate(&tiny()).unwrap().is_none());
        assert!(locate(b"/ByteRange[0 1 2]").is_err());
        assert!(locate(b"/ByteRange[0 1 2 3]/Contents(x)").is_err());
    }
}
