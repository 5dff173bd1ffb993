//! Suggesting the column the user probably meant.

/// The name in `candidates` closest to `wanted` by edit distance (ignoring
/// case), when it is close enough to be a plausible typo: at most a third of
/// the longer name's length, and at least 1 edit allowed.
pub fn closest(wanted: &str, candidates: &[String]) -> Option<String> {
    let wanted_lower = wanted.to_lowercase();
    candidates
        .iter()
        .map(|c| (edit_distance(&wanted_lower, &c.to_lowercase()), c))
        .filter(|(d, c)| *d <= (wanted.chars().count().max(c.chars().count()) / 3).max(1))
        .min_by_key(|(d, _)| *d)
        .map(|(_, c)| c.clone())
}

/// Levenshtein distance over characters (insertions, deletions and
/// substitutions each cost 1).
pub fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut previous: Vec<usize> = (0..=b.len()).collect();
    let mut current = vec![0; b.len() + 1];
    for (i, ca) in a.chars().enumerate() {
        current[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let substitution = previous[j] + usize::from(ca != *cb);
            current[j + 1] = substitution.min(previous[j + 1] + 1).min(current[j] + 1);
        }
        std::mem::swap(&mut previous, &mut current);
    }
    previous[b.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn distances() {
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("same", "same"), 0);
    }

    #[test]
    fn suggests_only_plausible_names() {
        let names: Vec<String> = ["income", "debt_to_income", "channel"].iter().map(|s| s.to_string()).collect();
        assert_eq!(closest("incme", &names), Some("income".to_string()));
        assert_eq!(closest("Channel", &names), Some("channel".to_string()));
        assert_eq!(closest("zzzzzz", &names), None);
    }
}
