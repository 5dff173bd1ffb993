//! Expected-cost decisions: the loss specification, the Bayes decision rule
//! with row-dependent costs, capacity limits, and equivalent cutoffs.
//!
//! The cost table is oriented actions × true classes; costs are positive,
//! benefits negative. For each row the action taken minimises the expected
//! cost Σₖ pₖ·C(action, k, row), with C = fixed + rate × the row's value of
//! a column (Elkan 2001, "The foundations of cost-sensitive learning").
//! Ties go to the action listed first in the costs file.
//!
//! A capacity (`capacity = N` rows, or `capacity_share = S` of the rows)
//! limits how many rows may take an action in one run: the rows that want
//! it are ranked by their expected saving over their next-best action, the
//! largest savings keep it, and the rest take their next-best action.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::error::{Error, Result};

/// One cell of the cost table: fixed + rate × the row's value of `column`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Cost {
    /// The fixed part.
    pub fixed: f64,
    /// The rate applied to the column.
    pub rate: f64,
    /// The column, when the cost depends on the row.
    pub column: Option<String>,
}

impl Cost {
    /// The cost for one row: fixed + rate × the row's value of the column.
    pub fn for_row(&self, values: &dyn Fn(&str) -> f64) -> f64 {
        self.fixed + self.column.as_deref().map_or(0.0, |col| self.rate * values(col))
    }
}

/// A limit on how many rows may take an action.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Capacity {
    /// At most this many rows.
    Rows(u64),
    /// At most this share of the rows.
    Share(f64),
}

/// One action and its cost for each class.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Action {
    /// The action's name.
    pub name: String,
    /// Cost per class, in the order of the classes.
    pub costs: Vec<Cost>,
    /// A capacity limit.
    pub capacity: Option<Capacity>,
}

/// A loss specification.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CostSpec {
    /// The actions in the order of the file.
    pub actions: Vec<Action>,
}

/// The largest fixed cost or rate a costs file may give: far beyond any
/// amount at risk, and small enough that totals over billions of rows stay
/// finite and exact to the cent's order (double precision keeps 15–16
/// digits).
pub const MAX_COST: f64 = 1e15;

fn bad(path: &str, message: String) -> Error {
    Error::SchemaMismatch { path: path.to_string(), message: message.into() }
}

/// An unknown key, named with the closest known one (and the known ones
/// when none is close).
fn unknown_key(path: &str, place: &str, key: &str, known: &[String]) -> Error {
    let hint = match crate::data::suggest::closest(key, known) {
        Some(close) => format!("did you mean '{close}'?"),
        None => format!("the keys here are {}", known.join(", ")),
    };
    bad(path, format!("{place}unknown key '{key}' ({hint})"))
}

