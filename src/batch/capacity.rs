//! Capacities on a stream: the same assignment as [`crate::decide::decide`]
//! over the whole file, found in passes with memory bounded by the
//! capacity, not by the file.
//!
//! `decide` settles the limited actions in the order of the costs file: the
//! rows that want action `a` (and were not kept by an earlier one) are
//! ranked by their saving over their next-best open action, the first N
//! keep it, the rest move on. Each row's fate is a function of its own
//! expected costs, its place in the file and one cut per limited action
//! (the N-th row's saving and place). So each pass over the file finds the
//! next action's cut — keeping only the N best candidates in a heap — and a
//! last pass applies every cut. The place in the file is the line number,
//! which orders the scored rows as their row index does.

use std::cmp::Ordering;
use std::collections::BinaryHeap;

use crate::decide::{Capacity, CostSpec};

/// Where a limited action's kept rows end.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Cut {
    /// Every row that wants it keeps it (no more than the limit want it).
    KeepAll,
    /// The action takes no rows (a limit of 0).
    KeepNone,
    /// Rows keep it whose (saving, line) ranks at or before this one:
    /// larger saving first, then earlier line.
    At {
        /// The last kept row's saving.
        saving: f64,
        /// Its line.
        line: u128,
    },
}

impl Cut {
    fn keeps(self, saving: f64, line: u128) -> bool {
        match self {
            Cut::KeepAll => true,
            Cut::KeepNone => false,
            Cut::At { saving: s, line: l } => rank(saving, line, s, l) != Ordering::Greater,
        }
    }
}

/// The ranking order of `decide`: larger saving first, then earlier line.
fn rank(saving: f64, line: u128, other_saving: f64, other_line: u128) -> Ordering {
    other_saving.total_cmp(&saving).then(line.cmp(&other_line))
}

/// A limited action with its cut, once a pass has found it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Settled {
    /// The action's index.
    pub action: usize,
    /// Its cut.
    pub cut: Cut,
}

/// The limited actions of a costs file, in the order `decide` settles them.
pub fn limited_actions(spec: &CostSpec) -> Vec<(usize, Capacity)> {
    spec.actions.iter().enumerate().filter_map(|(a, action)| action.capacity.map(|c| (a, c))).collect()
}

/// The row limit of a capacity in a run of `rows` rows.
pub fn limit(capacity: Capacity, rows: u64) -> u64 {
    match capacity {
        Capacity::Rows(count) => count,
        Capacity::Share(share) => (share * rows as f64).floor() as u64,
    }
}

/// One row's action under the cuts found so far. When `ranking` names the
/// next limited action and the row reaches its ranking, the row's saving
/// over its next-best open action comes back too.
pub fn choose(costs: &[f64], line: u128, settled: &[Settled], ranking: Option<usize>) -> (usize, Option<f64>) {
    let m = costs.len();
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| costs[a].total_cmp(&costs[b]).then(a.cmp(&b)));
    let mut closed = vec![false; m];
    let saving_over_next = |a: usize, closed: &[bool]| {
        order.iter().copied().find(|&b| b != a && !closed[b]).map_or(f64::INFINITY, |b| costs[b] - costs[a])
    };
    let mut choice = order[0];
    for rule in settled {
        if choice == rule.action {
            let saving = saving_over_next(rule.action, &closed);
            closed[rule.action] = true;
            if rule.cut.keeps(saving, line) {
                return (choice, None);
            }
            choice = order.iter().copied().find(|&b| !closed[b]).unwrap_or(order[0]);
        } else {
            closed[rule.action] = true;
        }
    }
    match ranking {
        Some(a) if a == choice => (choice, Some(saving_over_next(a, &closed))),
        _ => (choice, None),
    }
}

/// A candidate in a heap whose top is the worst kept row.
#[derive(Debug, Clone, Copy)]
struct Candidate {
    saving: f64,
    line: u128,
}

impl PartialEq for Candidate {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == Ordering::Equal
    }
}
impl Eq for Candidate {}
impl PartialOrd for Candidate {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Candidate {
    fn cmp(&self, other: &Self) -> Ordering {
        rank(self.saving, self.line, other.saving, other.line)
    }
}

/// Keeps the best `limit` candidates of one limited action seen so far.
#[derive(Debug)]
pub struct Ranking {
    limit: u64,
    seen: u64,
    heap: BinaryHeap<Candidate>,
}

impl Ranking {
    /// An empty ranking keeping at most `limit` rows.
    pub fn new(limit: u64) -> Self {
        Ranking { limit, seen: 0, heap: BinaryHeap::new() }
    }

    /// Offers one row.
    pub fn offer(&mut self, saving: f64, line: u128) {
        self.seen += 1;
        if self.limit == 0 {
            return;
        }
        self.heap.push(Candidate { saving, line });
        if self.heap.len() as u64 > self.limit {
            self.heap.pop();
        }
    }

    /// The cut once every row has been offered.
    pub fn cut(&self) -> Cut {
        if self.limit == 0 {
            Cut::KeepNone
        } else if self.seen <= self.limit {
            Cut::KeepAll
        } else {
            self.heap.peek().map_or(Cut::KeepNone, |c| Cut::At { saving: c.saving, line: c.line })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Rng;

    /// Streaming cuts give exactly `decide`'s assignment, ties included.
    #[test]
    fn passes_reproduce_decide() {
        let classes = vec!["good".to_string(), "bad".to_string()];
        let text = "[actions.approve]\ngood = 0\nbad = 10\n[actions.refer]\ngood = 2\nbad = 2\ncapacity = 7\n\
                    [actions.hold]\ngood = 3\nbad = 1.5\ncapacity_share = 0.1\n[actions.decline]\ngood = 4\nbad = 0\n";
        let spec = CostSpec::parse("c.toml", text, &classes).unwrap_or_else(|e| panic!("{e}"));
        let mut rng = Rng::new(7);
        // Rounded posteriors make ties in costs and savings common.
        let costs: Vec<Vec<f64>> = (0..400)
            .map(|_| {
                let p = (rng.uniform() * 20.0).round() / 20.0;
                spec.expected_costs(&[1.0 - p, p], &|_| 0.0)
            })
            .collect();
        let whole = crate::decide::decide(&spec, &costs);
        let lines: Vec<u128> = (0..costs.len() as u128).map(|r| 2 + 3 * r).collect();
        let mut settled = Vec::new();
        for (a, capacity) in limited_actions(&spec) {
            let mut ranking = Ranking::new(limit(capacity, costs.len() as u64));
            for (row, &line) in costs.iter().zip(&lines) {
                if let (_, Some(saving)) = choose(row, line, &settled, Some(a)) {
                    ranking.offer(saving, line);
                }
            }
            settled.push(Settled { action: a, cut: ranking.cut() });
        }
        let streamed: Vec<usize> =
            costs.iter().zip(&lines).map(|(row, &line)| choose(row, line, &settled, None).0).collect();
        assert_eq!(streamed, whole.action);
    }
}
