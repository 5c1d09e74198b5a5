//! Decimal parsing and reporting rules: every concentration stays a decimal
//! from its input text, so rounding sees the true value.

use rust_decimal::{Decimal, RoundingStrategy};
use std::str::FromStr;

/// Parses a decimal from a cell. Errors carry only the problem; callers add
/// the file, line and field.
pub fn parse_decimal(text: &str) -> Result<Decimal, String> {
    let t = text.trim();
    // Nearly every cell is a plain decimal: parse it before looking for the
    // words and signs below, which all take a byte this test refuses. What
    // fails here is read again the long way, for its message.
    if t.bytes()
        .all(|c| c.is_ascii_digit() || matches!(c, b'.' | b'-' | b'+'))
    {
        if let Ok(d) = Decimal::from_str(t) {
            return Ok(d);
        }
    }
    parse_worded(t)
}

/// `parse_decimal` of a trimmed cell, each refusal worded.
fn parse_worded(t: &str) -> Result<Decimal, String> {
    if t.is_empty() {
        return Err("empty; a number is required".into());
    }
    if t.starts_with('<')
        || t.starts_with('>')
        || ["nd", "n.d.", "bdl"]
            .iter()
            .any(|w| t.eq_ignore_ascii_case(w))
    {
        return Err(format!(
            "`{t}` is a reported value, not an instrument reading; give the raw reading (negative readings are valid)"
        ));
    }
    if !t
        .chars()
        .all(|c| c.is_ascii_digit() || matches!(c, '.' | '-' | '+' | 'e' | 'E'))
    {
        return Err(format!("`{t}` is not a number"));
    }
    let parsed = if t.contains(['e', 'E']) {
        Decimal::from_scientific(t)
    } else {
        Decimal::from_str(t)
    };
    parsed.map_err(|_| format!("`{t}` is not a number (or has more than 28 digits)"))
}

/// Exponent of the leading digit: 1234 -> 3, 0.0456 -> -2. None for zero.
fn leading_exponent(d: Decimal) -> Option<i64> {
    if d.is_zero() {
        return None;
    }
    let mantissa = d.mantissa().unsigned_abs();
    let digits = mantissa.ilog10() as i64 + 1;
    Some(digits - 1 - d.scale() as i64)
}

/// Rounds to `sig` significant figures, half to even on the decimal value
/// (ASTM E29), keeping trailing zeros in the scale: 25 -> 25.0, 0.6 -> 0.600.
pub fn round_sig(d: Decimal, sig: u32) -> Decimal {
    let sig = sig.max(1) as i64;
    let Some(e) = leading_exponent(d) else {
        let mut z = Decimal::ZERO;
        z.rescale((sig - 1).clamp(0, 28) as u32);
        return z;
    };
    let out = round_at(d, sig - 1 - e);
    // Rounding up across a power of ten (9.995 -> 10.00) adds a digit.
    // (`e2 >= e` or no guard would act the same: re-rounding a value already
    // at `sig` figures of the same exponent changes nothing. Equivalent
    // mutants; see DEVELOPERS.md.)
    match leading_exponent(out) {
        Some(e2) if e2 > e => round_at(out, sig - 1 - e2),
        _ => out,
    }
}

fn round_at(d: Decimal, decimals: i64) -> Decimal {
    if let Some(out) = round_small(d, decimals) {
        return out;
    }
    round_at_wide(d, decimals)
}

const POW10: [u128; 30] = {
    let mut p = [1u128; 30];
    let mut i = 1;
    while i < 30 {
        p[i] = p[i - 1] * 10;
        i += 1;
    }
    p
};