impl CostSpec {
    /// Parses the TOML form of the command-line contract for these classes.
    pub fn parse(path: &str, text: &str, classes: &[String]) -> Result<CostSpec> {
        let value: toml::Table =
            text.parse().map_err(|e: toml::de::Error| bad(path, format!("not a valid costs file: {e}")))?;
        // Every key is known: a typo (`[action.decline]`) must not drop an
        // action silently.
        if let Some(key) = value.keys().find(|k| k.as_str() != "actions") {
            return Err(unknown_key(path, "", key, &["actions".to_string()]));
        }
        let actions = value
            .get("actions")
            .and_then(|a| a.as_table())
            .ok_or_else(|| bad(path, "the costs file needs [actions.NAME] tables".into()))?;
        if actions.is_empty() {
            return Err(bad(path, "the costs file names no actions".into()));
        }
        let mut out = Vec::new();
        for (name, table) in actions {
            let table = table.as_table().ok_or_else(|| bad(path, format!("[actions.{name}] must be a table")))?;
            let mut costs: Vec<Option<Cost>> = vec![None; classes.len()];
            let mut capacity = None;
            if table.contains_key("capacity") && table.contains_key("capacity_share") {
                return Err(bad(
                    path,
                    format!("{name}: give capacity (rows) or capacity_share (a share of the rows), not both"),
                ));
            }
            let known: Vec<String> =
                classes.iter().cloned().chain(["capacity".to_string(), "capacity_share".to_string()]).collect();
            for (key, entry) in table {
                match key.as_str() {
                    "capacity" => {
                        let n = entry
                            .as_integer()
                            .ok_or_else(|| bad(path, format!("{name}: capacity must be a whole number")))?;
                        if n < 0 {
                            return Err(bad(path, format!("{name}: capacity must not be negative")));
                        }
                        capacity = Some(Capacity::Rows(n as u64));
                    }
                    "capacity_share" => {
                        let s = entry
                            .as_float()
                            .or_else(|| entry.as_integer().map(|i| i as f64))
                            .ok_or_else(|| bad(path, format!("{name}: capacity_share must be a number")))?;
                        if !(0.0..=1.0).contains(&s) {
                            return Err(bad(path, format!("{name}: capacity_share must lie in [0, 1]")));
                        }
                        capacity = Some(Capacity::Share(s));
                    }
                    class => {
                        let k = classes.iter().position(|c| c == class).ok_or_else(|| {
                            let hint = crate::data::suggest::closest(class, &known)
                                .map(|c| format!("; did you mean '{c}'?"))
                                .unwrap_or_default();
                            bad(
                                path,
                                format!(
                                    "{name}: unknown key '{class}': not a class of the target ({}) nor capacity or capacity_share{hint}",
                                    classes.join(", ")
                                ),
                            )
                        })?;
                        let number = |v: &toml::Value| v.as_float().or_else(|| v.as_integer().map(|i| i as f64));
                        let cost = if let Some(x) = number(entry) {
                            Cost { fixed: x, rate: 0.0, column: None }
                        } else if let Some(t) = entry.as_table() {
                            let parts = ["fixed".to_string(), "rate".to_string(), "column".to_string()];
                            if let Some(k) = t.keys().find(|k| !parts.contains(k)) {
                                return Err(unknown_key(path, &format!("{name}.{class}: "), k, &parts));
                            }
                            let fixed = t
                                .get("fixed")
                                .map_or(Some(0.0), number)
                                .ok_or_else(|| bad(path, format!("{name}.{class}: fixed must be a number")))?;
                            let rate = t
                                .get("rate")
                                .map_or(Some(0.0), number)
                                .ok_or_else(|| bad(path, format!("{name}.{class}: rate must be a number")))?;
                            let column = match t.get("column") {
                                None => None,
                                Some(c) => Some(c.as_str().map(String::from).ok_or_else(|| {
                                    bad(path, format!("{name}.{class}: column must be a column's name, in quotes"))
                                })?),
                            };
                            if rate != 0.0 && column.is_none() {
                                return Err(bad(path, format!("{name}.{class}: a rate needs a column")));
                            }
                            Cost { fixed, rate, column }
                        } else {
                            return Err(bad(
                                path,
                                format!("{name}.{class}: a cost is a number or {{ fixed, rate, column }}"),
                            ));
                        };
                        if !(cost.fixed.is_finite() && cost.rate.is_finite()) {
                            return Err(bad(path, format!("{name}.{class}: costs must be finite")));
                        }
                        if cost.fixed.abs() > MAX_COST || cost.rate.abs() > MAX_COST {
                            return Err(bad(
                                path,
                                format!("{name}.{class}: a cost or rate beyond ±{MAX_COST:e} is not an amount of money; totals over the rows would overflow"),
                            ));
                        }
                        costs[k] = Some(cost);
                    }
                }
            }
            let costs: Vec<Cost> = costs
                .into_iter()
                .enumerate()
                .map(|(k, c)| {
                    c.ok_or_else(|| {
                        bad(
                            path,
                            format!("{name}: no cost for class '{}'; every action must name every class", classes[k]),
                        )
                    })
                })
                .collect::<Result<_>>()?;
            out.push(Action { name: name.clone(), costs, capacity });
        }
        // A row turned away by every capacity would have nowhere to go.
        if !out.is_empty() && out.iter().all(|a| a.capacity.is_some()) {
            return Err(bad(
                path,
                "every action has a capacity; leave at least one without, for the rows the others turn away".into(),
            ));
        }
        Ok(CostSpec { actions: out })
    }

