//! How the λ path's defaults were chosen: on each benchmark dataset and
//! penalty, the cross-validated choice of λ along a long, fine path (600
//! points over six decades, no early stop) is the reference; each candidate
//! path (a floor and a density, with the stopping rule of
//! `model::penalised::path_settled`) passes when, under both rules of choice,
//! 1. its chosen λ is one the reference cannot tell apart from its own: the
//!    reference's cross-validated deviance at the candidate's λ (read off
//!    the fine path, interpolated in log λ) lies within one standard error
//!    of the reference's deviance at its chosen λ;
//! 2. its own cross-validated deviance at its chosen λ lies within that
//!    standard error of the reference's.
//!
//! The default density is the sparsest that passes, with every denser one
//! tried, at every floor tried, on every dataset, penalty and rule; the
//! default floor is the highest that passes at that density. Datasets: the reference workload
//! (`../shared/bench/gen.py`, 20 correlated features, 5% positives) at
//! 20,000 rows; 2,000 rows × 200 independent features with 10 effects; 400
//! rows × 40 features with 5 effects; and, for the floor when columns
//! outnumber rows, 150 rows × 300 features with 5 effects (all but the first
//! made here with our seeded generator).
//!
//! Run: `cargo bench --bench lambda_defaults`.

mod common;

use baserate::data::{Dataset, ReadOptions};
use baserate::model::logistic::LogisticParams;
use baserate::model::penalised::{LambdaChoice, LambdaRule, Penalty, PenaltyFit};
use baserate::model::{fit, FamilyParams, FittedModel};

fn path_fit(data: &Dataset, penalty: Penalty, rule: LambdaRule, floor: f64, length: usize, full: bool) -> PenaltyFit {
    let params = LogisticParams {
        penalty,
        lambda: LambdaChoice::Auto,
        lambda_rule: rule,
        path_length: Some(length),
        lambda_floor: Some(floor),
        full_path: full,
        ..LogisticParams::default()
    };
    let (model, _) = fit(data, &FamilyParams::Logistic(params)).expect("fit");
    let FittedModel::Logistic(model) = model else { unreachable!("logistic") };
    model.penalty.expect("penalty record")
}

/// The reference's cross-validated deviance at λ, interpolated in log λ.
fn deviance_at(reference: &PenaltyFit, lambda: f64) -> f64 {
    let path = &reference.path;
    let value = |l: usize| path[l].cv_deviance.unwrap_or(f64::INFINITY);
    if lambda >= path[0].lambda {
        return value(0);
    }
    for l in 1..path.len() {
        if lambda >= path[l].lambda {
            let t = (path[l - 1].lambda.ln() - lambda.ln()) / (path[l - 1].lambda.ln() - path[l].lambda.ln());
            return value(l - 1) + t * (value(l) - value(l - 1));
        }
    }
    value(path.len() - 1)
}

fn chosen(record: &PenaltyFit) -> (f64, f64, f64) {
    let l = record.path.iter().position(|p| p.lambda == record.lambda).expect("chosen λ on the path");
    let point = &record.path[l];
    (record.lambda, point.cv_deviance.unwrap_or(f64::NAN), point.cv_se.unwrap_or(f64::NAN))
}

