//! Realised costs of the Bayes-rule decisions on the tested rows, with
//! seeded bootstrap intervals, the theoretical and holdout-best cutoffs,
//! and the cutoff table.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::evaluate::paired::*;

/// What a score's decisions cost on the tested rows, under a loss
/// specification: the realised cost C(action, true class, row) of the
/// Bayes-rule action, per row and in total.
#[derive(Debug, Clone, Serialize)]
pub struct CostFigures {
    /// The result's name.
    pub name: String,
    /// Mean realised cost per tested row.
    pub expected_cost: f64,
    /// Its first-order standard error (per-row SD / √n).
    pub expected_cost_se: f64,
    /// A 95% interval for the cost per row (see `cost_interval_method`).
    pub expected_cost_ci: [f64; 2],
    /// Total realised cost over the tested rows.
    pub total_cost: f64,
    /// The same interval for the total (the per-row interval × the rows' weight).
    pub total_cost_ci: [f64; 2],
    /// How the intervals were found: a seeded bootstrap over rows, or the
    /// normal interval above [`BOOTSTRAP_ROW_LIMIT`] rows.
    pub cost_interval_method: String,
    /// Rows per action.
    pub actions: BTreeMap<String, f64>,
    /// For two actions with fixed costs: the cutoff of the Bayes rule.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub theoretical_cutoff: Option<f64>,
    /// The cutoff that minimised the realised cost on these rows.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub best_cutoff_on_holdout: Option<f64>,
    /// The decisions at a ladder of posterior cutoffs.
    pub cutoff_table: Vec<CutoffRow>,
    /// The action rows below a cutoff take (the one that costs least for a
    /// negative row), when every row agrees on it; the cutoff table's
    /// labels use its name.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub below_cutoff_action: Option<String>,
    /// Per tested row (the order of the score's first repeat): the decision
    /// is not the action that costs least for a negative row. Segment flag
    /// rates use it when costs are given.
    #[serde(skip)]
    pub flagged: Vec<bool>,
}

/// One line of the cutoff table. At cutoff t a row whose posterior of the
/// positive class is below t is approved: it takes the action that costs
/// least when the row is truly negative, the rest take the action that costs
/// least when it is truly positive (each judged with the row's own costs).
/// With two actions and fixed costs this is exactly the cutoff rule.
#[derive(Debug, Clone, Serialize)]
pub struct CutoffRow {
    /// The posterior cutoff t.
    pub cutoff: f64,
    /// Weighted share of tested rows below t.
    pub approval_rate: f64,
    /// Share of positives among the approved rows (none when none approved).
    pub bad_rate_among_approved: Option<f64>,
    /// Realised cost per row of the rule at t.
    pub expected_cost: f64,
}

/// Cutoffs every table shows, beside the theoretical and the best one.
const CUTOFF_LADDER: [f64; 11] = [0.01, 0.02, 0.05, 0.1, 0.15, 0.2, 0.25, 0.3, 0.4, 0.5, 0.7];

