//! Per-class sufficient statistics: weighted count, mean and centred
//! cross-products of the design columns, accumulated in one parallel pass.
//!
//! Each tile of rows is summarised by the two-pass formula (its own mean,
//! then products of deviations from it), and summaries are merged exactly
//! by the pairwise update of Chan, Golub & LeVeque (1979), "Updating
//! formulae and a pairwise algorithm for computing sample variances":
//! n = na + nb, δ = μb − μa, μ = μa + δ·nb/n, M = Ma + Mb + δδᵀ·na·nb/n.
//! Merging is what makes chunks, threads and (later) SQL aggregates the same
//! computation. Chunks are merged in row order, so the result does not
//! depend on the number of threads.

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::data::Inputs;
use crate::model::design::{tiles, Encoding, TILE_ROWS};
use crate::model::linalg::dot;

/// Weighted moments of one class.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Moments {
    /// Total weight (the row count without weights).
    pub weight: f64,
    /// Rows with positive weight.
    pub rows: usize,
    /// Weighted mean of each design column.
    pub mean: Vec<f64>,
    /// Centred cross-products Σ w (x − μ)(x − μ)ᵀ, row-major d × d; only the
    /// diagonal (length d) when `diagonal` is set.
    pub scatter: Vec<f64>,
    /// Whether only the diagonal is kept.
    pub diagonal: bool,
}

impl Moments {
    /// No rows yet.
    pub fn empty(d: usize, diagonal: bool) -> Self {
        Moments {
            weight: 0.0,
            rows: 0,
            mean: vec![0.0; d],
            scatter: vec![0.0; if diagonal { d } else { d * d }],
            diagonal,
        }
    }

    /// Dimension.
    pub fn dim(&self) -> usize {
        self.mean.len()
    }

    /// Adds another summary (Chan, Golub & LeVeque 1979).
    pub fn merge(&mut self, other: &Moments) {
        if other.weight == 0.0 {
            return;
        }
        if self.weight == 0.0 {
            *self = other.clone();
            return;
        }
        let d = self.dim();
        let total = self.weight + other.weight;
        let factor = self.weight * other.weight / total;
        let delta: Vec<f64> = (0..d).map(|j| other.mean[j] - self.mean[j]).collect();
        if self.diagonal {
            for j in 0..d {
                self.scatter[j] += other.scatter[j] + delta[j] * delta[j] * factor;
            }
        } else {
            for i in 0..d {
                for j in 0..d {
                    self.scatter[i * d + j] += other.scatter[i * d + j] + delta[i] * delta[j] * factor;
                }
            }
        }
        for j in 0..d {
            self.mean[j] += delta[j] * other.weight / total;
        }
        self.weight = total;
        self.rows += other.rows;
    }

    /// The centred cross-product of columns i and j.
    pub fn scatter_at(&self, i: usize, j: usize) -> f64 {
        if self.diagonal {
            if i == j {
                self.scatter[i]
            } else {
                0.0
            }
        } else {
            self.scatter[i * self.dim() + j]
        }
    }
}

/// Moments of the rows of one tile that belong to one class.
fn tile_moments(tile: &[f64], n: usize, d: usize, rows: &[usize], weights: &[f64], diagonal: bool) -> Moments {
    let mut m = Moments::empty(d, diagonal);
    let total: f64 = rows.iter().map(|&r| weights[r]).sum();
    if total == 0.0 {
        return m;
    }
    m.weight = total;
    m.rows = rows.len();
    // Deviations from the tile's own class mean, column by column.
    let mut centred = vec![0.0; rows.len() * d];
    let mut weighted = vec![0.0; rows.len() * d];
    for j in 0..d {
        let column = &tile[j * n..(j + 1) * n];
        let mean = rows.iter().map(|&r| weights[r] * column[r]).sum::<f64>() / total;
        m.mean[j] = mean;
        let c = &mut centred[j * rows.len()..(j + 1) * rows.len()];
        let w = &mut weighted[j * rows.len()..(j + 1) * rows.len()];
        for (k, &r) in rows.iter().enumerate() {
            c[k] = column[r] - mean;
            w[k] = weights[r] * c[k];
        }
    }
    let len = rows.len();
    if diagonal {
        for j in 0..d {
            m.scatter[j] = dot(&weighted[j * len..(j + 1) * len], &centred[j * len..(j + 1) * len]);
        }
    } else {
        for i in 0..d {
            for j in i..d {
                let v = dot(&weighted[i * len..(i + 1) * len], &centred[j * len..(j + 1) * len]);
                m.scatter[i * d + j] = v;
                m.scatter[j * d + i] = v;
            }
        }
    }
    m
}