    /// The columns the costs read.
    pub fn columns(&self) -> Vec<String> {
        let mut columns: Vec<String> =
            self.actions.iter().flat_map(|a| a.costs.iter().filter_map(|c| c.column.clone())).collect();
        columns.sort();
        columns.dedup();
        columns
    }

    /// Whether any cost depends on the row.
    pub fn row_dependent(&self) -> bool {
        !self.columns().is_empty()
    }

    /// Expected cost of every action for one row: `values(column)` gives the
    /// row's value of a column.
    pub fn expected_costs(&self, posterior: &[f64], values: &dyn Fn(&str) -> f64) -> Vec<f64> {
        self.actions.iter().map(|a| a.costs.iter().zip(posterior).map(|(c, p)| p * c.for_row(values)).sum()).collect()
    }

    /// The equivalent posterior cutoff for two classes and two actions with
    /// fixed costs: take the action that is cheaper when the truth is
    /// `positive` when p(positive) ≥ p*, with
    /// p* = (A₋ − B₋)/((A₋ − B₋) + (B₊ − A₊)) (Elkan 2001), A that action
    /// and B the other, ₊/₋ the costs under each truth. `None` otherwise.
    pub fn cutoff(&self, positive: usize) -> Option<(String, f64)> {
        // A capacity makes the rule depend on the other rows: no single cutoff.
        if self.actions.len() != 2
            || self.row_dependent()
            || self.actions[0].costs.len() != 2
            || self.actions.iter().any(|a| a.capacity.is_some())
        {
            return None;
        }
        let negative = 1 - positive;
        let (a, b) = if self.actions[0].costs[positive].fixed <= self.actions[1].costs[positive].fixed {
            (&self.actions[0], &self.actions[1])
        } else {
            (&self.actions[1], &self.actions[0])
        };
        let gain_negative = a.costs[negative].fixed - b.costs[negative].fixed;
        let gain_positive = b.costs[positive].fixed - a.costs[positive].fixed;
        let denominator = gain_negative + gain_positive;
        // Outside (0, 1) one action is never worse than the other: no cutoff.
        let cutoff = gain_negative / denominator;
        (denominator > 0.0 && cutoff > 0.0 && cutoff < 1.0).then(|| (a.name.clone(), cutoff))
    }
}

/// The cutoff p* on one scale moved to the scale of another class mix:
/// the cutoff on posteriors calibrated to `from` that is equivalent to p*
/// on posteriors at `to` (odds scale by (π/(1 − π))/(π′/(1 − π′))).
/// A mix at 0 or 1 leaves no odds to move by: p* is returned unchanged.
pub fn cutoff_on_training_scale(cutoff: f64, from_positive: f64, to_positive: f64) -> f64 {
    let inside = |p: f64| p > 0.0 && p < 1.0;
    if !(inside(cutoff) && inside(from_positive) && inside(to_positive)) {
        return cutoff;
    }
    let odds = cutoff / (1.0 - cutoff) * (from_positive / (1.0 - from_positive)) / (to_positive / (1.0 - to_positive));
    odds / (1.0 + odds)
}

/// Decisions for a set of rows: each row's action and expected cost,
/// capacities respected.
#[derive(Debug, Clone, PartialEq)]
pub struct Decisions {
    /// Index of the action taken, per row.
    pub action: Vec<usize>,
    /// Expected cost of the action taken, per row.
    pub expected_cost: Vec<f64>,
}

