//! Small dense Gaussian helpers for the demo generators: a Cholesky factor,
//! correlated draws and the exact log-density, for dimensions of a handful.

use crate::rng::Rng;

/// A multivariate normal N(mean, Σ) held by its lower Cholesky factor.
#[derive(Debug, Clone)]
pub struct Gaussian {
    mean: Vec<f64>,
    /// Lower-triangular L with L·Lᵀ = Σ, row-major.
    factor: Vec<Vec<f64>>,
    log_det: f64,
}

impl Gaussian {
    /// From means, standard deviations and a correlation matrix (full,
    /// symmetric, positive definite). Returns `None` when the covariance is
    /// not positive definite.
    pub fn new(mean: &[f64], std_dev: &[f64], correlation: &[&[f64]]) -> Option<Gaussian> {
        let d = mean.len();
        let covariance: Vec<Vec<f64>> =
            (0..d).map(|i| (0..d).map(|j| correlation[i][j] * std_dev[i] * std_dev[j]).collect()).collect();
        let mut factor = vec![vec![0.0; d]; d];
        for i in 0..d {
            for j in 0..=i {
                let partial: f64 = (0..j).map(|k| factor[i][k] * factor[j][k]).sum();
                if i == j {
                    let pivot = covariance[i][i] - partial;
                    if pivot <= 0.0 {
                        return None;
                    }
                    factor[i][i] = pivot.sqrt();
                } else {
                    factor[i][j] = (covariance[i][j] - partial) / factor[j][j];
                }
            }
        }
        let log_det = 2.0 * (0..d).map(|i| factor[i][i].ln()).sum::<f64>();
        Some(Gaussian { mean: mean.to_vec(), factor, log_det })
    }

    /// One draw: mean + L·z with z standard normal.
    pub fn sample(&self, rng: &mut Rng) -> Vec<f64> {
        let d = self.mean.len();
        let z: Vec<f64> = (0..d).map(|_| rng.normal()).collect();
        (0..d).map(|i| self.mean[i] + (0..=i).map(|k| self.factor[i][k] * z[k]).sum::<f64>()).collect()
    }

    /// log N(x; mean, Σ) = −½(d·ln 2π + ln|Σ| + ‖L⁻¹(x − mean)‖²).
    pub fn log_density(&self, x: &[f64]) -> f64 {
        let d = self.mean.len();
        let mut solved = vec![0.0; d];
        for i in 0..d {
            let partial: f64 = (0..i).map(|k| self.factor[i][k] * solved[k]).sum();
            solved[i] = (x[i] - self.mean[i] - partial) / self.factor[i][i];
        }
        let quadratic: f64 = solved.iter().map(|v| v * v).sum();
        -0.5 * (d as f64 * (std::f64::consts::TAU).ln() + self.log_det + quadratic)
    }
}

/// log of the density of Student's t with `nu` degrees of freedom,
/// location `m` and scale `s`, for `nu` = 3 where the Gamma functions are
/// closed forms: Γ(2) = 1, Γ(3/2) = √π/2.
pub fn log_student_t3(x: f64, m: f64, s: f64) -> f64 {
    let nu: f64 = 3.0;
    let log_gamma_ratio = 0.0 - (std::f64::consts::PI.sqrt() / 2.0).ln();
    let u = (x - m) / s;
    log_gamma_ratio - 0.5 * (nu * std::f64::consts::PI).ln() - s.ln() - (nu + 1.0) / 2.0 * (1.0 + u * u / nu).ln()
}

/// log N(x; m, s²) for one variable.
pub fn log_normal_1d(x: f64, m: f64, s: f64) -> f64 {
    let u = (x - m) / s;
    -0.5 * (std::f64::consts::TAU.ln() + u * u) - s.ln()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn density_matches_the_one_dimensional_formula() {
        let g = Gaussian::new(&[1.0, -2.0], &[2.0, 0.5], &[&[1.0, 0.0], &[0.0, 1.0]]).unwrap();
        let expected = log_normal_1d(0.3, 1.0, 2.0) + log_normal_1d(-1.1, -2.0, 0.5);
        approx::assert_relative_eq!(g.log_density(&[0.3, -1.1]), expected, max_relative = 1e-12);
    }

    #[test]
    fn student_t3_density_value() {
        // t with 3 df at 0: Γ(2)/(Γ(3/2)·√(3π)) = 2/(π√3) = 0.36755259694786...
        approx::assert_relative_eq!(
            log_student_t3(0.0, 0.0, 1.0).exp(),
            2.0 / (std::f64::consts::PI * 3f64.sqrt()),
            max_relative = 1e-12
        );
    }

    #[test]
    fn rejects_an_indefinite_correlation() {
        assert!(Gaussian::new(&[0.0, 0.0], &[1.0, 1.0], &[&[1.0, 1.5], &[1.5, 1.0]]).is_none());
    }
}
