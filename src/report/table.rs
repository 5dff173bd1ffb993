//! A plain aligned text table.

/// Column alignment.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Align {
    /// Text columns.
    Left,
    /// Number columns.
    Right,
}

/// A table of text cells rendered with aligned columns, a header and a rule.
#[derive(Debug, Clone)]
pub struct Table {
    headers: Vec<String>,
    align: Vec<Align>,
    rows: Vec<Vec<String>>,
}

impl Table {
    /// A table with these headers and alignments.
    pub fn new(headers: &[(&str, Align)]) -> Self {
        Table {
            headers: headers.iter().map(|(h, _)| h.to_string()).collect(),
            align: headers.iter().map(|(_, a)| *a).collect(),
            rows: Vec::new(),
        }
    }

    /// Whether the table has no rows.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// Adds a row (missing cells are blank).
    pub fn row(&mut self, cells: Vec<String>) {
        self.rows.push(cells);
    }

    /// Renders with two spaces between columns; trailing spaces trimmed.
    /// A table wider than [`WIDTH`] wraps its prose columns (cells with
    /// spaces, such as an interval "a … b"), widest first, between words onto continuation lines: nothing is cut.
    pub fn render(&self) -> String {
        let columns = self.headers.len();
        let mut widths: Vec<usize> = (0..columns)
            .map(|i| {
                self.rows
                    .iter()
                    .filter_map(|r| r.get(i))
                    .chain(std::iter::once(&self.headers[i]))
                    .map(|c| c.chars().count())
                    .max()
                    .unwrap_or(0)
            })
            .collect();
        let total = |widths: &[usize]| widths.iter().sum::<usize>() + 2 * widths.len().saturating_sub(1);
        // Narrow the widest prose column (cells with spaces) a character at
        // a time, never below its header or MIN_WRAPPED; names are never
        // broken, so a table of long names may stay wider.
        // A column is never narrower than its longest unbreakable piece (a
        // word, or a name's part between separators), so nothing is cut
        // mid-word; a table of long unbreakable names may stay wider.
        let prose: Vec<bool> =
            (0..columns).map(|i| self.rows.iter().any(|r| r.get(i).is_some_and(|c| c.contains(' ')))).collect();
        let narrowest: Vec<usize> = (0..columns)
            .map(|i| {
                let longest = self
                    .rows
                    .iter()
                    .filter_map(|r| r.get(i))
                    .flat_map(|c| unbreakable(c).into_iter())
                    .max()
                    .unwrap_or(0);
                longest.max(MIN_WRAPPED).max(self.headers[i].chars().count())
            })
            .collect();
        while total(&widths) > WIDTH {
            let narrowable = (0..columns)
                .filter(|&i| prose[i])
                .filter(|&i| widths[i] > narrowest[i])
                .max_by_key(|&i| (widths[i], std::cmp::Reverse(i)));
            match narrowable {
                Some(i) => widths[i] -= 1,
                None => break,
            }
        }
        let line = |cells: &[String]| {
            let mut out = String::new();
            for (i, w) in widths.iter().enumerate() {
                let cell = cells.get(i).map(String::as_str).unwrap_or("");
                let pad = w - cell.chars().count().min(*w);
                if i > 0 {
                    out.push_str("  ");
                }
                match self.align[i] {
                    Align::Left => {
                        out.push_str(cell);
                        out.push_str(&" ".repeat(pad));
                    }
                    Align::Right => {
                        out.push_str(&" ".repeat(pad));
                        out.push_str(cell);
                    }
                }
            }
            out.trim_end().to_string()
        };
        // A row as one or more lines: each cell in pieces of its width.
        let lines = |cells: &[String]| {
            let pieces: Vec<Vec<String>> =
                (0..columns).map(|i| pieces(cells.get(i).map(String::as_str).unwrap_or(""), widths[i])).collect();
            let height = pieces.iter().map(Vec::len).max().unwrap_or(1);
            let mut out = String::new();
            for l in 0..height {
                let row: Vec<String> = pieces.iter().map(|p| p.get(l).cloned().unwrap_or_default()).collect();
                out.push_str(&line(&row));
                out.push('\n');
            }
            out
        };
        let mut out = lines(&self.headers);
        // The rule spans the table, up to WIDTH columns.
        out.push_str(&"-".repeat(total(&widths).min(WIDTH)));
        out.push('\n');
        for row in &self.rows {
            out.push_str(&lines(row));
        }
        out
    }
}

/// The widest a table is drawn, in characters.
pub const WIDTH: usize = 100;

/// The narrowest a wrapped text column becomes.
const MIN_WRAPPED: usize = 12;

/// Where a cell may break: prose between words only (never inside
/// "1,618"), a name after its separators.
fn breaks(prose: bool, c: char) -> bool {
    if prose {
        c == ' '
    } else {
        matches!(c, ':' | ',' | '=' | '+')
    }
}

/// The lengths of a cell's unbreakable pieces (see [`breaks`]).
fn unbreakable(cell: &str) -> Vec<usize> {
    let prose = cell.contains(' ');
    let mut lengths = vec![0];
    for c in cell.chars() {
        if let Some(last) = lengths.last_mut() {
            *last += 1;
        }
        if breaks(prose, c) {
            lengths.push(0);
        }
    }
    lengths
}

/// A cell cut into pieces of at most `width` characters, each ending at the
/// last break (see [`breaks`]) that fits; a cell that fits is one piece. The
/// column widths keep every unbreakable piece whole.
fn pieces(cell: &str, width: usize) -> Vec<String> {
    let chars: Vec<char> = cell.chars().collect();
    if chars.len() <= width || width == 0 {
        return vec![cell.to_string()];
    }
    let mut out = Vec::new();
    let mut start = 0;
    while start < chars.len() {
        let mut end = (start + width).min(chars.len());
        if end < chars.len() {
            let prose = chars.contains(&' ');
            // A space may fall just past the piece (it is dropped); a
            // separator ends its piece.
            let last = if prose { end } else { end - 1 };
            if let Some(cut) = (start + 1..=last).rev().find(|&j| breaks(prose, chars[j])) {
                end = cut + 1;
            }
        }
        let piece: String = chars[start..end].iter().collect();
        out.push(if start == 0 { piece.trim_end() } else { piece.trim() }.to_string());
        start = end;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A table too wide for WIDTH wraps its prose column between words:
    /// every line fits and every word is there; a long name is kept whole.
    #[test]
    fn wide_tables_wrap_prose_and_keep_names_whole() {
        let name = "logistic:penalty=elastic-net,mixing=0.25";
        let prose = "block 156, pass 48784, step_up 1060, review 22, refer 4, decline 17";
        let mut table = Table::new(&[("name", Align::Left), ("cost", Align::Right), ("actions", Align::Left)]);
        table.row(vec![name.into(), "0.1564".into(), prose.into()]);
        let text = table.render();
        assert!(text.lines().all(|l| l.chars().count() <= WIDTH), "{text}");
        assert!(text.lines().nth(2).is_some_and(|l| l.starts_with(name)), "{text}");
        let words: Vec<&str> = text.lines().skip(2).flat_map(|l| l.split_whitespace()).skip(2).collect();
        assert_eq!(words.join(" "), prose, "{text}");
        assert!(text.lines().count() > 3, "{text}");
        // A table that fits is unchanged: one line per row.
        let mut small = Table::new(&[("name", Align::Left), ("AUC", Align::Right)]);
        small.row(vec!["lda".into(), "0.8376".into()]);
        assert_eq!(small.render(), "name     AUC\n------------\nlda   0.8376\n");
    }
}
