//! Output for people: aligned terminal tables and number formatting.
//! (JSON output is the serialization of the library's own types.)

pub mod evaluation;
pub mod model;
pub mod table;

pub use crate::CAUTION;

/// Wraps `text` at word boundaries to lines of at most `width` characters,
/// every line after the first indented by `indent` spaces.
pub fn wrap(text: &str, width: usize, indent: usize) -> String {
    let mut out = String::new();
    let mut line_length = 0;
    for word in text.split_whitespace() {
        let length = word.chars().count();
        if line_length > 0 && line_length + 1 + length > width {
            out.push('\n');
            out.push_str(&" ".repeat(indent));
            line_length = indent;
        } else if line_length > 0 {
            out.push(' ');
            line_length += 1;
        }
        out.push_str(word);
        line_length += length;
    }
    out
}

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
        if i > 0 && (digits.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// A share as a percentage with one decimal: 0.1012 → "10.1%".
pub fn percent(share: f64) -> String {
    format!("{:.1}%", 100.0 * share)
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formats() {
        assert_eq!(exact(0.25), "0.25");
        assert_eq!(exact(3.5e-5), "3.5e-5");
        assert_eq!(exact(3.5e-5).parse::<f64>().unwrap(), 3.5e-5);
        assert_eq!(wrap("aa bb cc dd", 5, 2), "aa bb\n  cc\n  dd");
        assert_eq!(count(0), "0");
        assert_eq!(count(999), "999");
        assert_eq!(count(1000), "1,000");
        assert_eq!(count(1234567), "1,234,567");
        assert_eq!(percent(0.1012), "10.1%");
        assert_eq!(number(56432.1, 4), "56432");
        assert_eq!(number(0.012345, 3), "0.0123");
        assert_eq!(number(-2.5, 3), "-2.5");
        assert_eq!(number(600.0, 4), "600");
    }
}
