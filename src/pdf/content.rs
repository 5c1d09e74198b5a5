//! A page's content stream written straight into bytes: the same bytes
//! printpdf's operators give once lopdf encodes them (operands each followed
//! by a space, operators one per line), without building an object per
//! operand. Checked against printpdf's own output in `super::tests`.

use std::collections::HashMap;
use std::io::Write;

const HEX: &[u8; 16] = b"0123456789ABCDEF";

/// Characters to glyph ids of one embedded (subset) face, as the text
/// encoder of the PDF looks them up: a character the face lacks is glyph 0.
pub struct Glyphs {
    latin: [Option<u16>; 256],
    other: HashMap<u32, u16>,
}

impl Glyphs {
    /// From the face's character map (code point, glyph id).
    pub fn new(map: impl IntoIterator<Item = (u32, u16)>) -> Glyphs {
        let mut latin = [None; 256];
        let mut other = HashMap::new();
        for (c, g) in map {
            match latin.get_mut(c as usize) {
                Some(slot) => *slot = Some(g),
                None => {
                    other.insert(c, g);
                }
            }
        }
        Glyphs { latin, other }
    }

    /// The glyph of `c`, if the face maps it.
    pub fn find(&self, c: char) -> Option<u16> {
        match self.latin.get(c as usize) {
            Some(g) => *g,
            None => self.other.get(&(c as u32)).copied(),
        }
    }

    pub fn get(&self, c: char) -> u16 {
        self.find(c).unwrap_or(0)
    }
}

pub struct Content {
    buf: Vec<u8>,
    first: bool,
}

impl Content {
    pub fn with_capacity(n: usize) -> Content {
        Content {
            buf: Vec::with_capacity(n),
            first: true,
        }
    }

    pub fn into_bytes(self) -> Vec<u8> {
        self.buf
    }

    /// An operator after its operands; lopdf puts a newline between
    /// operators and none after the last.
    fn begin(&mut self) {
        if !self.first {
            self.buf.push(b'\n');
        }
        self.first = false;
    }

    fn op(&mut self, operator: &[u8]) {
        self.buf.extend_from_slice(operator);
    }

    /// A real operand as lopdf writes it (Rust's `Display` of f32), then
    /// the space that follows every operand.
    fn real(&mut self, v: f32) {
        // Whole numbers in the exact range of f32 print as integers
        // ("12", "-3"); negative zero prints as "-0" and so takes the
        // general path.
        if v.fract() == 0.0 && v.abs() < 16_777_216.0 && !(v == 0.0 && v.is_sign_negative()) {
            let n = v as i32;
            if n < 0 {
                self.buf.push(b'-');
            }
            let mut digits = [0u8; 10];
            let mut m = n.unsigned_abs();
            let mut k = digits.len();
            loop {
                k -= 1;
                digits[k] = b'0' + (m % 10) as u8;
                m /= 10;
                if m == 0 {
                    break;
                }
            }
            self.buf.extend_from_slice(&digits[k..]);
        } else {
            let _ = write!(self.buf, "{v}");
        }
        self.buf.push(b' ');
    }

    fn name(&mut self, name: &str) {
        self.buf.push(b'/');
        for &byte in name.as_bytes() {
            if b" \t\n\r\x0C()<>[]{}/%#".contains(&byte) || !(33..=126).contains(&byte) {
                self.buf.extend_from_slice(&[
                    b'#',
                    HEX[(byte >> 4) as usize],
                    HEX[(byte & 15) as usize],
                ]);
            } else {
                self.buf.push(byte);
            }
        }
        self.buf.push(b' ');
    }

    fn rgb(&mut self, (r, g, b): (f32, f32, f32), operator: &[u8]) {
        self.begin();
        self.real(r);
        self.real(g);
        self.real(b);
        self.op(operator);
    }