/// Applies the Bayes decision rule to rows with expected costs
/// `costs[row][action]`, then the capacities (the rows' count is the
/// run's). Capacities are settled in the order of the file: the rows that
/// want a limited action are ranked by their saving over their next-best
/// open action, the largest savings keep it, the rest move on, and the
/// action then takes no more rows.
pub fn decide(spec: &CostSpec, costs: &[Vec<f64>]) -> Decisions {
    let n = costs.len();
    let m = spec.actions.len();
    // Each row's actions, cheapest first; ties to the action listed first.
    let orders: Vec<Vec<usize>> = costs
        .iter()
        .map(|row| {
            let mut order: Vec<usize> = (0..m).collect();
            order.sort_by(|&a, &b| row[a].total_cmp(&row[b]).then(a.cmp(&b)));
            order
        })
        .collect();
    let mut closed = vec![false; m];
    let mut pinned = vec![false; n];
    let first_open =
        |r: usize, closed: &[bool]| orders[r].iter().copied().find(|&a| !closed[a]).unwrap_or(orders[r][0]);
    let mut choice: Vec<usize> = (0..n).map(|r| orders[r][0]).collect();
    for (a, action) in spec.actions.iter().enumerate() {
        let Some(capacity) = action.capacity else { continue };
        let limit = match capacity {
            Capacity::Rows(count) => count as usize,
            Capacity::Share(share) => (share * n as f64).floor() as usize,
        };
        let wanting: Vec<usize> = (0..n).filter(|&r| !pinned[r] && choice[r] == a).collect();
        let mut ranked: Vec<(f64, usize)> = wanting
            .iter()
            .map(|&r| {
                let next = orders[r].iter().copied().find(|&b| b != a && !closed[b]);
                (next.map_or(f64::INFINITY, |b| costs[r][b] - costs[r][a]), r)
            })
            .collect();
        ranked.sort_by(|x, y| y.0.total_cmp(&x.0).then(x.1.cmp(&y.1)));
        closed[a] = true;
        for (position, &(_, r)) in ranked.iter().enumerate() {
            if position < limit {
                pinned[r] = true;
            } else {
                choice[r] = first_open(r, &closed);
            }
        }
    }
    let expected_cost = (0..n).map(|r| costs[r][choice[r]]).collect();
    Decisions { action: choice, expected_cost }
}

