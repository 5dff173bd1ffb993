//! Penalised logistic regression — ridge, lasso and elastic net — along a
//! path of λ, by cyclic coordinate descent inside an IRLS outer loop, with λ
//! chosen by K-fold cross-validation when asked (Friedman, Hastie &
//! Tibshirani 2010, "Regularization paths for generalized linear models via
//! coordinate descent", J. Stat. Softw. 33(1)).
//!
//! The objective, with N the total weight, vᵢ the row weight times its
//! class weight, and β the slopes on internally standardised design
//! columns (centred, divided by the standard deviation with divisor N):
//!
//!   (1/N)·Σᵢ vᵢ·(−log p(yᵢ | xᵢ)) + λ·(α‖β‖₁ + (1−α)/2·‖β‖²₂),  intercepts unpenalised.
//!
//! With α = 0 this is the objective of the Newton fit's `--newton-ridge`. Classes are
//! compared with the reference class, as in [`crate::model::logistic`]; a
//! multinomial fit cycles over the non-reference classes, each step a
//! penalised weighted least-squares problem in that class's coefficients
//! (a block coordinate descent of the same convex objective).
//!
//! Per λ: the quadratic approximation at the current fit (weights
//! vᵢpᵢ(1−pᵢ)/N, working residuals (yᵢ − pᵢ)/(pᵢ(1−pᵢ))), then coordinate
//! updates βⱼ ← S(gⱼ + cⱼβⱼ, λα)/(cⱼ + λ(1−α)) (S the soft-threshold),
//! cycling over the active set until it settles, then over every column to
//! confirm; the standardisation is applied on the fly to the raw columns,
//! so each fold of a cross-validation standardises by its own rows. λ_max
//! = maxⱼ |(1/N)Σ vᵢ x̃ᵢⱼ(yᵢ − ȳ)|/α is the smallest λ at which every slope
//! is zero; with α below 0.1 (ridge above all, where no λ zeroes a slope)
//! the path starts at that of α = 0.1, ten times the lasso's λ_max, where
//! every standardised slope is already small (our rule: a start at
//! α = 0.001 spends three decades of the path on slopes near zero); the path
//! runs from it down to ε·λ_max on a log scale ([`default_floor`]), and the
//! walk stops early by [`path_settled`].

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::data::split::{assign, SplitPlan};
use crate::data::Dataset;
use crate::error::{Error, Result};
use crate::model::design::Encoding;
use crate::model::linalg::dot;

/// The penalty's form.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Penalty {
    /// No penalty from this solver (the Newton fit, with its `--newton-ridge`).
    #[default]
    None,
    /// α = 0.
    Ridge,
    /// α = 1.
    Lasso,
    /// 0 < α < 1 (`--mixing`, default 0.5).
    ElasticNet,
}

impl Penalty {
    /// The mixing α the penalty implies, or the one given.
    pub fn mixing(self, given: Option<f64>) -> f64 {
        match self {
            Penalty::Ridge => 0.0,
            Penalty::Lasso => 1.0,
            Penalty::ElasticNet => given.unwrap_or(0.5),
            Penalty::None => 0.0,
        }
    }

    /// The name on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Penalty::None => "none",
            Penalty::Ridge => "ridge",
            Penalty::Lasso => "lasso",
            Penalty::ElasticNet => "elastic-net",
        }
    }
}

impl std::str::FromStr for Penalty {
    type Err = String;

    /// `none`, `ridge`, `lasso` or `elastic-net` (`--penalty`).
    fn from_str(text: &str) -> std::result::Result<Self, String> {
        [Penalty::None, Penalty::Ridge, Penalty::Lasso, Penalty::ElasticNet]
            .into_iter()
            .find(|p| p.name() == text)
            .ok_or_else(|| format!("takes none, ridge, lasso or elastic-net, not '{text}'"))
    }
}

impl std::str::FromStr for LambdaChoice {
    type Err = String;

    /// `auto` or a finite number ≥ 0 (`--lambda`).
    fn from_str(text: &str) -> std::result::Result<Self, String> {
        if text == "auto" {
            return Ok(LambdaChoice::Auto);
        }
        text.parse::<f64>()
            .ok()
            .filter(|x| *x >= 0.0 && x.is_finite())
            .map(LambdaChoice::Value)
            .ok_or_else(|| format!("takes a number ≥ 0 or auto, not '{text}'"))
    }
}

impl std::str::FromStr for LambdaRule {
    type Err = String;

    /// `sparsest-within-se` or `lowest-deviance` (`--lambda-rule`).
    fn from_str(text: &str) -> std::result::Result<Self, String> {
        [LambdaRule::SparsestWithinSe, LambdaRule::LowestDeviance]
            .into_iter()
            .find(|r| r.name() == text)
            .ok_or_else(|| format!("takes sparsest-within-se or lowest-deviance, not '{text}'"))
    }
}