/// Half-even rounding to `decimals` places (negative: to tens, hundreds,
/// …) in plain integer arithmetic on the mantissa, as `round_at_wide`
/// rounds; None when the result would not fit, or when that path would
/// round twice.
fn round_small(d: Decimal, decimals: i64) -> Option<Decimal> {
    let m = d.mantissa().unsigned_abs();
    let s = d.scale() as i64;
    // dp places kept, then k whole places (tens, hundreds) rounded away.
    let (dp, k) = if decimals >= 0 {
        (decimals.min(28), 0)
    } else {
        (0, -decimals)
    };
    let shift = s - dp + k;
    let q = if shift <= 0 {
        m.checked_mul(*POW10.get((-shift) as usize)?)?
    } else {
        // The wide path divides by 10^k first, exactly while s + k ≤ 28
        // (always so for `round_sig`: the whole and decimal digits of a
        // mantissa number at most 29); past that it rounds twice.
        if k > 0 && shift > 28 {
            return None;
        }
        let p = *POW10.get(shift as usize)?;
        let (q, rem) = (m / p, m % p);
        let half = p / 2;
        if rem > half || (rem == half && q % 2 == 1) {
            q + 1
        } else {
            q
        }
    };
    let q = i128::try_from(q.checked_mul(*POW10.get(k as usize)?)?).ok()?;
    let signed = if d.is_sign_negative() { -q } else { q };
    Decimal::try_from_i128_with_scale(signed, dp as u32).ok()
}

fn round_at_wide(d: Decimal, decimals: i64) -> Decimal {
    let mut out = if decimals >= 0 {
        let dp = decimals.min(28) as u32;
        let mut r = d.round_dp_with_strategy(dp, RoundingStrategy::MidpointNearestEven);
        r.rescale(dp);
        r
    } else {
        let p = Decimal::from_i128_with_scale(10i128.pow((-decimals) as u32), 0);
        let mut r = (d / p).round_dp_with_strategy(0, RoundingStrategy::MidpointNearestEven) * p;
        r.rescale(0);
        r
    };
    if out.is_zero() {
        out.set_sign_positive(true);
    }
    out
}

/// Rounds up (towards positive infinity) to `sig` significant figures:
/// used where a limit must never be understated.
pub fn round_sig_up(d: Decimal, sig: u32) -> Decimal {
    let sig = sig.max(1) as i64;
    let Some(e) = leading_exponent(d) else {
        return round_sig(d, sig as u32);
    };
    let decimals = sig - 1 - e;
    let out = if decimals >= 0 {
        let dp = decimals.min(28) as u32;
        let mut r = d.round_dp_with_strategy(dp, RoundingStrategy::ToPositiveInfinity);
        r.rescale(dp);
        r
    } else {
        let p = Decimal::from_i128_with_scale(10i128.pow((-decimals) as u32), 0);
        let mut r = (d / p).round_dp_with_strategy(0, RoundingStrategy::ToPositiveInfinity) * p;
        r.rescale(0);
        r
    };
    // As in round_sig, the guard only saves work when e2 == e (equivalent).
    match leading_exponent(out) {
        Some(e2) if e2 > e => round_sig(out, sig as u32),
        _ => out,
    }
}

/// 7e28: below it the roundings here are total. Rounded to any number of
/// figures, to even or up, a value stays within a decimal's range (7.9e28
/// to one figure would be 8e28, and the rounding would overflow). Values
/// computed from the lab's files are refused from here on, as far outside
/// any real measurement.
pub const LARGEST: Decimal = Decimal::from_parts(0x7000_0000, 0xb303_10a7, 0xe22e_a493, false, 0);

/// A decimal of an f64, with 15 significant digits (all an f64 holds);
/// None for a value that is not finite or not below `LARGEST`.
pub fn decimal_of(x: f64) -> Option<Decimal> {
    if !x.is_finite() {
        return None;
    }
    Decimal::from_scientific(&format!("{x:.14e}"))
        .ok()
        .map(|d| d.normalize())
        .filter(|d| d.abs() < LARGEST)
}

/// Plain text of an exact decimal without meaningless trailing zeros.
pub fn plain(d: Decimal) -> String {
    let mut s = String::new();
    push_plain(&mut s, d);
    s
}

/// `plain`, appended to `out` (no allocation of its own).
pub fn push_plain(out: &mut String, d: Decimal) {
    let n = d.normalize();
    if n.is_zero() {
        out.push('0');
    } else {
        push_decimal(out, n);
    }
}

