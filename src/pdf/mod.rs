//! PDF export: laid-out pages to bytes. printpdf builds the document and
//! its fonts; the pages' content streams are written by `content`, in the
//! bytes printpdf's operators would give.
//! The embedded Liberation Sans (SIL OFL 1.1) is subset per document to the
//! characters it uses. No I/O here.

use crate::layout::{Item, Measure, Page};
use content::{Content, Glyphs};
#[cfg(test)]
use printpdf::{Color, Line, LinePoint, PaintMode, Point, Rect, TextMatrix};
use printpdf::{
    FontId, Op, ParsedFont, PdfDocument, PdfFont, PdfFontHandle, PdfPage, PdfSaveOptions, Pt,
    TextItem,
};
use std::collections::{BTreeSet, HashMap};
use std::sync::{Mutex, OnceLock};

mod content;

const REGULAR: &[u8] = include_bytes!("../../report-templates/fonts/LiberationSans-Regular.ttf");
const BOLD: &[u8] = include_bytes!("../../report-templates/fonts/LiberationSans-Bold.ttf");

#[derive(Debug, thiserror::Error, PartialEq)]
pub enum PdfError {
    #[error("a document needs at least one page")]
    NoPages,
    #[error("page {page}: a position or size is not a finite number ({what})")]
    NotFinite { page: usize, what: String },
    #[error("the embedded font could not be read or subset: {0}")]
    Font(String),
}

/// One face: advance widths per character, in em.
pub struct Face {
    bytes: &'static [u8],
    parsed: ParsedFont,
    advance: HashMap<char, f32>,
    /// `advance` for U+0000 to U+00FF, control characters measured as a
    /// space (as `clean` shows them): most text, without hashing.
    latin: [f32; 256],
    missing: f32,
    /// Subsets made lately, by the characters they hold: a run of
    /// certificates mostly uses the same characters, and cutting the face
    /// costs more than copying a cut one.
    subsets: Mutex<Vec<(BTreeSet<char>, ParsedFont)>>,
}

/// How many subsets of each face are kept.
const SUBSETS_KEPT: usize = 8;

impl Face {
    fn load(bytes: &'static [u8]) -> Result<Face, PdfError> {
        let mut warnings = Vec::new();
        let parsed = ParsedFont::from_bytes(bytes, 0, &mut warnings)
            .ok_or_else(|| PdfError::Font("cannot parse the embedded font".into()))?;
        let em = parsed.units_per_em.max(1) as f32;
        let advance = parsed
            .codepoint_to_glyph
            .iter()
            .filter_map(|(cp, gid)| {
                let ch = char::from_u32(*cp)?;
                let w = *parsed.glyph_widths.get(gid)? as f32 / em;
                Some((ch, w))
            })
            .collect::<HashMap<_, _>>();
        let missing = advance.get(&'?').copied().unwrap_or(0.5);
        let mut latin = [missing; 256];
        for (k, w) in latin.iter_mut().enumerate() {
            let c = char::from(k as u8);
            let c = if c.is_control() { ' ' } else { c };
            if let Some(a) = advance.get(&c) {
                *w = *a;
            }
        }
        Ok(Face {
            bytes,
            parsed,
            advance,
            latin,
            missing,
            subsets: Mutex::new(Vec::new()),
        })
    }

    pub fn has(&self, c: char) -> bool {
        self.advance.contains_key(&c)
    }

    /// The advance of `text` as `clean` would show it.
    fn width(&self, text: &str) -> f32 {
        text.chars()
            // Control characters (Unicode Cc) all lie below U+0100.
            .map(|c| match self.latin.get(c as usize) {
                Some(w) => *w,
                None => self.advance.get(&c).copied().unwrap_or(self.missing),
            })
            .sum()
    }

