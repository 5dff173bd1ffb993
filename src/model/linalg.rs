//! Dense linear algebra for the families, on nalgebra: Cholesky factors with
//! a diagnosis when they fail, triangular solves, log-determinants, and the
//! symmetric eigen-decomposition used to name collinear columns.

use nalgebra::{DMatrix, DVector};

/// Σ aᵢbᵢ with eight independent partial sums, so the loop pipelines and
/// vectorises (a single running sum is bound by the latency of one
/// addition per element). The order of summation is fixed, so results are
/// reproducible.
#[inline]
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut lanes = [0.0f64; 8];
    let chunks = n / 8;
    for c in 0..chunks {
        let (x, y) = (&a[c * 8..c * 8 + 8], &b[c * 8..c * 8 + 8]);
        for l in 0..8 {
            lanes[l] += x[l] * y[l];
        }
    }
    let mut tail = 0.0;
    for i in chunks * 8..n {
        tail += a[i] * b[i];
    }
    ((lanes[0] + lanes[4]) + (lanes[1] + lanes[5])) + ((lanes[2] + lanes[6]) + (lanes[3] + lanes[7])) + tail
}

/// A Cholesky factor L (lower, L·Lᵀ = Σ) and log|Σ| = 2·Σ log Lᵢᵢ.
#[derive(Debug, Clone)]
pub struct Factor {
    /// The lower-triangular factor.
    pub lower: DMatrix<f64>,
    /// log-determinant of the factored matrix.
    pub log_det: f64,
}

/// Why a covariance could not be factored: the columns involved.
#[derive(Debug, Clone, PartialEq)]
pub struct Singularity {
    /// Indices of the columns with (near-)zero variance or in a (near-)exact
    /// linear relation.
    pub columns: Vec<usize>,
    /// The smallest eigenvalue of the correlation matrix.
    pub smallest_eigenvalue: f64,
}

/// The direction in which a covariance is thinnest, judged on the
/// correlation scale so that units do not matter.
#[derive(Debug, Clone, PartialEq)]
pub struct Weakest {
    /// The smallest eigenvalue of the correlation matrix.
    pub smallest: f64,
    /// The largest.
    pub largest: f64,
    /// The columns whose loading on the smallest eigenvalue's eigenvector
    /// is at least the given share of the largest loading.
    pub columns: Vec<usize>,
}

/// The weakest direction of a symmetric matrix with a positive diagonal
/// (see [`Weakest`]); `share` picks the columns named.
pub fn weakest_direction(matrix: &DMatrix<f64>, share: f64) -> Weakest {
    let d = matrix.nrows();
    let scale: Vec<f64> = (0..d).map(|i| matrix[(i, i)].sqrt()).collect();
    let correlation = DMatrix::from_fn(d, d, |i, j| matrix[(i, j)] / (scale[i] * scale[j]));
    let eigen = nalgebra::SymmetricEigen::new(correlation);
    let (smallest, position) = eigen
        .eigenvalues
        .iter()
        .enumerate()
        .map(|(i, &v)| (v, i))
        .fold((f64::INFINITY, 0), |a, b| if b.0 < a.0 { b } else { a });
    let largest = eigen.eigenvalues.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let vector = eigen.eigenvectors.column(position);
    let loading = vector.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let columns = (0..d).filter(|&i| vector[i].abs() >= share * loading).collect();
    Weakest { smallest, largest, columns }
}

/// Smallest over largest eigenvalue of a class covariance's correlation
/// matrix below which QDA warns that the class is nearly singular along
/// some inputs: a condition number above 100, a condition index above 10,
/// where Belsley, Kuh & Welsch (1980, "Regression Diagnostics", ch. 3;
/// from memory) place the start of dependencies worth a look. Along such a
/// direction a class's density is so narrow that rows a little off it get
/// posteriors near 0 or 1 (rare one-hot levels do this).
pub const NEAR_SINGULAR_RATIO: f64 = 1e-2;

/// Relative size below which a correlation-matrix eigenvalue counts as zero:
/// the condition number of a usable covariance stays below 1e12 (common
/// practice for double precision, leaving about four significant digits).
pub const SINGULAR_EIGENVALUE: f64 = 1e-12;