/// Appends `d` exactly as its `Display` writes it (sign, every digit of
/// the scale), without the formatting machinery: a results CSV writes
/// several decimals per row.
pub fn push_decimal(out: &mut String, d: Decimal) {
    let mut buf = [0; DECIMAL_ROOM];
    match std::str::from_utf8(decimal_ascii(d, &mut buf)) {
        Ok(t) => out.push_str(t),
        // Digits, sign and point are ASCII.
        Err(_) => unreachable!("a decimal's text is ASCII"),
    }
}

/// Room for any decimal's text: 29 digits, a sign, a point and a zero.
pub const DECIMAL_ROOM: usize = 40;

/// `d` as its `Display` writes it, in the end of `buf`.
pub fn decimal_ascii(d: Decimal, buf: &mut [u8; DECIMAL_ROOM]) -> &[u8] {
    // A short mantissa is padded to the scale with these zeros.
    buf.fill(b'0');
    let end = buf.len();
    let m = d.mantissa().unsigned_abs();
    // A mantissa above 64 bits (below 2^96) is two u64 halves: its last 19
    // digits, zero-padded, and the rest (under 10^10). One wide division
    // rather than one per digit.
    let n = if m > u64::MAX as u128 {
        const E19: u128 = 10_000_000_000_000_000_000;
        put_digits((m % E19) as u64, &mut buf[..end]);
        19 + put_digits((m / E19) as u64, &mut buf[..end - 19])
    } else {
        put_digits(m as u64, &mut buf[..end])
    };
    let scale = d.scale() as usize;
    let len = n.max(scale);
    let whole = len - scale;
    let mut start = end - len;
    if scale > 0 {
        // The whole digits move left by one to make room for the point.
        buf.copy_within(start..start + whole, start - 1);
        start -= 1;
        buf[start + whole] = b'.';
    }
    if whole == 0 {
        start -= 1;
        buf[start] = b'0';
    }
    if d.is_sign_negative() {
        start -= 1;
        buf[start] = b'-';
    }
    &buf[start..]
}

/// Two-digit groups "00" to "99", for writing digits two at a time.
const PAIRS: [u8; 200] = {
    let mut p = [0u8; 200];
    let mut i = 0;
    while i < 100 {
        p[2 * i] = b'0' + (i / 10) as u8;
        p[2 * i + 1] = b'0' + (i % 10) as u8;
        i += 1;
    }
    p
};

/// Writes `x`'s digits at the end of `out` (nothing for 0); how many.
fn put_digits(mut x: u64, out: &mut [u8]) -> usize {
    let mut at = out.len();
    while x >= 100 {
        let pair = (x % 100) as usize * 2;
        x /= 100;
        at -= 2;
        out[at..at + 2].copy_from_slice(&PAIRS[pair..pair + 2]);
    }
    if x >= 10 {
        at -= 2;
        out[at..at + 2].copy_from_slice(&PAIRS[x as usize * 2..x as usize * 2 + 2]);
    } else if x > 0 {
        at -= 1;
        out[at] = b'0' + x as u8;
    }
    out.len() - at
}

