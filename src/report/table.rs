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

    /// Adds a row (missing cells are blank).
    pub fn row(&mut self, cells: Vec<String>) {
        self.rows.push(cells);
    }

    /// Renders with two spaces between columns; trailing spaces trimmed.
    pub fn render(&self) -> String {
        let width = |i: usize| {
            self.rows
                .iter()
                .filter_map(|r| r.get(i))
                .chain(std::iter::once(&self.headers[i]))
                .map(|c| c.chars().count())
                .max()
                .unwrap_or(0)
        };
        let widths: Vec<usize> = (0..self.headers.len()).map(width).collect();
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
        let mut out = line(&self.headers);
        out.push('\n');
        // The rule spans the table, up to 100 columns.
        out.push_str(&"-".repeat((widths.iter().sum::<usize>() + 2 * widths.len().saturating_sub(1)).min(100)));
        out.push('\n');
        for row in &self.rows {
            out.push_str(&line(row));
            out.push('\n');
        }
        out
    }
}
