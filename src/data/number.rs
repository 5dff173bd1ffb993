//! Fast decimal-to-f64 parsing with exactly the result of `str::parse`.
//!
//! Most numbers in analysts' files have few digits and a small exponent
//! ("12.75", "-0.004213"). For those the correctly rounded value is one
//! IEEE operation: when the decimal significand m is an integer below 2⁵³
//! and the power of ten 10^|e| has |e| ≤ 22, both are exact doubles, so
//! m · 10^e (or m / 10^−e) rounded once is the correctly rounded result
//! (Clinger 1990, "How to read floating point numbers accurately", PLDI,
//! the "fast path"). Everything else — long significands, large exponents,
//! `inf`, `nan`, malformed text — goes to the standard library, so the
//! answer is always the one `str::parse::<f64>` gives.

const EXACT_POWERS_OF_TEN: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20,
    1e21, 1e22,
];

/// Parses `bytes` as a decimal number; `None` when it is not one. The value
/// is bit-for-bit what `str::parse::<f64>` returns.
#[inline]
pub fn parse_f64(bytes: &[u8]) -> Option<f64> {
    match fast_path(bytes) {
        Some(v) => Some(v),
        None => std::str::from_utf8(bytes).ok()?.parse::<f64>().ok(),
    }
}

/// Scans a plain decimal number at the start of `bytes` (sign, digits,
/// point, digits, optional exponent) and converts it when the Clinger fast
/// path applies: returns the value and the bytes used, or `None` when the
/// text is not such a number or needs the full algorithm. What follows the
/// number is not looked at; the caller checks that a field ends there.
#[inline]
pub fn scan_f64(bytes: &[u8]) -> Option<(f64, usize)> {
    let (negative, rest) = match bytes.first()? {
        b'-' => (true, &bytes[1..]),
        b'+' => (false, &bytes[1..]),
        _ => (false, bytes),
    };
    let sign_length = bytes.len() - rest.len();
    let mut significand: u64 = 0;
    let whole = take_digits(rest, &mut significand);
    let mut used = whole;
    let mut fraction = 0;
    if rest.get(whole) == Some(&b'.') {
        fraction = take_digits(&rest[whole + 1..], &mut significand);
        used += 1 + fraction;
    }
    let digits = whole + fraction;
    if digits == 0 || digits > 15 {
        return None;
    }
    let mut exponent = -(fraction as i32);
    if let Some(&(b'e' | b'E')) = rest.get(used) {
        let tail = &rest[used + 1..];
        let (exponent_negative, sign) = match tail.first()? {
            b'-' => (true, 1),
            b'+' => (false, 1),
            _ => (false, 0),
        };
        let mut value = 0u64;
        let count = take_digits(&tail[sign..], &mut value);
        if count == 0 || count > 4 {
            return None;
        }
        used += 1 + sign + count;
        exponent += if exponent_negative { -(value as i32) } else { value as i32 };
    }
    let m = significand as f64;
    let magnitude = if exponent >= 0 {
        m * *EXACT_POWERS_OF_TEN.get(exponent as usize)?
    } else {
        m / *EXACT_POWERS_OF_TEN.get((-exponent) as usize)?
    };
    Some((if negative { -magnitude } else { magnitude }, sign_length + used))
}

/// Appends the decimal digits at the start of `bytes` to `significand`;
/// returns how many there were.
///
/// Eight bytes at a time where eight remain: the run of digits is found
/// with a mask and combined with three multiplications (the usual SWAR
/// method), so a number's digits cost no per-digit branch.
#[inline(always)]
fn take_digits(bytes: &[u8], significand: &mut u64) -> usize {
    const POWERS: [u64; 9] = [1, 10, 100, 1_000, 10_000, 100_000, 1_000_000, 10_000_000, 100_000_000];
    let mut i = 0;
    while let Some(window) = bytes.get(i..i + 8) {
        let mut word = [0u8; 8];
        word.copy_from_slice(window);
        let chunk = u64::from_le_bytes(word);
        let offsets = chunk.wrapping_sub(0x3030_3030_3030_3030);
        // A byte's high bit is set here when it is below '0' or above '9';
        // bytes before the first such byte are digits, so a borrow or carry
        // it causes only reaches bytes after it.
        let not_digit = (chunk.wrapping_add(0x4646_4646_4646_4646) | offsets) & 0x8080_8080_8080_8080;
        let run = if not_digit == 0 { 8 } else { (not_digit.trailing_zeros() / 8) as usize };
        if run == 0 {
            return i;
        }
        // The run's digits moved to the top bytes (zeros below), then
        // combined pairwise: bytes → 2 digits → 4 → 8.
        let mut v = if run == 8 { offsets } else { offsets << (8 * (8 - run)) };
        v = (v.wrapping_mul(10).wrapping_add(v >> 8)) & 0x00FF_00FF_00FF_00FF;
        v = (v.wrapping_mul(100).wrapping_add(v >> 16)) & 0x0000_FFFF_0000_FFFF;
        v = (v.wrapping_mul(10_000).wrapping_add(v >> 32)) & 0xFFFF_FFFF;
        *significand = significand.wrapping_mul(POWERS[run]).wrapping_add(v);
        i += run;
        if run < 8 {
            return i;
        }
    }
    while i < bytes.len() {
        let digit = bytes[i].wrapping_sub(b'0');
        if digit > 9 {
            break;
        }
        *significand = significand.wrapping_mul(10).wrapping_add(u64::from(digit));
        i += 1;
    }
    i
}

