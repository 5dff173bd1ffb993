//! The design: model inputs as the dense columns the linear and quadratic
//! families use — numeric inputs as they are, each categorical input
//! one-hot with its first level (in the schema's order) as the dropped
//! reference — filled block by block into column-major tiles.

use serde::{Deserialize, Serialize};

use crate::data::schema::Schema;
use crate::data::Inputs;

/// Rows per tile: small enough that a tile of 20–60 columns stays in the
/// second-level cache, large enough that per-tile overhead vanishes.
pub const TILE_ROWS: usize = 512;

/// The name of the intercept among a linear model's inputs, in tables and
/// JSON; the angle brackets keep it apart from any column name a file can
/// give without quoting.
pub const INTERCEPT: &str = "<intercept>";

/// A categorical input's one-hot columns.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OneHot {
    /// The column.
    pub column: String,
    /// Every level; the first is the reference and has no column.
    pub levels: Vec<String>,
}

/// How inputs become design columns.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Encoding {
    /// Numeric inputs, in order.
    pub numeric: Vec<String>,
    /// Categorical inputs, in order.
    pub one_hot: Vec<OneHot>,
}

impl Encoding {
    /// The encoding of a schema's inputs.
    pub fn from_schema(schema: &Schema) -> Self {
        Encoding {
            numeric: schema.numeric_inputs(),
            one_hot: schema
                .categorical_inputs()
                .iter()
                .map(|c| OneHot {
                    column: c.name.clone(),
                    levels: c.categorical.as_ref().map(|s| s.levels.clone()).unwrap_or_default(),
                })
                .collect(),
        }
    }

    /// Number of design columns.
    pub fn width(&self) -> usize {
        self.numeric.len() + self.one_hot.iter().map(|h| h.levels.len().saturating_sub(1)).sum::<usize>()
    }

    /// The design columns' names: numeric inputs, then `COLUMN=LEVEL`.
    pub fn terms(&self) -> Vec<String> {
        let mut terms = self.numeric.clone();
        for h in &self.one_hot {
            terms.extend(h.levels.iter().skip(1).map(|l| format!("{}={l}", h.column)));
        }
        terms
    }

    /// Fills `out` (length `width()`) with the design of row `r`.
    #[inline]
    pub fn fill_row(&self, inputs: &Inputs<'_>, r: usize, out: &mut [f64]) {
        let p = self.numeric.len();
        for (j, o) in out[..p].iter_mut().enumerate() {
            *o = inputs.numeric[(r, j)];
        }
        let mut column = p;
        for (c, h) in self.one_hot.iter().enumerate() {
            let code = inputs.categorical[c][r] as usize;
            for level in 1..h.levels.len() {
                out[column] = f64::from(u8::from(code == level));
                column += 1;
            }
        }
    }

    /// Fills `tile` (column-major, `rows.len()` rows per column, `width()`
    /// columns) with the design of `rows`.
    pub fn fill_tile(&self, inputs: &Inputs<'_>, rows: std::ops::Range<usize>, tile: &mut [f64]) {
        let n = rows.len();
        let mut column = 0;
        for j in 0..self.numeric.len() {
            let out = &mut tile[column * n..(column + 1) * n];
            let source = inputs.numeric.column(j);
            match source.as_slice() {
                Some(values) => out.copy_from_slice(&values[rows.clone()]),
                None => out.iter_mut().zip(rows.clone()).for_each(|(o, r)| *o = source[r]),
            }
            column += 1;
        }
        for (c, h) in self.one_hot.iter().enumerate() {
            let codes = &inputs.categorical[c][rows.clone()];
            for level in 1..h.levels.len() {
                let out = &mut tile[column * n..(column + 1) * n];
                out.iter_mut().zip(codes).for_each(|(o, &code)| *o = f64::from(u8::from(code as usize == level)));
                column += 1;
            }
        }
    }
}

/// The row ranges of tiles covering `0..rows`.
pub fn tiles(rows: usize) -> impl Iterator<Item = std::ops::Range<usize>> {
    (0..rows.div_ceil(TILE_ROWS)).map(move |t| t * TILE_ROWS..((t + 1) * TILE_ROWS).min(rows))
}
