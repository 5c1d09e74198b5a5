//! Finding a repeated result key (lab id, analyte, kind) in flat memory.
//!
//! Holding every key of a million-row file costs tens of megabytes; a Bloom
//! filter of fixed size answers "certainly new" for almost every row, and
//! the few "perhaps seen" keys are confirmed by a second, key-only scan of
//! the file, so the answer (and the error, with the first line) is exact.

use std::collections::HashMap;

/// At least 2^16 bits (8 KB). A filter is allocated per batch, so a run
/// of many small batches must not zero megabytes for each; the size grows
/// with a small file and is fixed for a large one (see `for_len`).
const MIN_BITS: u64 = 1 << 16;
/// The filter of every large file.
const MAX_BITS: u64 = 1 << 26;
const LARGE_FILE: u64 = 8 << 20;
const PROBES: u64 = 6;
/// Bits of one block, all of a key's probes in it (9 bits of hash each).
const BLOCK: u64 = 512;

pub struct Repeats {
    bits: Vec<u64>,
    mask: u64,
    /// Keys the filter could not clear, with the line where each was met.
    pub candidates: HashMap<String, u64, crate::fasthash::Build>,
}

fn hashes(key: &[u8]) -> (u64, u64) {
    use std::hash::Hasher;
    let mut f = crate::fasthash::Fnv::default();
    f.write(key);
    let h1 = f.finish();
    // splitmix64 of the first hash: a second probe stride.
    let mut z = h1.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    (h1, (z ^ (z >> 31)) | 1)
}

impl Repeats {
    /// A filter for a file of `len` bytes: a small file gets about 24 bits
    /// per row of at least 40 bytes; from 8 MB (some 70,000 rows) on, every
    /// file gets the same 2^26 bits (8 MB), so memory stays flat however
    /// long the file: at a million rows about one false "perhaps seen" in a
    /// million keys, and more beyond, each cleared by the confirming scan.
    pub fn for_len(len: u64) -> Repeats {
        let bits = if len >= LARGE_FILE {
            MAX_BITS
        } else {
            (len / 40 * 24)
                .next_power_of_two()
                .clamp(MIN_BITS, MAX_BITS)
        };
        Repeats {
            bits: vec![0; (bits / 64) as usize],
            mask: bits - 1,
            candidates: HashMap::default(),
        }
    }

    /// Notes `key` (met on `line`); false when it is certainly new.
    pub fn note(&mut self, key: &str, line: u64) -> bool {
        let p = self.probe(key);
        self.note_probe(p, key, line)
    }

    /// Where `key` falls in the filter. Its block is asked of memory now,
    /// so a caller with other work for the row can do that work before
    /// `note_probe` and not wait for the block: the filter is far larger
    /// than the caches, and each new key's block is a miss.
    pub fn probe(&self, key: &str) -> Probe {
        let (h1, h2) = hashes(key.as_bytes());
        // All probes in one 512-bit block (one cache line): a few more false
        // alarms than free probes, each cleared by the confirming scan, for
        // one memory fetch per key instead of six.
        let block = ((h1 & self.mask) / BLOCK) as usize * (BLOCK / 64) as usize;
        prefetch(&self.bits[block]);
        // The stride's forced low bit would fix one bit of the first probe.
        Probe { block, h2: h2 >> 1 }
    }

    /// Notes the key `probe` was made from (met on `line`); false when it
    /// is certainly new.
    pub fn note_probe(&mut self, probe: Probe, key: &str, line: u64) -> bool {
        let Probe { block, mut h2 } = probe;
        let mut all = true;
        for _ in 0..PROBES {
            let bit = h2 % BLOCK;
            h2 /= BLOCK;
            let (word, b) = (block + (bit / 64) as usize, 1u64 << (bit % 64));
            all &= self.bits[word] & b != 0;
            self.bits[word] |= b;
        }
        if all {
            self.candidates.entry(key.to_string()).or_insert(line);
        }
        all
    }
}

/// A key's block in the filter and the bits it sets there.
#[derive(Debug, Clone, Copy)]
pub struct Probe {
    block: usize,
    h2: u64,
}