/// Cost figures of each score. `values(column, row)` gives a row's value of
/// a cost column; the posteriors are those of the scores (binary: from the
/// log odds). `fold_of[row]` (the first repeat's test fold) makes each fold
/// a separate run for capacity limits.
pub fn cost_figures(
    scores: &[TestedScore],
    options: &EvaluationOptions<'_>,
    spec: &crate::decide::CostSpec,
    values: &dyn Fn(&str, usize) -> f64,
    fold_of: Option<&[u32]>,
) -> Vec<CostFigures> {
    let positive = options.positive;
    scores
        .iter()
        .map(|s| {
            let rows = &s.rows[0];
            // The posterior of the positive class: the rule, the best-cutoff
            // sweep and the cutoff table all use these same numbers, so that
            // scores which round to the same probability stay tied.
            let probabilities: Vec<f64> = s.log_odds[0].iter().map(|&z| 1.0 / (1.0 + (-z).exp())).collect();
            let posterior = |p: f64| {
                let mut row = vec![0.0; 2];
                row[positive] = p;
                row[1 - positive] = 1.0 - p;
                row
            };
            let costs: Vec<Vec<f64>> = rows
                .iter()
                .zip(&probabilities)
                .map(|(&r, &p)| spec.expected_costs(&posterior(p), &|c| values(c, r)))
                .collect();
            // Capacity is a per-run limit: each test fold is one run.
            let decisions = match fold_of {
                Some(folds) => {
                    let group: Vec<u32> = rows.iter().map(|&r| folds[r]).collect();
                    crate::decide::decide_in_groups(spec, &costs, &group)
                }
                None => crate::decide::decide(spec, &costs),
            };
            // C(action, class, row), the cost a decision realises.
            let cost_of = |action: usize, class: usize, r: usize| {
                spec.actions[action].costs[class].for_row(&|col| values(col, r))
            };
            // What an action realises on a row, given the row's true class.
            let realised_of = |action: usize, r: usize| cost_of(action, options.target[r] as usize, r);
            let realised: Vec<f64> = rows.iter().zip(&decisions.action).map(|(&r, &a)| realised_of(a, r)).collect();
            let w: Vec<f64> = rows.iter().map(|&r| options.weights.map_or(1.0, |w| w[r])).collect();
            let total_weight: f64 = w.iter().sum();
            let total: f64 = realised.iter().zip(&w).map(|(c, w)| c * w).sum();
            let mean = total / total_weight;
            let variance = realised.iter().zip(&w).map(|(c, w)| w * (c - mean).powi(2)).sum::<f64>()
                / (total_weight - 1.0).max(1.0);
            let mut actions = BTreeMap::new();
            for (a, action) in spec.actions.iter().enumerate() {
                let count: f64 = decisions.action.iter().zip(&w).filter(|(x, _)| **x == a).map(|(_, w)| w).sum();
                actions.insert(action.name.clone(), count);
            }
            // The cutoff that minimises the realised cost, for the two-action
            // fixed-cost case: sweep the sorted scores.
            let theoretical = spec.cutoff(positive);
            let best = theoretical.as_ref().map(|(name, _)| {
                let a = spec.actions.iter().position(|x| &x.name == name).unwrap_or(0);
                let b = 1 - a;
                let mut order: Vec<usize> = (0..rows.len()).collect();
                order.sort_by(|&i, &j| probabilities[j].total_cmp(&probabilities[i]));
                // Start with every row taking b; flag rows as `a` from the top.
                let mut current: f64 = (0..rows.len()).map(|i| w[i] * realised_of(b, rows[i])).sum();
                // Flagging none is cutoff 1 (no probability reaches above it).
                let (mut best_cost, mut best_p) = (current, 1.0);
                // Tied scores move together: a cutoff cannot split them, so
                // a candidate is judged only after the last row of a tie.
                for (k, &i) in order.iter().enumerate() {
                    current += w[i] * (realised_of(a, rows[i]) - realised_of(b, rows[i]));
                    let p = probabilities[i];
                    let tie_continues = order.get(k + 1).is_some_and(|&j| probabilities[j] == p);
                    if !tie_continues && current < best_cost {
                        best_cost = current;
                        best_p = p;
                    }
                }
                best_p
            });
            let se = (variance / total_weight).sqrt();
            let draws = options.bootstrap_draws(rows.len());
            let (ci, method) = mean_interval(&realised, &w, draws, options.seed, se, mean);
            // The cutoff table: per row, the realised cost of the action for a
            // certain negative and for a certain positive.
            let cheapest_for = |class: usize, r: usize| {
                (0..spec.actions.len())
                    .min_by(|&a, &b| cost_of(a, class, r).total_cmp(&cost_of(b, class, r)))
                    .unwrap_or(0)
            };
            let pass: Vec<usize> = rows.iter().map(|&r| cheapest_for(1 - positive, r)).collect();
            let flagged: Vec<bool> = decisions.action.iter().zip(&pass).map(|(a, p)| a != p).collect();
            let below_cutoff_action = match pass.first() {
                Some(&first) if pass.iter().all(|&p| p == first) => Some(spec.actions[first].name.clone()),
                _ => None,
            };
            let mut cutoffs: Vec<f64> = CUTOFF_LADDER.to_vec();
            cutoffs.extend(theoretical.as_ref().map(|(_, c)| *c));
            cutoffs.extend(best);
            cutoffs.sort_by(f64::total_cmp);
            cutoffs.dedup();
            let cutoff_table = cutoffs
                .into_iter()
                .filter(|t| t.is_finite())
                .map(|t| {
                    let (mut approved, mut approved_bad, mut cost) = (0.0, 0.0, 0.0);
                    for (i, &r) in rows.iter().enumerate() {
                        if probabilities[i] < t {
                            approved += w[i];
                            if options.target[r] as usize == positive {
                                approved_bad += w[i];
                            }
                            cost += w[i] * realised_of(cheapest_for(1 - positive, r), r);
                        } else {
                            cost += w[i] * realised_of(cheapest_for(positive, r), r);
                        }
                    }
                    CutoffRow {
                        cutoff: t,
                        approval_rate: approved / total_weight,
                        bad_rate_among_approved: (approved > 0.0).then(|| approved_bad / approved),
                        expected_cost: cost / total_weight,
                    }
                })
                .collect();
            CostFigures {
                name: s.name.clone(),
                expected_cost: mean,
                expected_cost_se: se,
                expected_cost_ci: ci,
                total_cost: total,
                total_cost_ci: [ci[0] * total_weight, ci[1] * total_weight],
                cost_interval_method: method,
                actions,
                theoretical_cutoff: theoretical.map(|(_, c)| c),
                best_cutoff_on_holdout: best,
                cutoff_table,
                below_cutoff_action,
                flagged,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::evaluate::metrics::ScoreKind;

    /// A cutoff cannot split rows with the same score: one bad row and six
    /// good ones all at p = 0.5 under the German Credit costs (5 for
    /// approving a bad, 1 for declining a good). Declining only the bad row
    /// would cost 0 but no cutoff does that; declining all seven costs 6,
    /// approving all costs 5 — so the best realisable cutoff approves all.
    #[test]
    fn the_best_cutoff_does_not_split_ties() {
        let classes = vec!["bad".to_string(), "good".to_string()];
        let text = "[actions.approve]\ngood = 0\nbad = 5\n[actions.decline]\ngood = 1\nbad = 0\n";
        let spec = crate::decide::CostSpec::parse("c.toml", text, &classes).expect("spec");
        let target = [0, 1, 1, 1, 1, 1, 1];
        let options = EvaluationOptions {
            target: &target,
            positive: 0,
            classes: &classes,
            weights: None,
            amounts: None,
            bootstrap: Some(0),
            seed: 1,
            segments: None,
            split: String::new(),
        };
        let score = TestedScore {
            name: "tied".into(),
            family: None,
            log_odds: vec![vec![0.0; 7]],
            rows: vec![(0..7).collect()],
            kind: ScoreKind::Probability,
            warnings: Vec::new(),
        };
        let figures = cost_figures(&[score], &options, &spec, &|_, _| 0.0, None);
        let f = &figures[0];
        // The Bayes rule at p = 0.5 >= 1/6 declines all seven: cost 6/7 per row.
        approx::assert_relative_eq!(f.expected_cost, 6.0 / 7.0, max_relative = 1e-12);
        assert_eq!(f.best_cutoff_on_holdout, Some(1.0));
        let at_best = f.cutoff_table.iter().find(|r| r.cutoff == 1.0).expect("best in the table");
        approx::assert_relative_eq!(at_best.expected_cost, 5.0 / 7.0, max_relative = 1e-12);
        assert!(f.cutoff_table.iter().all(|r| at_best.expected_cost <= r.expected_cost + 1e-12));
    }
}