/// Factors a symmetric positive-definite matrix, or says which columns make
/// it singular (constant columns first; else the columns that carry the
/// eigenvector of the smallest correlation eigenvalue).
pub fn cholesky(matrix: &DMatrix<f64>) -> Result<Factor, Singularity> {
    let d = matrix.nrows();
    if d == 0 {
        return Err(Singularity { columns: Vec::new(), smallest_eigenvalue: 0.0 });
    }
    let constant: Vec<usize> = (0..d).filter(|&i| !(matrix[(i, i)] > 0.0)).collect();
    if !constant.is_empty() {
        return Err(Singularity { columns: constant, smallest_eigenvalue: 0.0 });
    }
    let weakest = weakest_direction(matrix, 0.1);
    let smallest = weakest.smallest;
    if !(smallest > SINGULAR_EIGENVALUE * d as f64) {
        return Err(Singularity { columns: weakest.columns, smallest_eigenvalue: smallest });
    }
    match nalgebra::Cholesky::new(matrix.clone()) {
        Some(c) => {
            let lower = c.l();
            let log_det = 2.0 * (0..d).map(|i| lower[(i, i)].ln()).sum::<f64>();
            Ok(Factor { lower, log_det })
        }
        None => Err(Singularity { columns: (0..d).collect(), smallest_eigenvalue: smallest }),
    }
}

/// Residual variance, as a share of a column's own, below which the column
/// is aliased: a linear combination of the columns before it, up to
/// rounding (an R² above 1 − 1e-9 on them). Exact relations in data held
/// to 15 digits leave about 1e-15; a relation rounded to four significant
/// digits leaves 1e-8 or more and is near-collinear, not aliased.
pub const ALIASED_RESIDUAL: f64 = 1e-9;

/// A column that is a linear combination of earlier columns.
#[derive(Debug, Clone, PartialEq)]
pub struct Aliased {
    /// The aliased column.
    pub column: usize,
    /// The earlier (kept) columns of the combination.
    pub involved: Vec<usize>,
}

/// The aliased columns of a symmetric positive-semidefinite matrix (a
/// cross-product or covariance), by a Cholesky factorisation in column
/// order on the correlation scale that skips each column whose residual
/// falls below [`ALIASED_RESIDUAL`]: the rank-revealing factorisation
/// with the pivot rule "keep the earlier column". A later column is the
/// one dropped, so the choice follows the order the user gave. Columns
/// with no variance are left to the constant-column checks.
pub fn aliased_columns(matrix: &DMatrix<f64>) -> Vec<Aliased> {
    let d = matrix.nrows();
    let scale: Vec<f64> = (0..d).map(|i| matrix[(i, i)].max(0.0).sqrt()).collect();
    let correlation = |i: usize, j: usize| matrix[(i, j)] / (scale[i] * scale[j]);
    // Rows of the factor of the kept columns, in the order kept.
    let mut kept: Vec<usize> = Vec::new();
    let mut rows: Vec<Vec<f64>> = Vec::new();
    let mut aliased = Vec::new();
    for j in 0..d {
        if !(scale[j] > 0.0) {
            continue;
        }
        // y solves L·y = C[kept, j]; the residual is C[j, j] − ‖y‖².
        let mut y = Vec::with_capacity(kept.len());
        for (a, row) in rows.iter().enumerate() {
            let partial: f64 = row[..a].iter().zip(&y).map(|(l, v)| l * v).sum();
            y.push((correlation(kept[a], j) - partial) / row[a]);
        }
        let residual = 1.0 - y.iter().map(|v| v * v).sum::<f64>();
        if residual < ALIASED_RESIDUAL {
            // The combination's coefficients b solve Lᵀ·b = y.
            let mut b = y.clone();
            for a in (0..b.len()).rev() {
                let later: f64 = (a + 1..b.len()).map(|c| rows[c][a] * b[c]).sum();
                b[a] = (b[a] - later) / rows[a][a];
            }
            let largest = b.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            let involved = kept.iter().zip(&b).filter(|(_, v)| v.abs() > 1e-6 * largest).map(|(&c, _)| c).collect();
            aliased.push(Aliased { column: j, involved });
        } else {
            y.push(residual.sqrt());
            rows.push(y);
            kept.push(j);
        }
    }
    aliased
}