/// How λ is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum LambdaChoice {
    /// As given.
    Value(f64),
    /// By K-fold cross-validated deviance.
    #[default]
    Auto,
}

/// Which λ cross-validation picks.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum LambdaRule {
    /// The largest λ whose mean deviance is within one standard error of
    /// the minimum (a sparser, steadier model): the one-standard-error
    /// rule of Breiman, Friedman, Olshen & Stone (1984), "Classification
    /// and Regression Trees", §3.4.3, from memory.
    #[default]
    SparsestWithinSe,
    /// The λ of the smallest mean deviance.
    LowestDeviance,
}

impl LambdaRule {
    /// The name on the command line.
    pub fn name(self) -> &'static str {
        match self {
            LambdaRule::SparsestWithinSe => "sparsest-within-se",
            LambdaRule::LowestDeviance => "lowest-deviance",
        }
    }
}

/// The path settings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PathSettings {
    /// α in [0, 1].
    pub mixing: f64,
    /// λ as given, or chosen.
    pub lambda: LambdaChoice,
    /// Points on the path (`None`: [`default_path_length`]).
    pub path_length: Option<usize>,
    /// The last λ as a share of λ_max (`None`: [`default_floor`]).
    pub floor: Option<f64>,
    /// Stop the walk once the rest of the path cannot change the choice
    /// (the module's stopping rule); `false` walks every point.
    pub stop_early: bool,
    /// Folds for the choice of λ.
    pub folds: usize,
    /// The rule.
    pub rule: LambdaRule,
    /// Seed of the folds.
    pub seed: u64,
    /// Convergence tolerance: the largest coordinate step times its
    /// curvature (a change of the gradient, in its units).
    pub tolerance: f64,
}

/// One point of the path.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PathPoint {
    /// λ.
    pub lambda: f64,
    /// Slopes not zero.
    pub nonzero: usize,
    /// Mean held-out deviance −2·log p(y) per unit weight over the folds.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cv_deviance: Option<f64>,
    /// Its standard error (the spread of the fold means / √K).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cv_se: Option<f64>,
    /// Intercepts on the original scale, non-reference classes in order.
    pub intercepts: Vec<f64>,
    /// Slopes on the original scale, non-reference classes in order
    /// (class-major).
    pub slopes: Vec<f64>,
}

/// What a penalised fit records.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PenaltyFit {
    /// The penalty.
    pub penalty: Penalty,
    /// α.
    pub mixing: f64,
    /// The λ used.
    pub lambda: f64,
    /// The rule that chose it (absent when λ was given).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rule: Option<LambdaRule>,
    /// The λ of the smallest cross-validated deviance.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lambda_lowest_deviance: Option<f64>,
    /// The largest λ within one standard error of it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lambda_sparsest_within_se: Option<f64>,
    /// The path's first λ: the smallest with every slope zero, or with α
    /// below 0.1 (ridge) that of α = 0.1.
    pub lambda_max: f64,
    /// Folds used to choose λ (0 when it was given).
    pub folds: usize,
    /// The standard deviation (divisor N) of each design column: a slope
    /// times it is the slope on the standardised scale the penalty sees.
    #[serde(default)]
    pub scale: Vec<f64>,
    /// The path, largest λ first.
    pub path: Vec<PathPoint>,
}

/// The raw design, column-major, and what one fit needs.
pub(crate) struct Design {
    rows: usize,
    width: usize,
    columns: Vec<f64>,
    /// Class index of each row.
    target: Vec<u32>,
    classes: usize,
    reference: usize,
}

impl Design {
    /// The design of a dataset's inputs.
    pub(crate) fn new(dataset: &Dataset, encoding: &Encoding, reference: usize) -> Design {
        let rows = dataset.rows();
        let width = encoding.width();
        let mut columns = vec![0.0; rows * width];
        let inputs = dataset.inputs();
        let tile_rows = crate::model::design::TILE_ROWS;
        let mut tile = vec![0.0; tile_rows * width];
        for range in crate::model::design::tiles(rows) {
            let len = range.len();
            encoding.fill_tile(&inputs, range.clone(), &mut tile[..len * width]);
            for j in 0..width {
                columns[j * rows + range.start..j * rows + range.end].copy_from_slice(&tile[j * len..(j + 1) * len]);
            }
        }
        Design {
            rows,
            width,
            columns,
            target: dataset.target.clone(),
            classes: dataset.schema.target.classes.len(),
            reference,
        }
    }

    fn column(&self, j: usize) -> &[f64] {
        &self.columns[j * self.rows..(j + 1) * self.rows]
    }