/// The Clinger fast path over the whole of `bytes`, or `None` to defer to
/// the standard library.
#[inline]
fn fast_path(bytes: &[u8]) -> Option<f64> {
    match scan_f64(bytes) {
        Some((value, used)) if used == bytes.len() => Some(value),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn same_as_std(text: &str) {
        let ours = parse_f64(text.as_bytes());
        let std = text.parse::<f64>().ok();
        match (ours, std) {
            (Some(a), Some(b)) => {
                assert!(a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()), "{text}: {a} vs {b}")
            }
            (None, None) => {}
            (a, b) => panic!("{text}: {a:?} vs {b:?}"),
        }
    }

    #[test]
    fn agrees_with_the_standard_library_on_awkward_cases() {
        for text in [
            "0",
            "-0",
            "+0",
            "1",
            "-1",
            "12.5",
            ".5",
            "5.",
            ".",
            "-",
            "+",
            "",
            "1e5",
            "1E-5",
            "1e",
            "1e+",
            "2.5e-3",
            "123456789012345",
            "1234567890123456",
            "9007199254740993",
            "0.1",
            "0.3",
            "1e22",
            "1e23",
            "1e-22",
            "1e-23",
            "inf",
            "-inf",
            "NaN",
            "nan",
            "infinity",
            "1.2.3",
            "1-2",
            "--1",
            "0x10",
            "1_000",
            "1,5",
            " 1",
            "1 ",
            "00012",
            "0.000000000000001",
            "4.9e-324",
            "1.7976931348623157e308",
            "1e400",
            "-1e-400",
            "12345e-10",
        ] {
            same_as_std(text);
        }
    }

    /// Digit runs of every length before every kind of byte: the eight-at-
    /// a-time scan stops exactly where the digits stop.
    #[test]
    fn digit_runs_end_where_the_digits_end() {
        let digits = "98765432109876543210";
        for whole in 0..=17 {
            for fraction in [0, 1, 5, 6, 7, 8, 9, 12] {
                for tail in [",", "\n", ":", "/", "\u{ff}", ",1234567890", ""] {
                    let number = match fraction {
                        0 => format!("-{}", &digits[..whole]),
                        f => format!("{}.{}", &digits[..whole], &digits[..f]),
                    };
                    let text = format!("{number}{tail}");
                    let expected =
                        number.parse::<f64>().ok().filter(|_| whole + fraction <= 15 && whole + fraction > 0);
                    let got = scan_f64(text.as_bytes());
                    match expected {
                        Some(x) => assert_eq!(got, Some((x, number.len())), "{text:?}"),
                        None => assert!(got.is_none() || got.map(|g| g.1) == Some(number.len()), "{text:?}"),
                    }
                }
            }
        }
    }

    proptest! {
        #[test]
        fn agrees_with_the_standard_library(
            sign in prop::sample::select(vec!["", "-", "+"]),
            whole in "[0-9]{0,12}",
            fraction in prop::option::of("[0-9]{0,10}"),
            exponent in prop::option::of(-30i32..30),
        ) {
            let mut text = format!("{sign}{whole}");
            if let Some(f) = fraction { text.push('.'); text.push_str(&f); }
            if let Some(e) = exponent { text.push_str(&format!("e{e}")); }
            same_as_std(&text);
        }

        #[test]
        fn round_trips_printed_doubles(x in any::<f64>().prop_filter("finite", |x| x.is_finite())) {
            same_as_std(&format!("{x}"));
            same_as_std(&format!("{x:.6}"));
            same_as_std(&format!("{x:e}"));
        }
    }
}