    /// The face cut down to `chars` (and .notdef), as a font printpdf embeds
    /// whole; the same characters give the same subset, so a recent one is
    /// reused.
    fn subset(&self, chars: &BTreeSet<char>) -> Result<ParsedFont, PdfError> {
        let kept = |v: &Vec<(BTreeSet<char>, ParsedFont)>| {
            v.iter().find(|(c, _)| c == chars).map(|(_, f)| f.clone())
        };
        // A poisoned lock only means another thread panicked mid-push; the
        // list is still a list of finished subsets.
        let lock = || self.subsets.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(f) = kept(&lock()) {
            return Ok(f);
        }
        let f = self.cut(chars)?;
        let mut v = lock();
        if kept(&v).is_none() {
            if v.len() == SUBSETS_KEPT {
                v.remove(0);
            }
            v.push((chars.clone(), f.clone()));
        }
        Ok(f)
    }

    fn cut(&self, chars: &BTreeSet<char>) -> Result<ParsedFont, PdfError> {
        use allsorts::binary::read::ReadScope;
        use allsorts::font_data::FontData;
        let mut ids: Vec<u16> = chars
            .iter()
            .filter_map(|c| self.parsed.lookup_glyph_index(*c as u32))
            .filter(|g| *g != 0)
            .collect();
        ids.sort_unstable();
        ids.dedup();
        ids.insert(0, 0);
        let scope = ReadScope::new(self.bytes);
        let file = scope
            .read::<FontData<'_>>()
            .map_err(|e| PdfError::Font(e.to_string()))?;
        let provider = file
            .table_provider(0)
            .map_err(|e| PdfError::Font(e.to_string()))?;
        let bytes = allsorts::subset::subset(
            &provider,
            &ids,
            &allsorts::subset::SubsetProfile::Pdf,
            allsorts::subset::CmapTarget::Unicode,
        )
        .map_err(|e| PdfError::Font(e.to_string()))?;
        let mut warnings = Vec::new();
        ParsedFont::from_bytes(&bytes, 0, &mut warnings)
            .ok_or_else(|| PdfError::Font("the subset font does not parse".into()))
    }
}

/// The embedded regular and bold faces, parsed once per process.
pub struct Fonts {
    pub regular: Face,
    pub bold: Face,
}

impl Fonts {
    pub fn get() -> Result<&'static Fonts, PdfError> {
        static FONTS: OnceLock<Result<Fonts, PdfError>> = OnceLock::new();
        FONTS
            .get_or_init(|| {
                Ok(Fonts {
                    regular: Face::load(REGULAR)?,
                    bold: Face::load(BOLD)?,
                })
            })
            .as_ref()
            .map_err(Clone::clone)
    }

    fn face(&self, bold: bool) -> &Face {
        if bold { &self.bold } else { &self.regular }
    }
}

impl Clone for PdfError {
    fn clone(&self) -> Self {
        match self {
            PdfError::NoPages => PdfError::NoPages,
            PdfError::NotFinite { page, what } => PdfError::NotFinite {
                page: *page,
                what: what.clone(),
            },
            PdfError::Font(s) => PdfError::Font(s.clone()),
        }
    }
}

impl Measure for Fonts {
    fn width(&self, text: &str, size: f32, bold: bool) -> f32 {
        self.face(bold).width(text) * size
    }
}

/// Text as the PDF can show it: control characters (newline, tab, CR),
/// which would print as "?", become spaces.
pub fn clean(text: &str) -> String {
    text.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect()
}

#[derive(Debug, Clone)]
pub struct Meta {
    pub title: String,
    pub author: String,
    pub subject: String,
    pub creator: String,
    /// Seconds since 1970 UTC, for the document's dates.
    pub created: i64,
}

#[cfg(test)]
fn rgb((r, g, b): (f32, f32, f32)) -> Color {
    Color::Rgb(printpdf::Rgb {
        r,
        g,
        b,
        icc_profile: None,
    })
}

fn finite(page: usize, what: &str, values: &[f32]) -> Result<(), PdfError> {
    if values.iter().all(|v| v.is_finite()) {
        Ok(())
    } else {
        Err(PdfError::NotFinite {
            page,
            what: what.to_string(),
        })
    }
}

/// FNV-1a, hex: a stable id for the same bytes (no cryptographic claim).
fn stable_id(bytes: &[u8]) -> String {
    let mut h: u128 = 0x6c62272e07bb014262b821756295c58d;
    for b in bytes {
        h ^= *b as u128;
        h = h.wrapping_mul(0x0000000001000000000000000000013B);
    }
    format!("{h:032X}")
}