    /// The non-reference classes, in order.
    fn others(&self) -> Vec<usize> {
        (0..self.classes).filter(|&c| c != self.reference).collect()
    }
}

/// A solution on the standardised scale of one fit.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Solution {
    /// Intercepts, one per non-reference class.
    pub(crate) intercepts: Vec<f64>,
    /// Slopes, class-major (q × width).
    pub(crate) slopes: Vec<f64>,
}

/// One fit's weights and standardisation.
pub(crate) struct Scaled<'a> {
    design: &'a Design,
    /// vᵢ/N.
    weights: Vec<f64>,
    centre: Vec<f64>,
    scale: Vec<f64>,
}

impl<'a> Scaled<'a> {
    /// Weights `v` (zero leaves a row out); `None` when some class has no
    /// weight or a column is constant on these rows.
    pub(crate) fn new(design: &'a Design, v: &[f64]) -> std::result::Result<Scaled<'a>, String> {
        let total: f64 = v.iter().sum();
        if !(total > 0.0) {
            return Err("no rows with positive weight".into());
        }
        let mut class_weight = vec![0.0; design.classes];
        for (i, &y) in design.target.iter().enumerate() {
            class_weight[y as usize] += v[i];
        }
        if class_weight.iter().any(|w| !(*w > 0.0)) {
            return Err("every class needs rows with positive weight".into());
        }
        let weights: Vec<f64> = v.iter().map(|w| w / total).collect();
        let mut centre = vec![0.0; design.width];
        let mut scale = vec![0.0; design.width];
        for j in 0..design.width {
            let x = design.column(j);
            let mean: f64 = x.iter().zip(&weights).map(|(x, w)| x * w).sum();
            let variance: f64 = x.iter().zip(&weights).map(|(x, w)| w * (x - mean) * (x - mean)).sum();
            centre[j] = mean;
            scale[j] = variance.sqrt();
            if !(scale[j] > 0.0) {
                return Err(format!("design column {} is constant on the rows of this fit", j + 1));
            }
        }
        Ok(Scaled { design, weights, centre, scale })
    }

    fn q(&self) -> usize {
        self.design.classes - 1
    }

    /// The intercept-only solution: log class-mix ratios.
    fn null_solution(&self) -> Solution {
        let mut mix = vec![0.0; self.design.classes];
        for (i, &y) in self.design.target.iter().enumerate() {
            mix[y as usize] += self.weights[i];
        }
        let reference = self.design.reference;
        let intercepts = self.design.others().iter().map(|&c| (mix[c] / mix[reference]).ln()).collect();
        Solution { intercepts, slopes: vec![0.0; self.q() * self.design.width] }
    }

    /// Linear predictors (q per row, class-major).
    fn linear_predictors(&self, s: &Solution) -> Vec<f64> {
        let (n, d, q) = (self.design.rows, self.design.width, self.q());
        let mut eta = vec![0.0; q * n];
        for c in 0..q {
            let e = &mut eta[c * n..(c + 1) * n];
            let mut offset = s.intercepts[c];
            for j in 0..d {
                let b = s.slopes[c * d + j] / self.scale[j];
                if b != 0.0 {
                    offset -= b * self.centre[j];
                    e.iter_mut().zip(self.design.column(j)).for_each(|(e, x)| *e += b * x);
                }
            }
            e.iter_mut().for_each(|e| *e += offset);
        }
        eta
    }

    /// Probabilities of the non-reference classes (class-major) from the
    /// linear predictors.
    fn probabilities(&self, eta: &[f64]) -> Vec<f64> {
        let (n, q) = (self.design.rows, self.q());
        let mut p = vec![0.0; q * n];
        for i in 0..n {
            let max = (0..q).map(|c| eta[c * n + i]).fold(0.0f64, f64::max);
            let denominator = (-max).exp() + (0..q).map(|c| (eta[c * n + i] - max).exp()).sum::<f64>();
            for c in 0..q {
                p[c * n + i] = (eta[c * n + i] - max).exp() / denominator;
            }
        }
        p
    }

    /// Standardised gradient of the mean log-likelihood for each slope
    /// ((1/N)Σ vᵢ x̃ᵢⱼ(yᵢₖ − pᵢₖ)), class-major, and for each intercept.
    pub(crate) fn gradient(&self, s: &Solution) -> (Vec<f64>, Vec<f64>) {
        let (n, d, q) = (self.design.rows, self.design.width, self.q());
        let p = self.probabilities(&self.linear_predictors(s));
        let others = self.design.others();
        let mut slopes = vec![0.0; q * d];
        let mut intercepts = vec![0.0; q];
        for (c, &class) in others.iter().enumerate() {
            let residual: Vec<f64> = (0..n)
                .map(|i| {
                    self.weights[i] * (f64::from(u8::from(self.design.target[i] as usize == class)) - p[c * n + i])
                })
                .collect();
            let total: f64 = residual.iter().sum();
            intercepts[c] = total;
            for j in 0..d {
                let dot: f64 = self.design.column(j).iter().zip(&residual).map(|(x, r)| x * r).sum();
                slopes[c * d + j] = (dot - self.centre[j] * total) / self.scale[j];
            }
        }
        (slopes, intercepts)
    }

    /// log p(yᵢ | xᵢ) of row i from the linear predictors (class-major, q
    /// per row), by log-sum-exp with the reference class at 0.
    fn log_probability(&self, eta: &[f64], i: usize) -> f64 {
        let (n, q) = (self.design.rows, self.q());
        let max = (0..q).map(|c| eta[c * n + i]).fold(0.0f64, f64::max);
        let log_total = max + ((-max).exp() + (0..q).map(|c| (eta[c * n + i] - max).exp()).sum::<f64>()).ln();
        // The row's class among the non-reference ones (the reference's
        // predictor is 0).
        let y = self.design.target[i] as usize;
        let reference = self.design.reference;
        let own = match y.cmp(&reference) {
            std::cmp::Ordering::Less => eta[y * n + i],
            std::cmp::Ordering::Greater => eta[(y - 1) * n + i],
            std::cmp::Ordering::Equal => 0.0,
        };
        own - log_total
    }

    /// The penalised objective from the linear predictors of `s`.
    fn objective_at(&self, eta: &[f64], s: &Solution, lambda: f64, alpha: f64) -> f64 {
        let loss: f64 = (0..self.design.rows)
            .filter(|&i| self.weights[i] != 0.0)
            .map(|i| -self.weights[i] * self.log_probability(eta, i))
            .sum();
        let l1: f64 = s.slopes.iter().map(|b| b.abs()).sum();
        let l2: f64 = s.slopes.iter().map(|b| b * b).sum();
        loss + lambda * (alpha * l1 + 0.5 * (1.0 - alpha) * l2)
    }

    /// λ_max: the smallest λ at which every slope is zero, or with α below
    /// 0.1 that of α = 0.1 (the module's rule).
    pub(crate) fn lambda_max(&self, alpha: f64) -> f64 {
        let (slopes, _) = self.gradient(&self.null_solution());
        slopes.iter().fold(0.0f64, |m, g| m.max(g.abs())) / alpha.max(0.1)
    }

    /// Minimises the objective at `lambda`, starting from `start`, over the
    /// coefficients marked in `include` (class-major, q × width) and any
    /// that are not zero at the start; then checks the optimality condition
    /// |gⱼ| ≤ λα of every other coefficient on the full gradient, adds the
    /// ones that break it and solves again, until none does. Returns the
    /// solution, whether every solve converged, and the gradient of the mean
    /// log-likelihood there (for the next λ's screening).
    pub(crate) fn solve(
        &self,
        start: &Solution,
        lambda: f64,
        alpha: f64,
        tolerance: f64,
        include: &[bool],
    ) -> (Solution, bool, Vec<f64>) {
        let mut include: Vec<bool> = include.iter().zip(&start.slopes).map(|(&keep, &b)| keep || b != 0.0).collect();
        let mut s = start.clone();
        let mut converged = true;
        loop {
            converged &= self.descend(&mut s, lambda, alpha, tolerance, &include);
            let (gradient, _) = self.gradient(&s);
            let mut added = false;
            for (i, g) in gradient.iter().enumerate() {
                if !include[i] && g.abs() > lambda * alpha {
                    include[i] = true;
                    added = true;
                }
            }
            if !added {
                return (s, converged, gradient);
            }
        }
    }

    /// IRLS with coordinate descent over the included coefficients.
    fn descend(&self, s: &mut Solution, lambda: f64, alpha: f64, tolerance: f64, include: &[bool]) -> bool {
        let (n, d) = (self.design.rows, self.design.width);
        let others = self.design.others();
        let mut eta = self.linear_predictors(s);
        let l1 = lambda * alpha;
        let l2 = lambda * (1.0 - alpha);
        let mut w = vec![0.0; n];
        let mut wr = vec![0.0; n];
        let mut curvature: Vec<Option<(f64, f64)>> = vec![None; d];
        // The inner solves start loose and tighten with the outer steps: an
        // early quadratic approximation is not worth solving exactly.
        let mut inner_tolerance = tolerance.max(1e-4);
        for _outer in 0..1000 {
            let mut largest_change = 0.0f64;
            for (c, &class) in others.iter().enumerate() {
                let included: Vec<usize> = (0..d).filter(|&j| include[c * d + j]).collect();
                let p = self.probabilities(&eta);
                // The quadratic approximation in class c's coefficients.
                let mut total_w = 0.0;
                let mut total_wr = 0.0;
                for i in 0..n {
                    let pi = p[c * n + i];
                    let variance = (pi * (1.0 - pi)).max(1e-5);
                    let y = f64::from(u8::from(self.design.target[i] as usize == class));
                    w[i] = self.weights[i] * variance;
                    // w·r with r = (y − p)/variance: the weighted residual.
                    wr[i] = self.weights[i] * (y - pi);
                    total_w += w[i];
                    total_wr += wr[i];
                }
                curvature.iter_mut().for_each(|v| *v = None);
                // Where the block starts, to step back to if the Newton step
                // on it overshoots (near separation it can).
                let before = (s.slopes[c * d..(c + 1) * d].to_vec(), s.intercepts[c], eta[c * n..(c + 1) * n].to_vec());
                let objective_before = self.objective_at(&eta, s, lambda, alpha);
                let eta_c = &mut eta[c * n..(c + 1) * n];
                let slopes = &mut s.slopes[c * d..(c + 1) * d];
                let update = |j: usize,
                              slopes: &mut [f64],
                              eta_c: &mut [f64],
                              wr: &mut [f64],
                              total_wr: &mut f64,
                              curvature: &mut Vec<Option<(f64, f64)>>|
                 -> f64 {
                    let x = self.design.column(j);
                    let (m, sd) = (self.centre[j], self.scale[j]);
                    // (curvature, Σ wᵢxᵢ) of the column under this
                    // approximation's weights, once per approximation.
                    let (cj, sw) = *curvature[j].get_or_insert_with(|| {
                        let sw = dot(x, &w[..]);
                        let wx: Vec<f64> = x.iter().zip(w.iter()).map(|(a, b)| a * b).collect();
                        let sxx = dot(&wx, x);
                        ((sxx - 2.0 * m * sw + m * m * total_w) / (sd * sd), sw)
                    });
                    let g = (dot(x, wr) - m * *total_wr) / sd;
                    let u = g + cj * slopes[j];
                    let new = soft_threshold(u, l1) / (cj + l2);
                    let delta = new - slopes[j];
                    if delta != 0.0 {
                        slopes[j] = new;
                        let (b, shift) = (delta / sd, -delta * m / sd);
                        // No running sum in the loop, so it vectorises: the
                        // change of Σ w·r is known from Σ wᵢxᵢ.
                        for ((e, r), (&xi, &wi)) in eta_c.iter_mut().zip(wr.iter_mut()).zip(x.iter().zip(w.iter())) {
                            let step = b * xi + shift;
                            *e += step;
                            *r -= wi * step;
                        }
                        *total_wr -= b * sw + shift * total_w;
                    }
                    cj * delta.abs()
                };
                // Cycles over the included set, and over its non-zero part
                // in between, until a cycle over the included set is still.
                for _cycle in 0..100 {
                    let mut cycle_change = 0.0f64;
                    for &j in &included {
                        cycle_change =
                            cycle_change.max(update(j, slopes, eta_c, &mut wr, &mut total_wr, &mut curvature));
                    }
                    intercept_step(&mut s.intercepts[c], eta_c, &w, &mut wr, &mut total_wr, total_w);
                    largest_change = largest_change.max(cycle_change);
                    if cycle_change < inner_tolerance {
                        break;
                    }
                    for _ in 0..1000 {
                        let active: Vec<usize> = included.iter().copied().filter(|&j| slopes[j] != 0.0).collect();
                        let mut change = 0.0f64;
                        for &j in &active {
                            change = change.max(update(j, slopes, eta_c, &mut wr, &mut total_wr, &mut curvature));
                        }
                        intercept_step(&mut s.intercepts[c], eta_c, &w, &mut wr, &mut total_wr, total_w);
                        if change < inner_tolerance {
                            break;
                        }
                    }
                }
                // Step-halving on the block while the objective rose.
                let (old_slopes, old_intercept, old_eta) = before;
                let new_slopes = s.slopes[c * d..(c + 1) * d].to_vec();
                let new_intercept = s.intercepts[c];
                let new_eta = eta[c * n..(c + 1) * n].to_vec();
                let mut t = 1.0;
                for _ in 0..30 {
                    if self.objective_at(&eta, s, lambda, alpha) <= objective_before + 1e-15 * objective_before.abs() {
                        break;
                    }
                    t *= 0.5;
                    for j in 0..d {
                        s.slopes[c * d + j] = old_slopes[j] + t * (new_slopes[j] - old_slopes[j]);
                    }
                    s.intercepts[c] = old_intercept + t * (new_intercept - old_intercept);
                    for i in 0..n {
                        eta[c * n + i] = old_eta[i] + t * (new_eta[i] - old_eta[i]);
                    }
                }
            }
            if largest_change < tolerance {
                return true;
            }
            inner_tolerance = tolerance.max(0.01 * largest_change).min(inner_tolerance);
        }
        false
    }

    /// Original-scale coefficients: (intercepts, slopes class-major).
    pub(crate) fn original(&self, s: &Solution) -> (Vec<f64>, Vec<f64>) {
        let (d, q) = (self.design.width, self.q());
        let mut intercepts = s.intercepts.clone();
        let mut slopes = vec![0.0; q * d];
        for c in 0..q {
            for j in 0..d {
                let b = s.slopes[c * d + j] / self.scale[j];
                slopes[c * d + j] = b;
                intercepts[c] -= b * self.centre[j];
            }
        }
        (intercepts, slopes)
    }

    /// Mean deviance −2·log p(y) per unit weight of the rows with `weights`
    /// (the held-out rows, or all of them) at `s`.
    fn deviance(&self, s: &Solution, weights: &[f64]) -> f64 {
        let eta = self.linear_predictors(s);
        let (mut total, mut weight) = (0.0, 0.0);
        for (i, &w) in weights.iter().enumerate().filter(|(_, &w)| w != 0.0) {
            total += -2.0 * w * self.log_probability(&eta, i);
            weight += w;
        }
        total / weight
    }
}

fn soft_threshold(u: f64, threshold: f64) -> f64 {
    if u > threshold {
        u - threshold
    } else if u < -threshold {
        u + threshold
    } else {
        0.0
    }
}

/// The unpenalised intercept's exact step: the weighted residuals sum to 0.
fn intercept_step(intercept: &mut f64, eta_c: &mut [f64], w: &[f64], wr: &mut [f64], total_wr: &mut f64, total_w: f64) {
    let delta = *total_wr / total_w;
    if delta != 0.0 {
        *intercept += delta;
        eta_c.iter_mut().for_each(|e| *e += delta);
        wr.iter_mut().zip(w).for_each(|(r, w)| *r -= w * delta);
        *total_wr = 0.0;
    }
}

/// Points to a decade of λ by default. With [`default_floor`], chosen on
/// the benchmark datasets by `benches/lambda_defaults.rs`: the sparsest
/// density at which it and every denser one tried keep the chosen λ and
/// its cross-validated deviance within one standard error of a 600-point
/// path's, on every dataset, penalty and rule, at every floor tried.
pub const DEFAULT_POINTS_PER_DECADE: usize = 10;

/// The default length of a path down to `floor`·λ_max: ten points to a
/// decade, and λ_max itself.
pub fn default_path_length(floor: f64) -> usize {
    (DEFAULT_POINTS_PER_DECADE as f64 * -floor.log10()).round().max(1.0) as usize + 1
}

/// The path's default last λ as a share of λ_max: 1e-2 with more rows
/// than design columns, 1e-1 otherwise; the highest floors that passed
/// the test of [`DEFAULT_POINTS_PER_DECADE`] on the benchmark datasets.
pub fn default_floor(rows: usize, width: usize) -> f64 {
    if rows > width {
        1e-2
    } else {
        1e-1
    }
}

/// Our stopping rule, in decades of λ so that it means the same at any
/// density of the path. Given the path so far (λ, training deviance, and
/// the cross-validated deviance with its standard error), the walk stops
/// once a whole decade of λ has passed (the current λ at most a tenth of
/// an earlier one) and either
/// - every point of that last decade lies above the lowest cross-validated
///   deviance plus its standard error: neither rule's choice can move back
///   unless the held-out deviance turns down again after a decade of rising;
/// - or the training deviance fell by less than 1e-4 of the null deviance
///   over that decade: the fits have stopped changing, so the held-out
///   deviance has too.
pub(crate) fn path_settled(lambdas: &[f64], training: &[f64], cv: &[(f64, f64)]) -> bool {
    let (Some(&current), Some(&null)) = (lambdas.last(), training.first()) else { return false };
    let last = lambdas.len() - 1;
    // The latest point at least a decade above the current λ.
    let Some(decade_start) = (0..last).rev().find(|&l| lambdas[l] >= 10.0 * current) else { return false };
    let flat = training[decade_start] - training[last] < 1e-4 * null;
    let rising = !cv.is_empty() && {
        let best = (0..cv.len()).min_by(|&a, &b| cv[a].0.total_cmp(&cv[b].0)).unwrap_or(0);
        let bound = cv[best].0 + cv[best].1;
        best < decade_start && cv[decade_start..=last].iter().all(|c| c.0 > bound)
    };
    flat || rising
}

/// The λ path: `length` values from `lambda_max` down to `ratio`·λ_max on
/// a log scale.
pub(crate) fn lambda_path(lambda_max: f64, ratio: f64, length: usize) -> Vec<f64> {
    let length = length.max(1);
    if length == 1 {
        return vec![lambda_max];
    }
    (0..length).map(|i| lambda_max * ratio.powf(i as f64 / (length - 1) as f64)).collect()
}

/// A walk down the λ path with warm starts. At each λ the coefficients
/// first tried are the sequential strong set (Tibshirani et al. 2012,
/// "Strong rules for discarding predictors in lasso-type problems", JRSS B
/// 74(2)): those with |gⱼ(λ_prev)| ≥ α(2λ − λ_prev), plus the non-zero
/// ones; [`Scaled::solve`] then checks every other coefficient, so the
/// screening changes the work, never the answer.
struct Walker<'s, 'd> {
    scaled: &'s Scaled<'d>,
    current: Solution,
    gradient: Vec<f64>,
    previous: Option<f64>,
    converged: bool,
}

impl<'s, 'd> Walker<'s, 'd> {
    fn new(scaled: &'s Scaled<'d>) -> Self {
        let current = scaled.null_solution();
        let (gradient, _) = scaled.gradient(&current);
        Walker { scaled, current, gradient, previous: None, converged: true }
    }

