//! Number formatting shared by every output: exact numbers for data files
//! (the shortest text that reads back as the same double) and the rounded
//! forms people read.

use std::io::Write;

/// A number for a data file: the shortest text that reads back as exactly
/// the same double, in exponent form below 1e-4 (so that small
/// probabilities stay short), e.g. 0.25, 3.5103255297807e-5.
pub fn exact(x: f64) -> String {
    if x != 0.0 && x.abs() < 1e-4 {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

/// A whole number with thousands separators: 1234567 → "1,234,567".
pub fn count(n: usize) -> String {
    let digits = n.to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// A number rounded to `decimals` places, as people read it: a value
/// that rounds to zero is written without a sign (an empty sum is −0 in
/// IEEE arithmetic, and "-0.0000" reads as a small loss).
pub fn fixed(x: f64, decimals: usize) -> String {
    let text = format!("{x:.decimals$}");
    match text.strip_prefix('-') {
        Some(rest) if rest.bytes().all(|b| b == b'0' || b == b'.') => rest.to_string(),
        _ => text,
    }
}

/// A share as a percentage with one decimal: 0.1012 → "10.1%".
pub fn percent(share: f64) -> String {
    format!("{}%", fixed(100.0 * share, 1))
}

/// A number with about `significant` significant digits, without
/// exponent notation for everyday magnitudes.
pub fn number(x: f64, significant: usize) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let magnitude = x.abs().log10().floor() as i32;
    if !(-4..=9).contains(&magnitude) {
        return format!("{:.*e}", significant.saturating_sub(1), x);
    }
    let decimals = (significant as i32 - 1 - magnitude).max(0) as usize;
    let text = format!("{x:.decimals$}");
    // Trailing zeros after the point say nothing.
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

/// Appends a number as [`exact`] writes it: shortest round-trip
/// digits, scientific below 1e-4.
#[inline]
pub fn push_number(out: &mut Vec<u8>, x: f64) {
    // Ryu finds shortest round-trip digits several times faster than the
    // standard library and lays them out the same way for non-integers in
    // [1e-4, 1e16); everything else goes through the standard library. (In
    // about 0.2% of 17-digit cases the two pick a different last digit; both
    // are equally short and read back to the same value.)
    let magnitude = x.abs();
    if (1e-4..1e16).contains(&magnitude) && x.fract() != 0.0 {
        out.extend_from_slice(ryu::Buffer::new().format_finite(x).as_bytes());
    } else if x != 0.0 && magnitude < 1e-4 {
        let _ = write!(out, "{x:e}");
    } else {
        let _ = write!(out, "{x}");
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formats() {
        assert_eq!(exact(0.25), "0.25");
        assert_eq!(exact(3.5e-5), "3.5e-5");
        assert_eq!(exact(3.5e-5).parse::<f64>().ok(), Some(3.5e-5));
        assert_eq!(count(0), "0");
        assert_eq!(count(999), "999");
        assert_eq!(count(1000), "1,000");
        assert_eq!(count(1234567), "1,234,567");
        assert_eq!(percent(0.1012), "10.1%");
        assert_eq!(number(56432.1, 4), "56432");
        assert_eq!(number(0.012345, 3), "0.0123");
        assert_eq!(number(-2.5, 3), "-2.5");
        assert_eq!(number(600.0, 4), "600");
        assert_eq!(fixed(-0.0, 4), "0.0000");
        assert_eq!(fixed(-0.00004, 4), "0.0000");
        assert_eq!(fixed(-0.00005001, 4), "-0.0001");
        assert_eq!(fixed(-2.5, 1), "-2.5");
        assert_eq!(percent(-0.0), "0.0%");
    }

    /// The fast layout reads back exactly, is as short as the report
    /// module's, and uses an exponent exactly when it does.
    #[test]
    fn numbers_are_written_as_the_report_writes_them() {
        let mut rng = crate::rng::Rng::new(11);
        let mut values = vec![0.0, -0.0, 1.0, 0.5, 1e-4, 9.999999999999999e-5, 1e16, 123456789.125, 40.0, -3.25, 1e300];
        for _ in 0..200_000 {
            let exponent = rng.uniform() * 44.0 - 22.0;
            let sign = if rng.uniform() < 0.2 { -1.0 } else { 1.0 };
            values.push(sign * 10f64.powf(exponent) * (1.0 + rng.uniform()));
            values.push(f64::from_bits(rng.next_u64() >> 2));
        }
        for x in values {
            let mut out = Vec::new();
            push_number(&mut out, x);
            let (ours, standard) = (String::from_utf8_lossy(&out).into_owned(), exact(x));
            assert_eq!(ours.parse::<f64>().map(f64::to_bits), Ok(x.to_bits()), "{ours} does not read back as {x:e}");
            assert_eq!(ours.len(), standard.len(), "{ours} vs {standard}");
            assert_eq!(ours.contains('e'), standard.contains('e'), "{ours} vs {standard}");
        }
    }
}