    /// One text run in its own text section that sets its font first:
    /// `BT`, `Tf`, `rg`, `Tm`, the glyph ids as a hex string and `Tj`, `ET`.
    pub fn text(
        &mut self,
        font: &str,
        size: f32,
        color: (f32, f32, f32),
        (x, y): (f32, f32),
        text: &str,
        glyphs: &Glyphs,
    ) {
        self.begin();
        self.op(b"BT");
        self.begin();
        self.name(font);
        self.real(size);
        self.op(b"Tf");
        self.rgb(color, b"rg");
        self.begin();
        for v in [1.0, 0.0, 0.0, 1.0, x, y] {
            self.real(v);
        }
        self.op(b"Tm");
        self.begin();
        self.buf.push(b'<');
        for c in text.chars() {
            let g = glyphs.get(c);
            self.buf.extend_from_slice(&[
                HEX[(g >> 12) as usize],
                HEX[((g >> 8) & 15) as usize],
                HEX[((g >> 4) & 15) as usize],
                HEX[(g & 15) as usize],
            ]);
        }
        self.buf.extend_from_slice(b"> Tj");
        self.begin();
        self.op(b"ET");
    }

    /// A stroked straight line: `RG`, `w`, `m`, `l`, `S`.
    pub fn line(&mut self, a: (f32, f32), b: (f32, f32), width: f32, color: (f32, f32, f32)) {
        self.rgb(color, b"RG");
        self.begin();
        self.real(width);
        self.op(b"w");
        self.begin();
        self.real(a.0);
        self.real(a.1);
        self.op(b"m");
        self.begin();
        self.real(b.0);
        self.real(b.1);
        self.op(b"l");
        self.begin();
        self.op(b"S");
    }

    /// A filled rectangle from its lower-left corner: `rg`, `re`, `f`.
    pub fn rect(&mut self, x: f32, y: f32, w: f32, h: f32, color: (f32, f32, f32)) {
        self.rgb(color, b"rg");
        self.begin();
        for v in [x, y, w, h] {
            self.real(v);
        }
        self.op(b"re");
        self.begin();
        self.op(b"f");
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn real(v: f32) -> String {
        let mut c = Content::with_capacity(8);
        c.real(v);
        String::from_utf8(c.into_bytes()).unwrap()
    }

    #[test]
    fn reals_print_as_rust_displays_them() {
        // Reference: the standard library's Display for f32, which lopdf uses.
        for v in [
            0.0f32,
            -0.0,
            1.0,
            -1.0,
            12.0,
            0.5,
            56.692_91,
            841.89,
            1e-7,
            3.0e7,
            16_777_215.0,
            16_777_216.0,
            -16_777_217.0,
            0.1,
            2.5e-3,
        ] {
            assert_eq!(real(v), format!("{v} "), "{v:?}");
        }
        let mut x = 0x1234_5678u32;
        for _ in 0..20_000 {
            x ^= x << 13;
            x ^= x >> 17;
            x ^= x << 5;
            let v = f32::from_bits(x);
            if v.is_finite() {
                assert_eq!(real(v), format!("{v} "), "{v:?}");
            }
            let w = (x % 200_000) as f32 / 100.0 - 500.0;
            assert_eq!(real(w), format!("{w} "), "{w:?}");
        }
    }

    #[test]
    fn names_escape_delimiters() {
        let mut c = Content::with_capacity(8);
        c.name("F1 a#");
        assert_eq!(c.into_bytes(), b"/F1#20a#23 ");
    }

    #[test]
    fn a_missing_character_is_glyph_zero() {
        let g = Glyphs::new([('A' as u32, 36), ('µ' as u32, 7), ('≤' as u32, 9)]);
        assert_eq!(g.get('µ'), 7);
        assert_eq!(g.get('≤'), 9);
        assert_eq!(g.get('A'), 36);
        assert_eq!(g.get('B'), 0);
        assert_eq!(g.get('铅'), 0);
    }
}