    fn step(&mut self, lambda: f64, alpha: f64, tolerance: f64) -> &Solution {
        let threshold = alpha * (2.0 * lambda - self.previous.unwrap_or(lambda));
        let strong: Vec<bool> = self.gradient.iter().map(|g| g.abs() >= threshold).collect();
        let (next, converged, gradient) = self.scaled.solve(&self.current, lambda, alpha, tolerance, &strong);
        self.converged &= converged;
        self.current = next;
        self.gradient = gradient;
        self.previous = Some(lambda);
        &self.current
    }
}

/// What [`fit`] returns: the chosen coefficients on the original scale,
/// the record of the path, and whether every solve converged.
pub struct PenalisedFit {
    /// Intercepts of the non-reference classes.
    pub intercepts: Vec<f64>,
    /// Slopes, class-major.
    pub slopes: Vec<f64>,
    /// The record.
    pub record: PenaltyFit,
    /// Every solve converged.
    pub converged: bool,
    /// The weighted log-likelihood of the training rows at the chosen fit.
    pub log_likelihood: f64,
}

/// Fits the penalised model with row weights `v` (row weight × class weight).
pub fn fit(
    dataset: &Dataset,
    encoding: &Encoding,
    reference: usize,
    v: &[f64],
    penalty: Penalty,
    settings: &PathSettings,
    progress: &crate::progress::Progress,
) -> Result<PenalisedFit> {
    let failed = |message: String| Error::FitFailed { family: "logistic".into(), message: message.into() };
    let design = Design::new(dataset, encoding, reference);
    let scaled = Scaled::new(&design, v).map_err(failed)?;
    let alpha = settings.mixing;
    let lambda_max = scaled.lambda_max(alpha);
    let ratio = settings.floor.unwrap_or_else(|| default_floor(design.rows, design.width));
    let lambdas = match settings.lambda {
        LambdaChoice::Value(lambda) if lambda >= lambda_max => vec![lambda],
        LambdaChoice::Value(lambda) => {
            let mut path = lambda_path(
                lambda_max,
                lambda / lambda_max,
                settings.path_length.unwrap_or(DEFAULT_POINTS_PER_DECADE + 1).max(2),
            );
            if let Some(last) = path.last_mut() {
                *last = lambda;
            }
            path
        }
        LambdaChoice::Auto => {
            lambda_path(lambda_max, ratio, settings.path_length.unwrap_or_else(|| default_path_length(ratio)))
        }
    };
    // Per λ: the fit on every row and, with `auto`, the fits of the folds,
    // walked down the path together so the walk can stop early by the
    // module's stopping rule ([`path_settled`]).
    let mut folds_used = 0;
    let mut fold_tasks: Vec<(Scaled<'_>, Vec<f64>)> = Vec::new();
    if settings.lambda == LambdaChoice::Auto {
        let folds = settings.folds.max(2);
        folds_used = folds;
        // Folds over the rows this fit uses: rows of weight 0 (another
        // fold's test rows, when this is itself a fold's fit) take no part.
        let used: Vec<usize> = (0..design.rows).filter(|&i| v[i] > 0.0).collect();
        let used_target: Vec<u32> = used.iter().map(|&i| design.target[i]).collect();
        let inner = assign(&SplitPlan::KFold { folds, repeats: 1 }, &used_target, design.classes, settings.seed)?;
        let mut fold_of = vec![crate::data::split::LEFT_OUT; design.rows];
        for (position, &i) in used.iter().enumerate() {
            fold_of[i] = inner.folds[0][position];
        }
        for fold in 0..folds as u32 {
            let train: Vec<f64> = (0..design.rows)
                .map(|i| if fold_of[i] != fold && fold_of[i] != crate::data::split::LEFT_OUT { v[i] } else { 0.0 })
                .collect();
            let test: Vec<f64> = (0..design.rows).map(|i| if fold_of[i] == fold { v[i] } else { 0.0 }).collect();
            let fold_scaled = Scaled::new(&design, &train)
                .map_err(|m| failed(format!("a cross-validation fold could not be fitted: {m}")))?;
            fold_tasks.push((fold_scaled, test));
        }
    }
    let mut walkers: Vec<Walker<'_, '_>> =
        std::iter::once(Walker::new(&scaled)).chain(fold_tasks.iter().map(|(s, _)| Walker::new(s))).collect();
    let everything: Vec<f64> = scaled.weights.clone();
    let mut solutions: Vec<Solution> = Vec::new();
    let mut cv: Vec<(f64, f64)> = Vec::new();
    let mut training: Vec<f64> = Vec::new();
    let points = progress.counter(
        if fold_tasks.is_empty() { "λ path" } else { "λ path, with the cross-validation folds" },
        Some(lambdas.len() as u64),
    );
    for &lambda in &lambdas {
        let steps: Vec<(Solution, f64)> = walkers
            .par_iter_mut()
            .enumerate()
            .map(|(t, walker)| {
                let solution = walker.step(lambda, alpha, settings.tolerance).clone();
                let deviance = match t {
                    0 => scaled.deviance(&solution, &everything),
                    f => {
                        let (fold_scaled, test) = &fold_tasks[f - 1];
                        fold_scaled.deviance(&solution, test)
                    }
                };
                (solution, deviance)
            })
            .collect();
        points.step();
        let mut steps = steps.into_iter();
        let Some((solution, training_deviance)) = steps.next() else { break };
        solutions.push(solution);
        if !fold_tasks.is_empty() {
            let values: Vec<f64> = steps.map(|(_, d)| d).collect();
            let k = values.len() as f64;
            let mean = values.iter().sum::<f64>() / k;
            let variance = values.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (k - 1.0);
            cv.push((mean, (variance / k).sqrt()));
        }
        if fold_tasks.is_empty() {
            continue;
        }
        training.push(training_deviance);
        if settings.stop_early && path_settled(&lambdas[..training.len()], &training, &cv) {
            break;
        }
    }
    let converged = walkers.iter().all(|w| w.converged);
    let lambdas: Vec<f64> = lambdas[..solutions.len()].to_vec();
    let originals: Vec<(Vec<f64>, Vec<f64>)> = solutions.iter().map(|s| scaled.original(s)).collect();
    let path: Vec<PathPoint> = lambdas
        .iter()
        .zip(&originals)
        .enumerate()
        .map(|(l, (&lambda, (intercepts, slopes)))| PathPoint {
            lambda,
            nonzero: slopes.iter().filter(|b| **b != 0.0).count(),
            cv_deviance: cv.get(l).map(|c| c.0),
            cv_se: cv.get(l).map(|c| c.1),
            intercepts: intercepts.clone(),
            slopes: slopes.clone(),
        })
        .collect();
    let (chosen, rule, lambda_lowest_deviance, lambda_sparsest_within_se, folds) = match settings.lambda {
        LambdaChoice::Value(_) => (lambdas.len() - 1, None, None, None, 0),
        LambdaChoice::Auto => {
            let mean = |l: usize| path[l].cv_deviance.unwrap_or(f64::INFINITY);
            let best = (0..path.len()).min_by(|&a, &b| mean(a).total_cmp(&mean(b))).unwrap_or(0);
            let bound = mean(best) + path[best].cv_se.unwrap_or(0.0);
            // Largest λ (earliest on the path) within one SE of the minimum.
            let one_se = (0..=best).find(|&l| mean(l) <= bound).unwrap_or(best);
            let chosen = if settings.rule == LambdaRule::LowestDeviance { best } else { one_se };
            (chosen, Some(settings.rule), Some(lambdas[best]), Some(lambdas[one_se]), folds_used)
        }
    };
    let (intercepts, slopes) = originals[chosen].clone();
    let all: Vec<f64> = v.to_vec();
    let log_likelihood = -0.5 * scaled.deviance(&solutions[chosen], &all) * v.iter().sum::<f64>();
    Ok(PenalisedFit {
        log_likelihood,
        intercepts,
        slopes,
        record: PenaltyFit {
            penalty,
            mixing: alpha,
            lambda: lambdas[chosen],
            rule,
            lambda_lowest_deviance,
            lambda_sparsest_within_se,
            lambda_max,
            folds,
            scale: scaled.scale.clone(),
            path,
        },
        converged,
    })
}
