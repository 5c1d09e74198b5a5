//! A small non-cryptographic hasher (FNV-1a) and a reusable key buffer for
//! the per-row lookups; inputs are the lab's own files, so hash flooding is
//! no concern and SipHash's cost is not worth paying.

use std::cell::RefCell;
use std::hash::{BuildHasherDefault, Hasher};

#[derive(Default)]
pub struct Fnv(u64);

impl Hasher for Fnv {
    fn finish(&self) -> u64 {
        self.0
    }

    fn write(&mut self, bytes: &[u8]) {
        let mut h = if self.0 == 0 {
            0xcbf2_9ce4_8422_2325
        } else {
            self.0
        };
        for b in bytes {
            h ^= *b as u64;
            h = h.wrapping_mul(0x0100_0000_01b3);
        }
        self.0 = h;
    }
}

pub type Build = BuildHasherDefault<Fnv>;

/// A hasher for keys of whole words (addresses, day numbers): one multiply
/// a word, where FNV-1a takes eight.
#[derive(Default)]
pub struct Words(u64);

impl Hasher for Words {
    fn finish(&self) -> u64 {
        self.0
    }

    // An array of words arrives here as its bytes, in one call.
    fn write(&mut self, bytes: &[u8]) {
        let mut words = bytes.chunks_exact(8);
        for w in &mut words {
            let mut x = [0u8; 8];
            x.copy_from_slice(w);
            self.write_u64(u64::from_le_bytes(x));
        }
        for b in words.remainder() {
            self.write_u64(*b as u64);
        }
    }

    fn write_u64(&mut self, x: u64) {
        self.0 = (self.0.rotate_left(5) ^ x).wrapping_mul(0x517c_c1b7_2722_0a95);
    }

    fn write_usize(&mut self, x: usize) {
        self.write_u64(x as u64);
    }

    fn write_i32(&mut self, x: i32) {
        self.write_u64(x as u32 as u64);
    }
}

pub type BuildWords = BuildHasherDefault<Words>;

/// Appends `s` in lower case without allocating for ASCII text.
pub fn push_lower(buf: &mut String, s: &str) {
    if s.is_ascii() {
        buf.extend(s.bytes().map(|b| b.to_ascii_lowercase() as char));
    } else {
        buf.push_str(&s.to_lowercase());
    }
}

thread_local! {
    static BUFFER: RefCell<String> = const { RefCell::new(String::new()) };
}

/// Runs `f` with a cleared, reused String.
pub fn with_buffer<T>(f: impl FnOnce(&mut String) -> T) -> T {
    BUFFER.with(|b| match b.try_borrow_mut() {
        Ok(mut buf) => {
            buf.clear();
            f(&mut buf)
        }
        Err(_) => f(&mut String::new()),
    })
}