/// Asks for the cache line holding `word`, without waiting for it.
#[inline(always)]
fn prefetch(word: &u64) {
    #[cfg(target_arch = "x86_64")]
    // SAFETY: a prefetch is a hint to the cache: it reads nothing into the
    // program, cannot fault, and the address is that of a live reference.
    unsafe {
        use std::arch::x86_64::{_MM_HINT_T0, _mm_prefetch};
        _mm_prefetch::<_MM_HINT_T0>((word as *const u64).cast::<i8>());
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = word;
}

/// Confirms the candidates against the file's keys in order: the first key
/// met twice at or before `limit` gives (its line, the first line).
pub fn confirm(
    candidates: &HashMap<String, u64, crate::fasthash::Build>,
    limit: u64,
    keys: impl FnOnce(&mut dyn FnMut(u64, &str) -> bool),
) -> Option<(u64, u64)> {
    let mut first: HashMap<&str, u64, crate::fasthash::Build> = HashMap::default();
    let mut found = None;
    keys(&mut |line, key| {
        if line > limit {
            return false;
        }
        if let Some((k, _)) = candidates.get_key_value(key) {
            match first.get(k.as_str()) {
                Some(&f) => {
                    found = Some((line, f));
                    return false;
                }
                None => {
                    first.insert(k.as_str(), line);
                }
            }
        }
        true
    });
    found
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_repeat_is_always_a_candidate_and_new_keys_rarely_are() {
        // A 100 MB file: 2^26 bits.
        let mut r = Repeats::for_len(100_000_000);
        assert_eq!(r.bits.len() as u64 * 64, 1 << 26);
        let mut false_alarms = 0;
        for i in 0..200_000 {
            if r.note(&format!("S{i}\u{1f}pb\u{1f}sample"), i) {
                false_alarms += 1;
            }
        }
        assert!(r.note("S17\u{1f}pb\u{1f}sample", 300_000));
        // Expected false alarms at 200,000 keys in 2^26 bits, 6 probes:
        // (1 − e^(−6·200000/2^26))^6 ≈ 3e-11 per key, so none.
        assert_eq!(false_alarms, 0);
    }

    #[test]
    fn every_large_file_gets_the_same_filter() {
        for len in [LARGE_FILE, 11_000_000, 110_000_000, 10_000_000_000] {
            assert_eq!(
                Repeats::for_len(len).bits.len() as u64 * 64,
                MAX_BITS,
                "{len}"
            );
        }
        assert!(Repeats::for_len(LARGE_FILE - 1).bits.len() as u64 * 64 <= MAX_BITS / 8);
    }

    #[test]
    fn a_small_file_gets_a_small_filter_that_still_finds_repeats() {
        let mut r = Repeats::for_len(400);
        assert_eq!(r.bits.len() as u64 * 64, MIN_BITS);
        assert!(!r.note("S1\u{1f}pb\u{1f}sample", 2));
        assert!(r.note("S1\u{1f}pb\u{1f}sample", 3));
        assert!(r.candidates.contains_key("S1\u{1f}pb\u{1f}sample"));
    }

    #[test]
    fn confirm_finds_the_first_real_repeat_and_ignores_false_alarms() {
        let mut c: HashMap<String, u64, crate::fasthash::Build> = HashMap::default();
        c.insert("a".into(), 5);
        c.insert("b".into(), 9);
        let file = [(2, "a"), (3, "x"), (4, "b"), (5, "y"), (7, "b"), (9, "a")];
        let scan = |f: &mut dyn FnMut(u64, &str) -> bool| {
            for (line, key) in file {
                if !f(line, key) {
                    break;
                }
            }
        };
        assert_eq!(confirm(&c, u64::MAX, scan), Some((7, 4)));
        // Stopping before the repeat finds none.
        assert_eq!(confirm(&c, 6, scan), None);
        // A false alarm ("a" met once before line 5) is not a repeat.
        let mut only_a: HashMap<String, u64, crate::fasthash::Build> = HashMap::default();
        only_a.insert("a".into(), 5);
        assert_eq!(confirm(&only_a, 8, scan), None);
    }
}
