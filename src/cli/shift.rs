//! `baserate shift MODEL NEWDATA [--json FILE]` or
//! `baserate shift NEWDATA --score COL --train-prior P [--reference LABELED.csv --target COL] [--json FILE]`
//!
//! Estimates the class mix (base rate) of an unlabeled new portfolio: EM
//! (Saerens, Latinne & Decaestecker 2002) and, where held-out predictions
//! exist, black-box shift estimation (Lipton, Wang & Smola 2018), each with
//! a seeded bootstrap interval; the mean posterior and classify-and-count
//! for reference; and the likelihood-ratio test of "class mix unchanged".
//! Both rest on calibrated posteriors and on the class-conditional
//! distributions being the same in the new portfolio (label shift).

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::ExitCode;

use serde::Serialize;

use crate::apply::in_memory::read_for_scoring;
use crate::cli::output::write_atomic;
use crate::cli::Failure;
use crate::error::Error;
use crate::evaluate::stats::chi_square_upper;
use crate::format::percent;
use crate::prior::{bbse, bootstrap_interval, em_probabilities, EM_TOLERANCE};
use crate::report::{wrap, CAUTION};
use crate::train::file::ModelFile;

/// Arguments of `shift`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// MODEL NEWDATA, or NEWDATA with --score.
    #[arg(num_args = 1..=2, required = true, value_name = "FILES")]
    pub files: Vec<PathBuf>,
    /// A column of probabilities of the positive class (the scores form).
    #[arg(long, value_name = "COL")]
    pub score: Option<String>,
    /// The positive class's share in the data the score was calibrated on (the scores form).
    #[arg(long, value_name = "P")]
    pub train_prior: Option<f64>,
    /// A labelled file with the same score column, for BBSE in the scores form.
    #[arg(long, value_name = "LABELED.csv")]
    pub reference: Option<PathBuf>,
    /// The label column of --reference.
    #[arg(long, value_name = "COL")]
    pub target: Option<String>,
    /// Columns passed through (ignored here; accepted for symmetry with score).
    #[arg(long = "id", value_name = "COLS", value_delimiter = ',')]
    pub ids: Vec<String>,
    /// Bootstrap draws for the intervals.
    #[arg(long, value_name = "N", default_value_t = 200)]
    pub bootstrap: usize,
    /// Seed of the bootstrap.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Write every figure as JSON to FILE (`-` for stdout).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
}

/// One estimate of the new class mix.
#[derive(Debug, Clone, Serialize)]
pub struct Estimate {
    /// `em`, `bbse`, `mean_posterior` or `classify_and_count`.
    pub method: String,
    /// The estimated prior.
    pub prior: BTreeMap<String, f64>,
    /// Lower end of the 95% interval of the positive class's share.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ci_low: Option<f64>,
    /// Upper end.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ci_high: Option<f64>,
    /// 95% interval of every class's share.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ci: Option<BTreeMap<String, [f64; 2]>>,
    /// EM iterations.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub iterations: Option<usize>,
    /// BBSE: condition number of the held-out confusion.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub condition_number: Option<f64>,
    /// BBSE: whether a negative weight was clipped.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub clipped: Option<bool>,
}

/// The likelihood-ratio test of "class mix unchanged".
#[derive(Debug, Clone, Serialize)]
pub struct UnchangedTest {
    /// 2 × the log-likelihood ratio at the EM estimate.
    pub statistic: f64,
    /// Degrees of freedom (classes − 1).
    pub df: f64,
    /// χ² upper tail.
    pub p_value: f64,
}

/// `shift --json`.
#[derive(Debug, Clone, Serialize)]
pub struct ShiftJson {
    /// The class mix the posteriors are calibrated to (EM's starting point).
    pub training_prior: BTreeMap<String, f64>,
    /// The estimates.
    pub estimates: Vec<Estimate>,
    /// The test.
    pub unchanged_test: UnchangedTest,
    /// Rows of the new portfolio.
    pub rows: usize,
    /// A plain-language summary.
    pub verdict: String,
}

/// Reads a prior from a `shift --json` file: `PATH` (EM) or `PATH:METHOD`.
pub fn prior_from_file(spec: &str, classes: &[String]) -> crate::Result<Vec<f64>> {
    let (path, method) = match spec.rsplit_once(':') {
        Some((p, m)) if ["em", "bbse", "mean_posterior", "classify_and_count"].contains(&m) => (p, m),
        _ => (spec, "em"),
    };
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
    let value: serde_json::Value = serde_json::from_str(&text)
        .map_err(|e| Error::ModelFile { path: path.into(), message: format!("not a shift file: {e}") })?;
    let estimate = value["estimates"]
        .as_array()
        .and_then(|a| a.iter().find(|e| e["method"] == method))
        .ok_or_else(|| Error::ModelFile { path: path.into(), message: format!("has no '{method}' estimate") })?;
    let prior: Option<Vec<f64>> = classes.iter().map(|c| estimate["prior"][c].as_f64()).collect();
    let prior = prior.ok_or_else(|| Error::ModelFile {
        path: path.into(),
        message: format!("its estimate does not name every class ({})", classes.join(", ")),
    })?;
    crate::prior::PriorSpec::Explicit(classes.iter().cloned().zip(prior).collect()).resolve(classes, &[], 0)
}