#[cfg(test)]
/// One text run as its own text section that sets its font before showing
/// anything: text shown before a font is set is invisible.
fn text_ops(
    font: &FontId,
    x: f32,
    y_from_bottom: f32,
    size: f32,
    color: (f32, f32, f32),
    text: String,
) -> [Op; 6] {
    [
        Op::StartTextSection,
        Op::SetFont {
            font: PdfFontHandle::External(font.clone()),
            size: Pt(size),
        },
        Op::SetFillColor { col: rgb(color) },
        Op::SetTextMatrix {
            matrix: TextMatrix::Translate(Pt(x), Pt(y_from_bottom)),
        },
        Op::ShowText {
            items: vec![TextItem::Text(text)],
        },
        Op::EndTextSection,
    ]
}

/// The text as the embedded font can show it: characters it lacks become
/// '?' and are collected for the warning.
fn shown_text(fonts: &Fonts, text: &str, bold: bool, missing: &mut BTreeSet<char>) -> String {
    clean(text)
        .chars()
        .map(|c| {
            if fonts.face(bold).has(c) || c == ' ' {
                c
            } else {
                missing.insert(c);
                '?'
            }
        })
        .collect()
}

/// Embeds, per face, a subset holding just the characters the pages use,
/// and returns each embedded face's character map.
fn embed_fonts(
    doc: &mut PdfDocument,
    pages: &[Page],
    fonts: &Fonts,
    ids: &[FontId; 2],
) -> Result<[Option<Glyphs>; 2], PdfError> {
    let mut used: [BTreeSet<char>; 2] = [BTreeSet::new(), BTreeSet::new()];
    let mut ignored = BTreeSet::new();
    for p in pages {
        for it in &p.items {
            if let Item::Text { text, bold, .. } = it {
                used[*bold as usize].extend(shown_text(fonts, text, *bold, &mut ignored).chars());
            }
        }
    }
    let mut glyphs = [None, None];
    for (k, set) in used.iter().enumerate() {
        if !set.is_empty() {
            let face = fonts.face(k == 1);
            let subset = face.subset(set)?;
            glyphs[k] = Some(Glyphs::new(
                subset.codepoint_to_glyph.iter().map(|(c, g)| (*c, *g)),
            ));
            doc.resources
                .fonts
                .map
                .insert(ids[k].clone(), PdfFont::new(subset));
        }
    }
    Ok(glyphs)
}

#[cfg(test)]
/// A stroked line between two points, in PDF coordinates.
fn line_ops(a: (f32, f32), b: (f32, f32), width: f32, color: (f32, f32, f32)) -> [Op; 3] {
    let point = |(x, y): (f32, f32)| LinePoint {
        p: Point { x: Pt(x), y: Pt(y) },
        bezier: false,
    };
    [
        Op::SetOutlineColor { col: rgb(color) },
        Op::SetOutlineThickness { pt: Pt(width) },
        Op::DrawLine {
            line: Line {
                points: vec![point(a), point(b)],
                is_closed: false,
            },
        },
    ]
}

#[cfg(test)]
/// A filled rectangle from its lower-left corner, in PDF coordinates.
fn rect_ops(x: f32, y: f32, w: f32, h: f32, color: (f32, f32, f32)) -> [Op; 2] {
    [
        Op::SetFillColor { col: rgb(color) },
        Op::DrawRectangle {
            rectangle: Rect {
                x: Pt(x),
                y: Pt(y),
                width: Pt(w),
                height: Pt(h),
                mode: Some(PaintMode::Fill),
                winding_order: None,
            },
        },
    ]
}

/// The document information: title, author, dates from the report.
fn set_info(doc: &mut PdfDocument, meta: &Meta) -> Result<(), PdfError> {
    let date = printpdf::date::OffsetDateTime::from_unix_timestamp(meta.created)
        .map_err(|e| PdfError::Font(e.to_string()))?;
    let info = &mut doc.metadata.info;
    info.document_title = meta.title.clone();
    info.author = meta.author.clone();
    info.subject = meta.subject.clone();
    info.creator = meta.creator.clone();
    info.producer = meta.creator.clone();
    info.identifier = meta.title.clone();
    info.creation_date = date;
    info.modification_date = date;
    info.metadata_date = date;
    Ok(())
}