/// `plain`, as `decimal_ascii` writes it.
pub fn plain_ascii(d: Decimal, buf: &mut [u8; DECIMAL_ROOM]) -> &[u8] {
    let n = d.normalize();
    if n.is_zero() {
        b"0"
    } else {
        decimal_ascii(n, buf)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(s: &str) -> Decimal {
        parse_decimal(s).unwrap()
    }

    // The reference is rust_decimal's own Display, over the whole range.
    proptest::proptest! {
        #[test]
        fn push_decimal_writes_what_display_writes(
            lo in proptest::prelude::any::<u32>(),
            mid in proptest::prelude::any::<u32>(),
            hi in proptest::prelude::any::<u32>(),
            negative in proptest::prelude::any::<bool>(),
            scale in 0u32..=28,
            wide in proptest::prelude::any::<bool>(),
        ) {
            let (mid, hi) = if wide { (mid, hi) } else { (0, 0) };
            let d = Decimal::from_parts(lo, mid, hi, negative, scale);
            let mut s = String::new();
            push_decimal(&mut s, d);
            proptest::prop_assert_eq!(&s, &d.to_string());
            let mut p = String::new();
            push_plain(&mut p, d);
            let n = d.normalize();
            let expected = if n.is_zero() { "0".to_string() } else { n.to_string() };
            proptest::prop_assert_eq!(&p, &expected);
            let mut buf = [b'x'; DECIMAL_ROOM];
            let shown = d.to_string();
            proptest::prop_assert_eq!(decimal_ascii(d, &mut buf), shown.as_bytes());
            proptest::prop_assert_eq!(plain_ascii(d, &mut buf), expected.as_bytes());
        }
    }

    // The reference is rust_decimal's own half-even rounding.
    proptest::proptest! {
        // The quick path for plain decimals gives what the worded path
        // gives, value and scale or message, on cells of every kind.
        #[test]
        fn plain_decimals_parse_as_the_worded_path_parses_them(
            cell in "[ ]?[-+<]?[0-9]{0,30}[.]?[0-9]{0,30}([eE][-+]?[0-9]{1,2})?(nd|n\\.d\\.|BDL)?[ ]?"
        ) {
            let quick = parse_decimal(&cell).map(|d| (d, d.scale()));
            let worded = parse_worded(cell.trim()).map(|d| (d, d.scale()));
            proptest::prop_assert_eq!(quick, worded);
        }
    }

    // The integer path does the rounding itself (None would hand it to the
    // general path, with the same answers but a division each): to places,
    // to tens and hundreds, and refuses only where the general path would
    // round twice. Expected values by hand, half to even (ASTM E29).
    #[test]
    fn the_integer_path_rounds_to_places_tens_and_hundreds_itself() {
        let cases = [
            ("1234.5", -1, "1230"),
            ("1235", -1, "1240"),
            ("1245", -1, "1240"),
            ("-2575.1", -2, "-2600"),
            ("0.4", -1, "0"),
            ("984.46", 0, "984"),
            ("0.59871", 3, "0.599"),
            ("2.5", 5, "2.50000"),
        ];
        for (x, places, want) in cases {
            let got = round_small(d(x), places).unwrap_or_else(|| panic!("{x} at {places}"));
            assert_eq!(got.to_string(), want, "{x} at {places}");
        }
        // 27 decimals and one whole place: the general path divides exactly
        // (scale 28), so the integer path rounds (1.23… to tens is 0).
        let fine = Decimal::from_i128_with_scale(1_234_567_890_123_456_789_012_345_678, 27);
        assert_eq!(
            round_small(fine, -1).map(|x| x.to_string()),
            Some("0".into())
        );
        // 28 decimals and one whole place: the general path divides to 28
        // places first, and a tie made there rounds to even. Exactly,
        // 5.0000000000000000000000000005 to tens is 10; the general path
        // gives 0. The integer path declines, so both paths agree.
        let tie = Decimal::from_i128_with_scale(50_000_000_000_000_000_000_000_000_005, 28);
        assert_eq!(round_small(tie, -1), None);
        assert_eq!(round_at(tie, -1), round_at_wide(tie, -1));
        assert_eq!(round_at_wide(tie, -1).to_string(), "0");
    }

    // Below LARGEST no rounding overflows, at any number of figures; the
    // f64 estimates (L_D, study limits) come in only below it.
    #[test]
    fn roundings_are_total_below_the_largest_value() {
        assert_eq!(LARGEST, d("70000000000000000000000000000"));
        let top = [
            d("69999999999999999999999999999"),
            d("6999999999999999999999999999.9"),
            d("69500000000000000000000000000"),
        ];
        for x in top.into_iter().flat_map(|x| [x, -x]) {
            for sig in 1..=10 {
                let (even, up) = (round_sig(x, sig), round_sig_up(x, sig));
                assert!(
                    even.abs() <= d("70000000000000000000000000000"),
                    "{x} {sig}"
                );
                assert!(up >= x, "{x} {sig}");
            }
        }
        // Rounded up near the top of the range, 7.9225e28 would be 7.93e28.
        assert_eq!(decimal_of(7.9225e28), None);
        assert_eq!(decimal_of(7.0e28), None);
        assert_eq!(decimal_of(-7.5e28), None);
        assert_eq!(decimal_of(6.9e28), Some(d("69000000000000000000000000000")));
    }

    // The seams of the two-halves split and the digit pairs, which random
    // mantissas almost never land on; the reference is Display.
    #[test]
    fn decimal_text_at_its_seams_is_what_display_writes() {
        let e19 = 10u128.pow(19);
        let mut mantissas: Vec<u128> = (0..=1000).collect();
        for k in 1..=28 {
            let p = 10u128.pow(k);
            mantissas.extend([p - 1, p, p + 1, p * 7 + 3]);
        }
        for j in [0u128, 1, 9, 10, 99, 100, 123_456_789, e19 - 1] {
            for k in [1u128, 2, 9, 10, 7_922_816_251] {
                mantissas.push(k * e19 + j);
            }
        }
        let u64_max = u64::MAX as u128;
        mantissas.extend([u64_max - 1, u64_max, u64_max + 1, (1u128 << 96) - 1]);
        let mut buf = [b'x'; DECIMAL_ROOM];
        for m in mantissas.into_iter().filter(|m| *m < 1u128 << 96) {
            for scale in [0, 1, 2, 5, 18, 19, 20, 28] {
                for negative in [false, true] {
                    let mut d = Decimal::from_i128_with_scale(m as i128, scale);
                    d.set_sign_negative(negative);
                    let shown = d.to_string();
                    assert_eq!(
                        decimal_ascii(d, &mut buf),
                        shown.as_bytes(),
                        "{m} e-{scale}"
                    );
                }
            }
        }
    }

    proptest::proptest! {
        #[test]
        fn small_rounding_agrees_with_rust_decimal(
            lo in proptest::prelude::any::<u32>(),
            mid in proptest::prelude::any::<u32>(),
            wide in proptest::prelude::any::<bool>(),
            negative in proptest::prelude::any::<bool>(),
            scale in 0u32..=28,
            dp in -28i64..=30,
        ) {
            let hi = if wide { mid.rotate_left(7) } else { 0 };
            let d = Decimal::from_parts(lo, if wide { mid } else { mid % 1000 }, hi, negative, scale);
            // The wide path (the reference) overflows rounding up near 2^96.
            let room = Decimal::from_i128_with_scale(7 * 10i128.pow(28), 0);
            proptest::prop_assume!(dp >= 0 || d.abs() < room);
            proptest::prop_assert_eq!(round_at(d, dp), round_at_wide(d, dp));
            let (a, b) = (round_at(d, dp), round_at_wide(d, dp));
            proptest::prop_assert_eq!(a.scale(), b.scale());
            proptest::prop_assert_eq!(a.is_sign_negative(), b.is_sign_negative());
        }
    }

    #[test]
    fn small_rounding_at_ties_goes_to_even() {
        // ASTM E29 half-even, as in the examples above, by the u64 path.
        for (x, dp, want) in [
            ("0.125", 2, "0.12"),
            ("0.135", 2, "0.14"),
            ("-2.5", 0, "-2"),
            ("-0.04", 1, "0.0"),
        ] {
            let got = round_small(d(x), dp).unwrap();
            assert_eq!(got.to_string(), want, "{x}");
        }
    }

    #[test]
    fn push_decimal_edges_as_display() {
        for d in [
            Decimal::ZERO,
            Decimal::from_parts(0, 0, 0, true, 0),
            Decimal::from_parts(0, 0, 0, true, 3),
            Decimal::from_parts(0, 0, 0, false, 28),
            Decimal::MAX,
            Decimal::MIN,
            Decimal::from_parts(5, 0, 0, false, 28),
            Decimal::from_parts(u32::MAX, u32::MAX, 0, true, 10),
            Decimal::from_parts(0, 0, 1, false, 19),
        ] {
            let mut s = String::new();
            push_decimal(&mut s, d);
            assert_eq!(s, d.to_string());
        }
    }

    // ASTM E29, rounding method: a 5 followed only by zeros rounds to the even digit.
    #[test]
    fn astm_e29_half_even_examples() {
        assert_eq!(round_sig(d("1.235"), 3).to_string(), "1.24");
        assert_eq!(round_sig(d("1.245"), 3).to_string(), "1.24");
        assert_eq!(round_sig(d("1.2451"), 3).to_string(), "1.25");
        assert_eq!(round_sig(d("2.35"), 2).to_string(), "2.4");
        assert_eq!(round_sig(d("2.45"), 2).to_string(), "2.4");
        assert_eq!(round_sig(d("2.450001"), 2).to_string(), "2.5");
    }

    // Significant-figure convention (ASTM E29): trailing zeros are significant and kept.
    #[test]
    fn trailing_zeros_are_kept() {
        assert_eq!(round_sig(d("25"), 3).to_string(), "25.0");
        assert_eq!(round_sig(d("0.6"), 3).to_string(), "0.600");
        assert_eq!(round_sig(d("12345"), 3).to_string(), "12300");
        assert_eq!(round_sig(d("0.0004567"), 2).to_string(), "0.00046");
        assert_eq!(round_sig(d("0"), 3).to_string(), "0.00");
    }

    #[test]
    fn rounding_across_a_power_of_ten_keeps_the_digit_count() {
        assert_eq!(round_sig(d("9.996"), 3).to_string(), "10.0");
        assert_eq!(round_sig(d("99.96"), 3).to_string(), "100");
        assert_eq!(round_sig(d("-0.0999"), 2).to_string(), "-0.10");
    }

    #[test]
    fn negative_values_round_on_their_magnitude() {
        assert_eq!(round_sig(d("-1.235"), 3).to_string(), "-1.24");
        assert_eq!(round_sig(d("-0.05"), 3).to_string(), "-0.0500");
    }

    #[test]
    fn round_up_never_understates() {
        assert_eq!(round_sig_up(d("0.1231"), 3).to_string(), "0.124");
        assert_eq!(round_sig_up(d("0.123"), 3).to_string(), "0.123");
        assert_eq!(round_sig_up(d("9.991"), 3).to_string(), "10.0");
        assert_eq!(round_sig_up(d("12301"), 3).to_string(), "12400");
    }

    #[test]
    fn reported_values_are_refused_as_readings() {
        for bad in ["<0.5", "ND", "> 100", "nd", "1,5", "abc", ""] {
            assert!(parse_decimal(bad).is_err(), "{bad}");
        }
        assert_eq!(d("-0.012").to_string(), "-0.012");
        assert_eq!(d("1.5e-3"), d("0.0015"));
        assert_eq!(d(" 2.50 ").to_string(), "2.50");
    }

    // Each reported-value form is refused by name, not as "not a number"
    // (common practice, no source: a lab reports these, instruments do not).
    #[test]
    fn every_reported_value_form_is_named_as_such() {
        for t in ["<0.5", "> 2500", "ND", "nd", "n.d.", "N.D.", "BDL", "bdl"] {
            let e = parse_decimal(t).unwrap_err();
            assert!(e.contains("is a reported value"), "{t}: {e}");
        }
        let e = parse_decimal("n/a").unwrap_err();
        assert!(e.contains("is not a number"), "{e}");
        assert_eq!(
            parse_decimal(" -0.25 ").unwrap(),
            Decimal::from_str("-0.25").unwrap()
        );
        assert_eq!(parse_decimal("1.5e2").unwrap(), Decimal::from(150));
    }

    #[test]
    fn plain_drops_meaningless_zeros_only() {
        let d = |s: &str| Decimal::from_str(s).unwrap();
        assert_eq!(plain(d("25.000")), "25");
        assert_eq!(plain(d("0.0600")), "0.06");
        assert_eq!(plain(d("1500")), "1500");
        assert_eq!(plain(d("-0.000")), "0");
        assert_eq!(plain(d("12.5")), "12.5");
    }
}