fn by_class(classes: &[String], values: &[f64]) -> BTreeMap<String, f64> {
    classes.iter().cloned().zip(values.iter().copied()).collect()
}

/// Runs `shift`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    execute(args, true)
}

/// Runs `shift` writing only its JSON (for the demo).
pub fn run_quietly(args: Args) -> Result<ExitCode, Failure> {
    execute(args, false)
}

fn execute(args: Args, talk: bool) -> Result<ExitCode, Failure> {
    // Posteriors of the new rows at the training class mix, and the
    // held-out confusion where there is one.
    let (classes, positive, training, posteriors, confusion) = match (args.files.as_slice(), &args.score) {
        ([model, data], None) => {
            let file = ModelFile::load(model)?;
            let scoring = read_for_scoring(data, &file.schema, &[], b',', None)?;
            let base = file.calibrated_to().to_vec();
            let lp = file.log_posteriors(&scoring.inputs(), &base);
            let positive = file.classes.iter().position(|c| *c == file.positive).unwrap_or(0);
            let confusion = file.held_out.as_ref().map(|h| h.confusion.clone());
            (file.classes.clone(), positive, base, lp.iter().map(|v| v.exp()).collect::<Vec<f64>>(), confusion)
        }
        ([data], Some(column)) => {
            let train_prior = args.train_prior.ok_or_else(|| Error::Usage("--score needs --train-prior".into()))?;
            if !(train_prior > 0.0 && train_prior < 1.0) {
                return Err(Error::Usage("--train-prior must lie strictly between 0 and 1".into()).into());
            }
            let read_scores = |path: &PathBuf, target: Option<&str>| -> crate::Result<(Vec<f64>, Option<Vec<bool>>)> {
                let mut options = crate::data::ReadOptions::new(target.unwrap_or(""));
                options.numeric = vec![column.clone()];
                options.model_columns = Some(vec![column.clone()]);
                let table = crate::data::csv_read::read_path(path, &options)?;
                let index = table.index_of(column).ok_or_else(|| Error::Usage(format!("no column '{column}'")))?;
                let crate::data::csv_read::ColumnValues::NumericFeature { index: j } = table.columns[index].values
                else {
                    return Err(Error::Usage(format!("--score {column} is not numeric")));
                };
                let p: Vec<f64> = table.numeric.column(j).to_vec();
                if let Some(bad) = p.iter().find(|v| !(0.0..=1.0).contains(*v)) {
                    return Err(Error::Usage(format!("--score {column} holds {bad}, not a probability")));
                }
                let labels = target.and_then(|t| table.index_of(t)).and_then(|i| match &table.columns[i].values {
                    crate::data::csv_read::ColumnValues::Categorical { codes, levels, .. } => Some(
                        codes
                            .iter()
                            .map(|&c| levels.get(c as usize).is_some_and(|l| l == "1" || l == "yes" || l == "true"))
                            .collect(),
                    ),
                    _ => None,
                });
                Ok((p, labels))
            };
            let (p, _) = read_scores(data, None)?;
            let confusion = match (&args.reference, &args.target) {
                (Some(reference), Some(target)) => {
                    let (rp, labels) = read_scores(reference, Some(target))?;
                    let labels = labels.ok_or_else(|| {
                        Error::Usage(format!("--target {target} must be a label column of the reference file"))
                    })?;
                    let mut c = vec![vec![0.0; 2]; 2];
                    for (p, y) in rp.iter().zip(&labels) {
                        c[usize::from(*p < 0.5)][usize::from(!*y)] += 1.0 / rp.len() as f64;
                    }
                    Some(c)
                }
                (Some(_), None) => return Err(Error::Usage("--reference needs --target".into()).into()),
                _ => None,
            };
            let posteriors: Vec<f64> =
                p.iter().flat_map(|&p| [p.clamp(1e-15, 1.0 - 1e-15), 1.0 - p.clamp(1e-15, 1.0 - 1e-15)]).collect();
            (vec!["1".to_string(), "0".to_string()], 0, vec![train_prior, 1.0 - train_prior], posteriors, confusion)
        }
        _ => return Err(Error::Usage("give MODEL NEWDATA, or NEWDATA with --score".into()).into()),
    };
    let k = classes.len();
    let n = posteriors.len() / k;
    if n == 0 {
        return Err(Error::Usage("the new portfolio has no rows".into()).into());
    }
    let em = em_probabilities(&posteriors, k, &training, None, EM_TOLERANCE, None);
    let em_ci = bootstrap_interval(n, k, args.bootstrap, args.seed, |rows| {
        Some(em_probabilities(&posteriors, k, &training, Some(rows), 1e-8, Some(&em.prior)).prior)
    });
    let interval =
        |ci: &[[f64; 2]]| -> BTreeMap<String, [f64; 2]> { classes.iter().cloned().zip(ci.iter().copied()).collect() };
    let mut estimates = vec![Estimate {
        method: "em".into(),
        prior: by_class(&classes, &em.prior),
        ci_low: Some(em_ci[positive][0]),
        ci_high: Some(em_ci[positive][1]),
        ci: Some(interval(&em_ci)),
        iterations: Some(em.iterations),
        condition_number: None,
        clipped: None,
    }];
    let predicted_mix = |rows: &[usize]| -> Vec<f64> {
        let mut mix = vec![0.0; k];
        for &r in rows {
            let row = &posteriors[r * k..(r + 1) * k];
            let best = (0..k).max_by(|&a, &b| row[a].total_cmp(&row[b])).unwrap_or(0);
            mix[best] += 1.0 / rows.len() as f64;
        }
        mix
    };
    let all: Vec<usize> = (0..n).collect();
    let mut bbse_note = String::new();
    if let Some(c) = &confusion {
        if let Some(b) = bbse(c, &predicted_mix(&all), &training) {
            let ci = bootstrap_interval(n, k, args.bootstrap, args.seed + 1, |rows| {
                bbse(c, &predicted_mix(rows), &training).map(|e| e.prior)
            });
            if b.condition_number > 50.0 {
                bbse_note = format!(
                    " (BBSE warning: the held-out confusion is ill-conditioned, condition number {:.0})",
                    b.condition_number
                );
            }
            estimates.push(Estimate {
                method: "bbse".into(),
                prior: by_class(&classes, &b.prior),
                ci_low: Some(ci[positive][0]),
                ci_high: Some(ci[positive][1]),
                ci: Some(interval(&ci)),
                iterations: None,
                condition_number: Some(b.condition_number),
                clipped: Some(b.clipped),
            });
        }
    }
    let mean: Vec<f64> = (0..k).map(|c| (0..n).map(|r| posteriors[r * k + c]).sum::<f64>() / n as f64).collect();
    for (method, prior) in [("mean_posterior", mean), ("classify_and_count", predicted_mix(&all))] {
        estimates.push(Estimate {
            method: method.into(),
            prior: by_class(&classes, &prior),
            ci_low: None,
            ci_high: None,
            ci: None,
            iterations: None,
            condition_number: None,
            clipped: None,
        });
    }
    let statistic = 2.0 * em.log_likelihood_ratio.max(0.0);
    let df = (k - 1) as f64;
    let p_value = chi_square_upper(statistic, df);
    let p_text = if p_value < 0.001 { "p < 0.001".to_string() } else { format!("p = {p_value:.3}") };
    let verdict = format!(
        "estimated {} share {} (95% interval {}–{}); training {}; {} ({p_text}){bbse_note}",
        classes[positive],
        percent(em.prior[positive]),
        percent(em_ci[positive][0]),
        percent(em_ci[positive][1]),
        percent(training[positive]),
        if p_value < 0.05 { "the shift is significant" } else { "no significant shift" },
    );
    let json = ShiftJson {
        training_prior: by_class(&classes, &training),
        estimates,
        unchanged_test: UnchangedTest { statistic, df, p_value },
        rows: n,
        verdict: verdict.clone(),
    };
    if let Some(path) = &args.json {
        let text = serde_json::to_string_pretty(&json).map_err(|e| Error::Usage(e.to_string()))?;
        write_atomic(path, format!("{text}\n").as_bytes())?;
        if path.as_os_str() == "-" {
            return Ok(ExitCode::SUCCESS);
        }
    }
    if !talk {
        return Ok(ExitCode::SUCCESS);
    }
    println!(
        "{} new rows; EM took {} iterations (tolerance {EM_TOLERANCE:e}){}",
        n,
        em.iterations,
        if em.converged { "" } else { ", NOT converged" }
    );
    for e in &json.estimates {
        let share = e.prior.get(&classes[positive]).copied().unwrap_or(f64::NAN);
        let ci = match (e.ci_low, e.ci_high) {
            (Some(a), Some(b)) => format!(
                " (95% interval {}–{}, {} bootstrap draws, seed {})",
                percent(a),
                percent(b),
                args.bootstrap,
                args.seed
            ),
            _ => String::new(),
        };
        println!("  {:<20} {}{ci}", e.method, percent(share));
    }
    println!("likelihood-ratio test of an unchanged class mix: {statistic:.2} on {df} df, {p_text}");
    println!("\n{}\n", wrap(&verdict, 100, 0));
    println!("{}", wrap("EM starts from the class mix the posteriors are calibrated to (the model's training class mix, or its fit-time prior for the class-conditional families); both estimates assume the new portfolio differs only in its class mix and that the posteriors are calibrated (fit with --calibrate to make sure).", 100, 0));
    println!("\n{}", wrap(CAUTION, 100, 0));
    Ok(ExitCode::SUCCESS)
}