/// Weighted moments of the design columns, per class, over every row with
/// positive weight (a weight of 0 drops the row; no weights means 1 each).
pub fn class_moments(
    encoding: &Encoding,
    inputs: &Inputs<'_>,
    target: &[u32],
    weights: Option<&[f64]>,
    classes: usize,
    diagonal: bool,
) -> Vec<Moments> {
    grouped_class_moments(encoding, inputs, target, weights, classes, diagonal, None, 1).swap_remove(0)
}

/// [`class_moments`] for several groups of rows at once (the folds of a
/// cross-validation), in one pass: `group_of[r]` is row r's group, and rows
/// whose group is `groups` or more are left out. Returns [group][class].
/// The moments of any union of groups are then the merge of theirs.
#[allow(clippy::too_many_arguments)]
pub fn grouped_class_moments(
    encoding: &Encoding,
    inputs: &Inputs<'_>,
    target: &[u32],
    weights: Option<&[f64]>,
    classes: usize,
    diagonal: bool,
    group_of: Option<&[u32]>,
    groups: usize,
) -> Vec<Vec<Moments>> {
    let d = encoding.width();
    let n = inputs.rows();
    let ones;
    let weights = match weights {
        Some(w) => w,
        None => {
            ones = vec![1.0; n];
            &ones
        }
    };
    let slot = |r: usize| -> Option<usize> {
        let g = group_of.map_or(0, |g| g[r] as usize);
        (g < groups).then_some(g * classes + target[r] as usize)
    };
    let cells = groups * classes;
    const TILES_PER_CHUNK: usize = 16;
    let chunk_rows = TILES_PER_CHUNK * TILE_ROWS;
    let chunks: Vec<std::ops::Range<usize>> =
        (0..n.div_ceil(chunk_rows)).map(|c| c * chunk_rows..((c + 1) * chunk_rows).min(n)).collect();
    let per_chunk: Vec<Vec<Moments>> = chunks
        .par_iter()
        .map(|chunk| {
            let mut out: Vec<Moments> = (0..cells).map(|_| Moments::empty(d, diagonal)).collect();
            let mut tile = vec![0.0; TILE_ROWS * d];
            let mut members: Vec<Vec<usize>> = vec![Vec::with_capacity(TILE_ROWS); cells];
            for range in tiles(chunk.len()) {
                let rows = chunk.start + range.start..chunk.start + range.end;
                let len = rows.len();
                encoding.fill_tile(inputs, rows.clone(), &mut tile[..len * d]);
                members.iter_mut().for_each(Vec::clear);
                for (local, r) in rows.clone().enumerate() {
                    if weights[r] > 0.0 {
                        if let Some(cell) = slot(r) {
                            members[cell].push(local);
                        }
                    }
                }
                let local_weights = &weights[rows];
                for (cell, m) in members.iter().enumerate() {
                    if !m.is_empty() {
                        out[cell].merge(&tile_moments(&tile[..len * d], len, d, m, local_weights, diagonal));
                    }
                }
            }
            out
        })
        .collect();
    let mut total: Vec<Moments> = (0..cells).map(|_| Moments::empty(d, diagonal)).collect();
    for chunk in per_chunk {
        for (t, m) in total.iter_mut().zip(&chunk) {
            t.merge(m);
        }
    }
    let mut by_group = Vec::with_capacity(groups);
    let mut cells = total.into_iter();
    for _ in 0..groups {
        by_group.push(cells.by_ref().take(classes).collect());
    }
    by_group
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn merging_equals_one_pass() {
        let values: Vec<[f64; 2]> = (0..37).map(|i| [i as f64 * 0.5 + 1e6, ((i * 7) % 11) as f64]).collect();
        let one = |rows: &[[f64; 2]]| {
            let n = rows.len() as f64;
            let mean = [rows.iter().map(|r| r[0]).sum::<f64>() / n, rows.iter().map(|r| r[1]).sum::<f64>() / n];
            let mut s = [0.0; 4];
            for r in rows {
                for i in 0..2 {
                    for j in 0..2 {
                        s[i * 2 + j] += (r[i] - mean[i]) * (r[j] - mean[j]);
                    }
                }
            }
            Moments { weight: n, rows: rows.len(), mean: mean.to_vec(), scatter: s.to_vec(), diagonal: false }
        };
        let mut merged = one(&values[..10]);
        merged.merge(&one(&values[10..11]));
        merged.merge(&one(&values[11..]));
        let whole = one(&values);
        for (a, b) in merged.scatter.iter().zip(&whole.scatter) {
            approx::assert_relative_eq!(a, b, max_relative = 1e-10);
        }
        for (a, b) in merged.mean.iter().zip(&whole.mean) {
            approx::assert_relative_eq!(a, b, max_relative = 1e-14);
        }
    }
}