impl Factor {
    /// Solves L·z = b in place (forward substitution).
    #[inline]
    pub fn solve_lower_in_place(&self, b: &mut [f64]) {
        let d = b.len();
        for i in 0..d {
            let mut s = b[i];
            for k in 0..i {
                s -= self.lower[(i, k)] * b[k];
            }
            b[i] = s / self.lower[(i, i)];
        }
    }

    /// Σ⁻¹·b, by two triangular solves.
    pub fn solve(&self, b: &DVector<f64>) -> DVector<f64> {
        let z = self.lower.solve_lower_triangular(b).unwrap_or_else(|| b.clone());
        self.lower.transpose().solve_upper_triangular(&z).unwrap_or(z)
    }

    /// Σ⁻¹, for standard errors (a small matrix; never used per row).
    pub fn inverse(&self) -> DMatrix<f64> {
        let d = self.lower.nrows();
        let mut inverse = DMatrix::zeros(d, d);
        for j in 0..d {
            let mut e = DVector::zeros(d);
            e[j] = 1.0;
            inverse.set_column(j, &self.solve(&e));
        }
        inverse
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dot_products() {
        let a: Vec<f64> = (0..37).map(|i| i as f64 * 0.5).collect();
        let b: Vec<f64> = (0..37).map(|i| 1.0 - i as f64 * 0.01).collect();
        let plain: f64 = a.iter().zip(&b).map(|(x, y)| x * y).sum();
        approx::assert_relative_eq!(dot(&a, &b), plain, max_relative = 1e-14);
        assert_eq!(dot(&[], &[]), 0.0);
    }

    #[test]
    fn factors_and_solves() {
        let m = DMatrix::from_row_slice(3, 3, &[4.0, 2.0, 0.6, 2.0, 5.0, 1.0, 0.6, 1.0, 3.0]);
        let f = cholesky(&m).unwrap();
        let b = DVector::from_vec(vec![1.0, -2.0, 0.5]);
        let x = f.solve(&b);
        let back = &m * &x;
        for i in 0..3 {
            approx::assert_relative_eq!(back[i], b[i], max_relative = 1e-12);
        }
        approx::assert_relative_eq!(f.log_det, m.determinant().ln(), max_relative = 1e-12);
    }

    #[test]
    fn finds_aliased_columns_in_order() {
        // Column 2 = column 0 + column 1, column 3 independent, column 4 =
        // 2·column 3: the later column of each relation is the aliased one.
        let x: Vec<[f64; 5]> = (0..20)
            .map(|i| {
                let (a, b, c) = ((i as f64).sin(), (i as f64 * 0.7).cos(), (i as f64 * 1.3).sin() + 0.1 * i as f64);
                [a, b, a + b, c, 2.0 * c]
            })
            .collect();
        let cross = DMatrix::from_fn(5, 5, |i, j| x.iter().map(|r| r[i] * r[j]).sum::<f64>());
        let found = aliased_columns(&cross);
        assert_eq!(found, vec![Aliased { column: 2, involved: vec![0, 1] }, Aliased { column: 4, involved: vec![3] }]);
        // A full-rank matrix has none.
        let m = DMatrix::from_row_slice(3, 3, &[4.0, 2.0, 0.6, 2.0, 5.0, 1.0, 0.6, 1.0, 3.0]);
        assert!(aliased_columns(&m).is_empty());
    }

    #[test]
    fn names_constant_and_collinear_columns() {
        let constant = DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, 0.0]);
        assert_eq!(cholesky(&constant).unwrap_err().columns, vec![1]);
        // Column 2 = column 0 + column 1.
        let collinear = DMatrix::from_row_slice(3, 3, &[1.0, 0.2, 1.2, 0.2, 1.0, 1.2, 1.2, 1.2, 2.4]);
        let s = cholesky(&collinear).unwrap_err();
        assert_eq!(s.columns, vec![0, 1, 2]);
    }
}
