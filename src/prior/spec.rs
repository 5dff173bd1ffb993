//! Prior specifications: `empirical`, `uniform`, or `CLASS=P,...`, and the
//! binary shorthand `--base-rate P`. A resolved prior names every class,
//! each in (0, 1), summing to 1 within 1e-9.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result, Setting};

/// How far from 1 a stated prior may sum (rounding in what users type).
pub const PRIOR_SUM_TOLERANCE: f64 = 1e-9;

/// A prior as the user states it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum PriorSpec {
    /// The (weighted) class shares of the training rows.
    Empirical,
    /// Equal probabilities.
    Uniform,
    /// One probability per class.
    Explicit(Vec<(String, f64)>),
    /// Binary shorthand: the positive class's probability.
    BaseRate(f64),
}

impl std::str::FromStr for PriorSpec {
    type Err = Error;

    fn from_str(text: &str) -> Result<Self> {
        match text.trim() {
            "empirical" => Ok(PriorSpec::Empirical),
            "uniform" => Ok(PriorSpec::Uniform),
            spec => {
                let mut entries = Vec::new();
                for part in spec.split(',') {
                    let Some((class, value)) = part.rsplit_once('=') else {
                        return Err(Error::InvalidPrior(format!(
                            "'{part}' is not CLASS=P; write empirical, uniform, or CLASS=P,CLASS=P,..."
                        )));
                    };
                    let p: f64 = value.trim().parse().map_err(|_| {
                        Error::InvalidPrior(format!("'{}' in '{part}' is not a probability", value.trim()))
                    })?;
                    entries.push((class.trim().to_string(), p));
                }
                Ok(PriorSpec::Explicit(entries))
            }
        }
    }
}

impl PriorSpec {
    /// The prior as one probability per class, in `classes` order.
    /// `class_mix` is the training class mix (for `empirical`);
    /// `positive` the index of the positive class (for a base rate).
    pub fn resolve(&self, classes: &[String], class_mix: &[f64], positive: usize) -> Result<Vec<f64>> {
        let k = classes.len();
        let prior = match self {
            PriorSpec::Empirical => class_mix.to_vec(),
            PriorSpec::Uniform => vec![1.0 / k as f64; k],
            PriorSpec::BaseRate(p) => {
                if k != 2 {
                    return Err(Error::invalid(crate::error::message![
                        "invalid prior: ",
                        Setting::BaseRate,
                        format!(" is for two classes; the target has {k} ({}): use ", classes.join(", ")),
                        Setting::Prior,
                        " CLASS=P,..."
                    ]));
                }
                let mut prior = vec![1.0 - p; 2];
                prior[positive] = *p;
                prior
            }
            PriorSpec::Explicit(entries) => {
                let mut prior = vec![f64::NAN; k];
                for (class, p) in entries {
                    let Some(i) = classes.iter().position(|c| c == class) else {
                        return Err(Error::InvalidPrior(format!(
                            "class '{class}' is not one of the target's classes ({})",
                            classes.join(", ")
                        )));
                    };
                    if !prior[i].is_nan() {
                        return Err(Error::InvalidPrior(format!("class '{class}' is given twice")));
                    }
                    prior[i] = *p;
                }
                if let Some(i) = prior.iter().position(|p| p.is_nan()) {
                    return Err(Error::InvalidPrior(format!(
                        "class '{}' has no probability; name every class ({})",
                        classes[i],
                        classes.join(", ")
                    )));
                }
                prior
            }
        };
        for (class, p) in classes.iter().zip(&prior) {
            if !(*p > 0.0 && *p < 1.0) {
                return Err(Error::InvalidPrior(format!(
                    "the probability of class '{class}' is {p}; each must lie strictly between 0 and 1"
                )));
            }
        }
        let total: f64 = prior.iter().sum();
        if (total - 1.0).abs() > PRIOR_SUM_TOLERANCE {
            return Err(Error::InvalidPrior(format!("the probabilities sum to {total}, not 1")));
        }
        // Exactly 1, so that log-priors are consistent.
        Ok(prior.iter().map(|p| p / total).collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn classes() -> Vec<String> {
        vec!["bad".into(), "good".into()]
    }

    #[test]
    fn parses_and_resolves() {
        let spec: PriorSpec = "good=0.9,bad=0.1".parse().unwrap();
        assert_eq!(spec.resolve(&classes(), &[0.5, 0.5], 0).unwrap(), vec![0.1, 0.9]);
        assert_eq!(
            "uniform".parse::<PriorSpec>().unwrap().resolve(&classes(), &[0.3, 0.7], 0).unwrap(),
            vec![0.5, 0.5]
        );
        assert_eq!(PriorSpec::Empirical.resolve(&classes(), &[0.3, 0.7], 0).unwrap(), vec![0.3, 0.7]);
        let r = PriorSpec::BaseRate(0.03).resolve(&classes(), &[0.3, 0.7], 0).unwrap();
        approx::assert_relative_eq!(r[0], 0.03, max_relative = 1e-15);
    }

    #[test]
    fn rejects_bad_priors() {
        let c = classes();
        for bad in ["good=0.9", "good=0.9,bad=0.2", "good=1,bad=0", "ugly=0.5,good=0.5", "good=x,bad=0.5", "nonsense"] {
            let result = bad.parse::<PriorSpec>().and_then(|s| s.resolve(&c, &[0.5, 0.5], 0));
            assert!(matches!(result, Err(Error::InvalidPrior(_))), "{bad}: {result:?}");
        }
    }
}