/// Writes pages to PDF bytes. Characters the font lacks are drawn as "?"
/// and returned, so the caller can say so.
pub fn write(pages: &[Page], meta: &Meta) -> Result<(Vec<u8>, Vec<char>), PdfError> {
    assemble(pages, meta, Streams::Own)
}

/// Who writes the pages' content streams: limen's own writer, or (as the
/// reference the tests hold it to) printpdf's operators.
#[derive(Clone, Copy, PartialEq)]
enum Streams {
    Own,
    #[cfg(test)]
    Printpdf,
}

/// What printpdf needs to see of the text to describe each font (its
/// widths and its map back to Unicode): per face, the last character shown
/// with each glyph, as printpdf's own scan of the operators would record.
struct Shown {
    last: [Vec<Option<char>>; 2],
}

impl Shown {
    fn note(&mut self, face: usize, glyph: u16, c: char) {
        let v = &mut self.last[face];
        let g = glyph as usize;
        if v.len() <= g {
            v.resize(g + 1, None);
        }
        v[g] = Some(c);
    }

    /// One text section that shows each noted character once, per face.
    fn ops(&self, ids: &[FontId; 2]) -> Vec<Op> {
        let mut ops = Vec::new();
        for (k, last) in self.last.iter().enumerate() {
            let text: String = last.iter().flatten().collect();
            if text.is_empty() {
                continue;
            }
            ops.extend([
                Op::StartTextSection,
                Op::SetFont {
                    font: PdfFontHandle::External(ids[k].clone()),
                    size: Pt(1.0),
                },
                Op::ShowText {
                    items: vec![TextItem::Text(text)],
                },
                Op::EndTextSection,
            ]);
        }
        ops
    }
}

fn assemble(
    pages: &[Page],
    meta: &Meta,
    streams: Streams,
) -> Result<(Vec<u8>, Vec<char>), PdfError> {
    if pages.is_empty() {
        return Err(PdfError::NoPages);
    }
    let fonts = Fonts::get()?;
    let mut missing = BTreeSet::new();
    let mut doc = PdfDocument::new(&meta.title);
    let ids = [FontId("F1".into()), FontId("F2".into())];
    let glyphs = embed_fonts(&mut doc, pages, fonts, &ids)?;
    let mut shown = Shown {
        last: [Vec::new(), Vec::new()],
    };
    let mut contents = Vec::with_capacity(pages.len());
    for (n, p) in pages.iter().enumerate() {
        let page_no = n + 1;
        finite(page_no, "page size", &[p.width, p.height])?;
        let h = p.height;
        // Filled only by the tests' reference path.
        #[cfg_attr(not(test), allow(unused_mut))]
        let mut ops = Vec::new();
        let mut content = Content::with_capacity(p.items.len() * 64);
        for it in &p.items {
            match it {
                Item::Text {
                    x,
                    y,
                    text: raw,
                    size,
                    bold,
                    color,
                } => {
                    finite(page_no, "text position", &[*x, *y, *size])?;
                    let text = shown_text(fonts, raw, *bold, &mut missing);
                    if text.trim().is_empty() {
                        continue;
                    }
                    let face = *bold as usize;
                    match streams {
                        Streams::Own => {
                            // Every face with text was embedded above.
                            let Some(g) = &glyphs[face] else { continue };
                            for c in text.chars() {
                                if let Some(id) = g.find(c) {
                                    shown.note(face, id, c);
                                }
                            }
                            content.text(&ids[face].0, *size, *color, (*x, h - *y), &text, g);
                        }
                        #[cfg(test)]
                        Streams::Printpdf => {
                            ops.extend(text_ops(&ids[face], *x, h - *y, *size, *color, text))
                        }
                    }
                }
                Item::Line {
                    x1,
                    y1,
                    x2,
                    y2,
                    width,
                    color,
                } => {
                    finite(page_no, "line", &[*x1, *y1, *x2, *y2, *width])?;
                    let (a, b) = ((*x1, h - *y1), (*x2, h - *y2));
                    match streams {
                        Streams::Own => content.line(a, b, *width, *color),
                        #[cfg(test)]
                        Streams::Printpdf => ops.extend(line_ops(a, b, *width, *color)),
                    }
                }
                Item::Rect {
                    x,
                    y,
                    w,
                    h: rh,
                    color,
                } => {
                    finite(page_no, "rectangle", &[*x, *y, *w, *rh])?;
                    let y0 = h - *y - *rh;
                    match streams {
                        Streams::Own => content.rect(*x, y0, *w, *rh, *color),
                        #[cfg(test)]
                        Streams::Printpdf => ops.extend(rect_ops(*x, y0, *w, *rh, *color)),
                    }
                }
            }
        }
        contents.push(content.into_bytes());
        let mm = |pt: f32| printpdf::Mm(pt * 25.4 / 72.0);
        doc.pages.push(PdfPage::new(mm(p.width), mm(p.height), ops));
    }
    if streams == Streams::Own {
        // printpdf learns the glyphs each font needs from the operators;
        // its content streams are replaced below.
        doc.pages[0].ops = shown.ops(&ids);
    }
    set_info(&mut doc, meta)?;
    let mut warnings = Vec::new();
    let opts = PdfSaveOptions {
        optimize: false,
        ..PdfSaveOptions::default()
    };
    let mut lo = doc.to_lopdf_document(&opts, &mut warnings);
    if streams == Streams::Own {
        set_contents(&mut lo, contents)?;
    }
    compress_streams(&mut lo, COMPRESSION);
    // Room for the streams and the objects around them, so the file is not
    // copied as it grows.
    let streams: usize = lo
        .objects
        .values()
        .map(|o| match o {
            lopdf::Object::Stream(s) => s.content.len() + 64,
            _ => 64,
        })
        .sum();
    let mut bytes = Vec::with_capacity(streams + 4096);
    lo.save_to(&mut bytes)
        .map_err(|e| PdfError::Font(format!("cannot write the PDF: {e}")))?;
    fix_document_id(&mut bytes);
    Ok((bytes, missing.into_iter().collect()))
}