/// [`decide`] within each group of rows separately (`group[r]` names row
/// r's group, e.g. its test fold): `capacity_share` applies to each group,
/// and `capacity = N` is scaled to the group's share of the rows (rounded
/// down, so the groups together never exceed N).
pub fn decide_in_groups(spec: &CostSpec, costs: &[Vec<f64>], group: &[u32]) -> Decisions {
    let n = costs.len();
    let mut members: BTreeMap<u32, Vec<usize>> = BTreeMap::new();
    for (r, &g) in group.iter().enumerate().take(n) {
        members.entry(g).or_default().push(r);
    }
    let mut action = vec![0; n];
    let mut expected_cost = vec![0.0; n];
    for rows in members.values() {
        let scaled = CostSpec {
            actions: spec
                .actions
                .iter()
                .map(|a| Action {
                    capacity: a.capacity.map(|c| match c {
                        Capacity::Rows(count) => {
                            Capacity::Rows((count as f64 * rows.len() as f64 / n as f64).floor() as u64)
                        }
                        share => share,
                    }),
                    ..a.clone()
                })
                .collect(),
        };
        let part: Vec<Vec<f64>> = rows.iter().map(|&r| costs[r].clone()).collect();
        let d = decide(&scaled, &part);
        for (k, &r) in rows.iter().enumerate() {
            action[r] = d.action[k];
            expected_cost[r] = d.expected_cost[k];
        }
    }
    Decisions { action, expected_cost }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn classes() -> Vec<String> {
        vec!["bad".into(), "good".into()]
    }

    /// The Statlog German Credit documentation's cost matrix: declining a
    /// good applicant costs 1, approving a bad one 5.
    const GERMAN: &str = "[actions.approve]\ngood = 0\nbad = 5\n[actions.decline]\ngood = 1\nbad = 0\n";

    #[test]
    fn german_credit_cutoff_is_one_sixth() {
        let spec = CostSpec::parse("c.toml", GERMAN, &classes()).unwrap();
        let (action, cutoff) = spec.cutoff(0).unwrap();
        assert_eq!(action, "decline");
        approx::assert_relative_eq!(cutoff, 1.0 / 6.0, max_relative = 1e-12);
        // The base rate moved from 0.3 to 0.1: by Elkan's theorem a prior
        // change multiplies the odds by (π′/(1 − π′))/(π/(1 − π)), so the
        // cutoff of 1/6 (odds 1/5) on the new scale is, on the original
        // posteriors, odds (1/5)·(0.3/0.7)/(0.1/0.9) = (1/5)·(27/7) = 27/35,
        // i.e. p = 27/62.
        approx::assert_relative_eq!(cutoff_on_training_scale(cutoff, 0.3, 0.1), 27.0 / 62.0, max_relative = 1e-12);
        // Decisions agree with the cutoff on both sides of it.
        let costs: Vec<Vec<f64>> =
            [0.16, 1.0 / 6.0 + 1e-9, 0.5].iter().map(|&p| spec.expected_costs(&[p, 1.0 - p], &|_| 0.0)).collect();
        let d = decide(&spec, &costs);
        assert_eq!(d.action, vec![0, 1, 1]);
    }

    #[test]
    fn three_actions_with_a_review_step() {
        // approve: bad 10, good 0; review: 1 either way; decline: good 2, bad 0.
        // At p(bad) = 0.05: approve 0.5, review 1, decline 1.9 -> approve.
        // At p(bad) = 0.3: approve 3, review 1, decline 1.4 -> review.
        // At p(bad) = 0.8: approve 8, review 1, decline 0.4 -> decline. (By hand.)
        let text = "[actions.approve]\nbad = 10\ngood = 0\n[actions.review]\nbad = 1\ngood = 1\n[actions.decline]\nbad = 0\ngood = 2\n";
        let spec = CostSpec::parse("c.toml", text, &classes()).unwrap();
        let costs: Vec<Vec<f64>> =
            [0.05, 0.3, 0.8].iter().map(|&p| spec.expected_costs(&[p, 1.0 - p], &|_| 0.0)).collect();
        let d = decide(&spec, &costs);
        assert_eq!(d.action, vec![0, 1, 2]);
        approx::assert_relative_eq!(d.expected_cost[0], 0.5, max_relative = 1e-12);
        assert!(spec.cutoff(0).is_none(), "three actions have no single cutoff");
    }

    #[test]
    fn row_dependent_costs_and_properties() {
        let text = "[actions.approve]\ngood = 0\nbad = { fixed = 25, rate = 0.6, column = \"amount\" }\n[actions.refer]\ngood = 40\nbad = 40\ncapacity = 2\n[actions.decline]\ngood = { rate = 0.08, column = \"amount\" }\nbad = 0\n";
        let spec = CostSpec::parse("c.toml", text, &classes()).unwrap();
        assert_eq!(spec.columns(), vec!["amount"]);
        let mut rng = crate::rng::Rng::new(9);
        let rows: Vec<(f64, f64)> = (0..200).map(|_| (rng.uniform() * 0.4, 100.0 + 5000.0 * rng.uniform())).collect();
        let costs: Vec<Vec<f64>> =
            rows.iter().map(|&(p, amount)| spec.expected_costs(&[p, 1.0 - p], &|_| amount)).collect();
        let free = decide(
            &CostSpec { actions: spec.actions.iter().map(|a| Action { capacity: None, ..a.clone() }).collect() },
            &costs,
        );
        // Without capacity the chosen action is never dearer than another.
        for (r, row) in costs.iter().enumerate() {
            assert!(row.iter().all(|&c| free.expected_cost[r] <= c + 1e-12));
        }
        // Scaling every cost by a positive constant changes no decision.
        let scaled: Vec<Vec<f64>> = costs.iter().map(|r| r.iter().map(|c| 3.7 * c).collect()).collect();
        assert_eq!(decide(&spec, &scaled).action, decide(&spec, &costs).action);
        // With capacity: at most 2 refer, and no row left out has a larger
        // saving over its next-best action than a row kept.
        let capped = decide(&spec, &costs);
        let referred: Vec<usize> = (0..rows.len()).filter(|&r| capped.action[r] == 1).collect();
        assert!(referred.len() <= 2);
        let saving = |r: usize| {
            let next = (0..3).filter(|&b| b != 1).map(|b| costs[r][b]).fold(f64::INFINITY, f64::min);
            next - costs[r][1]
        };
        let kept_min = referred.iter().map(|&r| saving(r)).fold(f64::INFINITY, f64::min);
        for r in 0..rows.len() {
            if free.action[r] == 1 && capped.action[r] != 1 {
                assert!(saving(r) <= kept_min + 1e-12);
            }
        }
        // In groups (test folds): one group is the whole run; with five
        // groups of 40 rows, `capacity = 2` scales to floor(2 × 40/200) = 0
        // per group, and a share of 0.1 takes at most 4 rows in each.
        assert_eq!(decide_in_groups(&spec, &costs, &vec![0; rows.len()]).action, capped.action);
        let folds: Vec<u32> = (0..rows.len() as u32).map(|r| r % 5).collect();
        assert!(!decide_in_groups(&spec, &costs, &folds).action.contains(&1));
        let shared = CostSpec {
            actions: spec
                .actions
                .iter()
                .map(|a| Action { capacity: a.capacity.map(|_| Capacity::Share(0.1)), ..a.clone() })
                .collect(),
        };
        let grouped = decide_in_groups(&shared, &costs, &folds);
        for g in 0..5 {
            let in_group = (0..rows.len()).filter(|&r| folds[r] == g && grouped.action[r] == 1).count();
            assert!(in_group <= 4, "group {g}: {in_group}");
        }
    }

    #[test]
    fn no_cutoff_where_no_single_cutoff_rules() {
        let c = classes();
        // One action is never worse (declining costs nothing either way).
        let dominated = "[actions.approve]\ngood = 0\nbad = 5\n[actions.decline]\ngood = 0\nbad = 0\n";
        assert!(CostSpec::parse("c.toml", dominated, &c).unwrap().cutoff(0).is_none());
        // A capacity makes the decision depend on the other rows.
        let capped = format!("{GERMAN}capacity = 10\n");
        assert!(CostSpec::parse("c.toml", &capped, &c).unwrap().cutoff(0).is_none());
        // A mix at 0 or 1 leaves the cutoff as it is, never NaN.
        assert_eq!(cutoff_on_training_scale(0.25, 0.0, 0.1), 0.25);
        assert_eq!(cutoff_on_training_scale(1.0, 0.3, 0.1), 1.0);
    }

    #[test]
    fn rejects_bad_cost_files() {
        let c = classes();
        for (text, message) in [
            ("[actions.a]\ngood = 0\n", "no cost for class 'bad'"),
            ("[actions.a]\ngood = 0\nbad = 1\nugly = 2\n", "unknown key 'ugly': not a class"),
            ("[actions.a]\ngood = 0\nbad = 1\ncapacity = -3\n", "must not be negative"),
            ("[actions.a]\ngood = { rate = 2 }\nbad = 1\n", "a rate needs a column"),
            ("nonsense = 1\n", "unknown key 'nonsense'"),
            ("[actions.a]\ngood = 0\nbad = 1\n[other]\n", "unknown key 'other'"),
            ("[actions.a\n", "not a valid costs file"),
            ("[actions.a]\ngood = 0\nbad = 1\ncapacity = 3\n", "every action has a capacity"),
            ("[actions.a]\ngood = -1e308\nbad = 1\n", "a.good: a cost or rate beyond ±1e15"),
        ] {
            let e = CostSpec::parse("c.toml", text, &c).unwrap_err().to_string();
            assert!(e.contains(message) && e.contains("c.toml"), "{text}: {e}");
        }
    }
}
