//! Output for people: aligned terminal tables and wrapped text (numbers
//! are formatted by [`crate::format`]).
//! (JSON output is the serialization of the library's own types.)

pub mod demo;
pub mod describe;
pub mod evaluation;
pub mod header;
pub mod model;
pub mod score;
pub mod shift;
pub mod study;
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formats() {
        assert_eq!(wrap("aa bb cc dd", 5, 2), "aa bb\n  cc\n  dd");
    }
}