/// Puts each page's own content stream in place of printpdf's.
fn set_contents(lo: &mut lopdf::Document, contents: Vec<Vec<u8>>) -> Result<(), PdfError> {
    let pages = lo.get_pages();
    if pages.len() != contents.len() {
        return Err(PdfError::Font(format!(
            "{} pages laid out, {} in the document",
            contents.len(),
            pages.len()
        )));
    }
    for ((_, page), bytes) in pages.into_iter().zip(contents) {
        let no_stream =
            |e: lopdf::Error| PdfError::Font(format!("a page has no content stream: {e}"));
        let id = lo
            .get_object(page)
            .and_then(|p| p.as_dict())
            .and_then(|d| d.get(b"Contents"))
            .and_then(|c| c.as_reference())
            .map_err(no_stream)?;
        lo.get_object_mut(id)
            .and_then(|o| o.as_stream_mut())
            .map_err(no_stream)?
            .set_content(bytes);
    }
    Ok(())
}

/// The deflate level of every stream, chosen by measurement (DEVELOPERS.md,
/// Benchmarks): printpdf's own choice, the best (9), spends a third of a
/// small certificate's time for a few per cent of size.
const COMPRESSION: u32 = 1;

/// Deflates every stream that has no filter yet, keeping the raw bytes
/// where deflate would not make them smaller (as printpdf does).
fn compress_streams(doc: &mut lopdf::Document, level: u32) {
    // One compressor, reset between streams: a new one allocates and
    // clears a few hundred kilobytes of tables, several times per document.
    let mut z = flate2::Compress::new(flate2::Compression::new(level), true);
    for obj in doc.objects.values_mut() {
        let lopdf::Object::Stream(stream) = obj else {
            continue;
        };
        if stream.dict.get(b"Filter").is_ok() {
            continue;
        }
        z.reset();
        if let Some(packed) = deflate(&mut z, &stream.content) {
            if packed.len() + 19 < stream.content.len() {
                stream.dict.set("Filter", "FlateDecode");
                stream.set_content(packed);
            }
        }
    }
}

