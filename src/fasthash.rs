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