fn main() {
    let workload = common::workload_file(20_000);
    let wide_rows = [
        ("reference workload 20,000 × 20", workload),
        ("2,000 × 200, 10 effects", common::sparse_logistic_file(2_000, 200, 10, -1.0, 7)),
        ("400 × 40, 5 effects", common::sparse_logistic_file(400, 40, 5, -1.0, 11)),
    ];
    let narrow_rows = [("150 × 300, 5 effects", common::sparse_logistic_file(150, 300, 5, -1.0, 13))];
    let penalties = [Penalty::Lasso, Penalty::Ridge, Penalty::ElasticNet];
    let rules = [LambdaRule::SparsestWithinSe, LambdaRule::LowestDeviance];
    let densities = [4usize, 5, 6, 8, 10];
    for (shape, sets, floors, reference_floor) in [
        ("more rows than columns", &wide_rows[..], &[1e-2f64, 3e-3, 1e-3, 3e-4, 1e-4][..], 1e-6f64),
        ("columns outnumber rows", &narrow_rows[..], &[1e-1, 3e-2, 1e-2, 3e-3, 1e-3][..], 1e-4),
    ] {
        println!("== {shape}");
        let mut passing: Vec<(usize, f64, usize)> = Vec::new();
        let mut cases = Vec::new();
        for (name, file) in sets {
            let data = Dataset::read(file, &ReadOptions::new("y")).expect("read").0;
            for &penalty in &penalties {
                for &rule in &rules {
                    let decades = -reference_floor.log10();
                    let reference =
                        path_fit(&data, penalty, rule, reference_floor, (100.0 * decades) as usize + 1, true);
                    let (lambda_r, deviance_r, se_r) = chosen(&reference);
                    println!(
                        "{name}, {:?}, {}: reference λ {lambda_r:.4e} (λ/λ_max {:.2e}), CV deviance {deviance_r:.5} ± {se_r:.5}",
                        penalty,
                        rule.name(),
                        lambda_r / reference.lambda_max
                    );
                    cases.push((name, data.clone(), penalty, rule, reference));
                }
            }
        }
        for &floor in floors {
            for &density in &densities {
                let length = (density as f64 * -floor.log10()).round() as usize + 1;
                let mut failures = Vec::new();
                let mut walked = 0usize;
                for (name, data, penalty, rule, reference) in &cases {
                    let (_, deviance_r, se_r) = chosen(reference);
                    let candidate = path_fit(data, *penalty, *rule, floor, length, false);
                    walked = walked.max(candidate.path.len());
                    let (lambda_c, deviance_c, _) = chosen(&candidate);
                    let indistinct = (deviance_at(reference, lambda_c) - deviance_r).abs() <= se_r;
                    let same_deviance = (deviance_c - deviance_r).abs() <= se_r;
                    if !(indistinct && same_deviance) {
                        failures.push(format!(
                            "{name} {penalty:?} {} (λ/λ_max {:.1e}, deviance {deviance_c:.5})",
                            rule.name(),
                            lambda_c / candidate.lambda_max
                        ));
                    }
                }
                println!(
                    "floor {floor:.0e}, {density}/decade ({length} points, at most {walked} walked): {}",
                    if failures.is_empty() {
                        "passes".to_string()
                    } else {
                        format!("fails on {}", failures.join("; "))
                    }
                );
                if failures.is_empty() {
                    passing.push((length, floor, density));
                }
            }
        }
        // The default density: the sparsest that passes, with every denser
        // one tried, at every floor tried; then the highest floor that
        // passes at it. (The shortest single passing path is printed too:
        // a density that passes by the luck of where its grid falls is not
        // one to rely on.)
        let passes = |density: usize, floor: f64| passing.iter().any(|p| p.2 == density && p.1 == floor);
        let steady = |density: usize| floors.iter().all(|&f| passes(density, f));
        let chosen = (0..densities.len()).find(|&i| densities[i..].iter().all(|&d| steady(d))).map(|i| densities[i]);
        match chosen {
            Some(density) => {
                let floor = floors.iter().copied().filter(|&f| passes(density, f)).fold(0.0f64, f64::max);
                let length = (density as f64 * -floor.log10()).round() as usize + 1;
                println!("default: {density} points per decade, floor {floor:.0e} ({length} points)");
            }
            None => println!("no density passes at every floor"),
        }
        passing.sort_by(|a, b| a.0.cmp(&b.0).then(b.1.total_cmp(&a.1)));
        if let Some((length, floor, density)) = passing.first() {
            println!("shortest single passing path: {length} points, floor {floor:.0e} ({density} per decade)");
        }
    }
}