/// The zlib stream of `input`, in one call; None should the compressor fail.
fn deflate(z: &mut flate2::Compress, input: &[u8]) -> Option<Vec<u8>> {
    let mut out = Vec::with_capacity(input.len() / 2 + 64);
    loop {
        let read = z.total_in() as usize;
        let status = z
            .compress_vec(&input[read..], &mut out, flate2::FlushCompress::Finish)
            .ok()?;
        match status {
            flate2::Status::StreamEnd => return Some(out),
            _ => out.reserve(out.capacity().max(1024)),
        }
    }
}

/// printpdf writes a random /ID pair; the same document must give the same
/// bytes, so both strings are overwritten in place (same length, so the
/// cross-reference offsets stay valid) with an id derived from the rest.
fn fix_document_id(bytes: &mut [u8]) {
    let Some(at) = bytes.windows(3).rposition(|w| w == b"/ID") else {
        return;
    };
    let tail = &bytes[at..];
    let mut spans = Vec::new();
    let mut i = 0;
    while i < tail.len() && spans.len() < 2 {
        if tail[i] == b'(' {
            if let Some(end) = tail[i + 1..].iter().position(|b| *b == b')') {
                spans.push((at + i + 1, at + i + 1 + end));
                i += end + 1;
            }
        } else if tail[i] == b']' {
            break;
        }
        i += 1;
    }
    let mut copy = bytes.to_vec();
    for (s, e) in &spans {
        copy[*s..*e].fill(b'0');
    }
    let id = stable_id(&copy);
    for (s, e) in spans {
        for (k, b) in bytes[s..e].iter_mut().enumerate() {
            *b = id.as_bytes()[k % id.len()];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn meta() -> Meta {
        Meta {
            title: "T".into(),
            author: "A".into(),
            subject: "S".into(),
            creator: "limen test".into(),
            created: 1_795_000_000,
        }
    }

    fn page(items: Vec<Item>) -> Page {
        Page {
            width: 595.0,
            height: 842.0,
            items,
        }
    }

    fn text(t: &str) -> Item {
        Item::Text {
            x: 50.0,
            y: 100.0,
            text: t.into(),
            size: 12.0,
            bold: false,
            color: (0.0, 0.0, 0.0),
        }
    }

    #[test]
    fn no_pages_is_an_error_not_an_invalid_file() {
        assert_eq!(write(&[], &meta()).unwrap_err(), PdfError::NoPages);
    }

    #[test]
    fn nan_coordinates_are_refused() {
        let mut t = text("x");
        if let Item::Text { x, .. } = &mut t {
            *x = f32::NAN;
        }
        assert!(matches!(
            write(&[page(vec![t])], &meta()),
            Err(PdfError::NotFinite { page: 1, .. })
        ));
        let r = Item::Rect {
            x: 0.0,
            y: 0.0,
            w: f32::INFINITY,
            h: 1.0,
            color: (0.0, 0.0, 0.0),
        };
        assert!(matches!(
            write(&[page(vec![r])], &meta()),
            Err(PdfError::NotFinite { .. })
        ));
    }

    #[test]
    fn control_characters_become_spaces() {
        assert_eq!(clean("a\tb\nc\rd"), "a b c d");
    }

    #[test]
    fn every_text_run_sets_its_font_first() {
        let ops = text_ops(
            &FontId("F1".into()),
            1.0,
            2.0,
            9.0,
            (0.0, 0.0, 0.0),
            "x".into(),
        );
        let font_at = ops
            .iter()
            .position(|o| matches!(o, Op::SetFont { .. }))
            .unwrap();
        let show_at = ops
            .iter()
            .position(|o| matches!(o, Op::ShowText { .. }))
            .unwrap();
        assert!(matches!(ops[0], Op::StartTextSection));
        assert!(font_at < show_at);
    }

    #[test]
    fn a_subset_font_keeps_the_file_small() {
        let (bytes, missing) = write(
            &[page(vec![text("Pb ≤ 90 mg/kg, 25 µg/L"), text("δ")])],
            &meta(),
        )
        .unwrap();
        assert!(bytes.starts_with(b"%PDF-"));
        assert!(missing.is_empty(), "{missing:?}");
        assert!(
            bytes.len() < 40_000,
            "{} bytes: the font is not subset",
            bytes.len()
        );
    }

    #[test]
    fn unknown_characters_are_reported() {
        let (_, missing) = write(&[page(vec![text("铅")])], &meta()).unwrap();
        assert_eq!(missing, vec!['铅']);
    }

    /// Reference: printpdf's own operators, encoded by lopdf, give the same
    /// file byte for byte as limen's content writer.
    fn same_as_printpdf(pages: &[Page]) {
        let own = write(pages, &meta()).unwrap();
        let reference = assemble(pages, &meta(), Streams::Printpdf).unwrap();
        assert!(own.0 == reference.0, "the files differ");
        assert_eq!(own.1, reference.1);
    }

    #[test]
    fn content_streams_match_printpdf_on_the_demo_certificates() {
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-batches");
        let ws = crate::read::Workspace::load(&root).unwrap();
        let templates = crate::templates::Templates::load(Some(&root)).unwrap();
        let run = crate::report::RunInfo {
            issued_at: chrono::DateTime::from_timestamp(1_795_000_000, 0).unwrap(),
            tool_version: "t".into(),
        };
        let cert = crate::render::certificate::Certificate {
            templates: &templates,
        };
        let mut pages_seen = 0;
        for name in crate::starter::DEMO_BATCHES {
            let batch = crate::read::Batch::load(&root.join(name)).unwrap();
            let report = crate::report::build(&ws, &batch, 0, &run).unwrap();
            let pages = cert.layout(&report, Fonts::get().unwrap()).unwrap();
            pages_seen += pages.len();
            same_as_printpdf(&pages);
        }
        assert!(pages_seen >= 3, "{pages_seen} pages");
    }

    #[test]
    fn content_streams_match_printpdf_on_odd_pages() {
        // Characters outside Latin-1, ones the font lacks, control
        // characters, blank runs, negative and fractional positions, and a
        // glyph reached from two characters in turn.
        let odd = |t: &str, x: f32, y: f32, size: f32, bold: bool| Item::Text {
            x,
            y,
            text: t.into(),
            size,
            bold,
            color: (0.2, 0.5, 1.0 / 3.0),
        };
        let pages = vec![
            page(vec![
                odd("Pb ≤ 90 mg/kg, 25 µg/L — δ", 56.692_91, 100.25, 9.5, false),
                odd("铅 and \t tab\n(line)", -3.0, 0.0, 12.0, true),
                odd("   ", 10.0, 10.0, 8.0, false),
                odd("\u{a0}non-breaking\u{a0}", 1e-7, 841.89, 7.25, false),
                Item::Line {
                    x1: 0.5,
                    y1: 700.0,
                    x2: 594.5,
                    y2: 700.0,
                    width: 0.25,
                    color: (0.0, 0.0, 0.0),
                },
                Item::Rect {
                    x: 40.0,
                    y: 60.0,
                    w: 515.276,
                    h: 12.0,
                    color: (0.93, 0.93, 0.93),
                },
            ]),
            page(vec![]),
            page(vec![odd("second page, bold", 300.0, 400.0, 16.0, true)]),
        ];
        same_as_printpdf(&pages);
    }

    #[test]
    fn a_kept_subset_is_the_subset_cut_afresh() {
        let face = Face::load(REGULAR).unwrap();
        let sets: Vec<BTreeSet<char>> = (0..SUBSETS_KEPT as u8 + 3)
            .map(|k| {
                "Pb 0123 mg/kg"
                    .chars()
                    .chain([char::from(b'c' + k)])
                    .collect()
            })
            .collect();
        // Twice round, more sets than are kept: hits, misses and evictions.
        for _ in 0..2 {
            for set in &sets {
                assert!(face.subset(set).unwrap() == face.cut(set).unwrap());
            }
        }
        assert!(face.subsets.lock().unwrap().len() == SUBSETS_KEPT);
        assert!(face.subset(&sets[0]).unwrap() != face.subset(&sets[1]).unwrap());
    }

    #[test]
    fn same_input_same_bytes() {
        let pages = [page(vec![text("same")])];
        assert_eq!(
            write(&pages, &meta()).unwrap().0,
            write(&pages, &meta()).unwrap().0
        );
    }
}
