//! "Did you mean": the nearest of a set of ids to one that matched none, for messages about
//! a typed sensor id.

/// The id of `known` nearest to `typed` by edit distance (Levenshtein, case-insensitive),
/// when it is close enough to be a likely typo: a difference of case only, or at most one
/// edit per three characters (at least one). `None` when nothing is that close, or when two
/// ids are equally close.
pub fn nearest_id<'a>(typed: &str, known: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let t: Vec<char> = typed.trim().to_lowercase().chars().collect();
    let allowed = (t.len() / 3).max(1);
    let mut best: Option<(usize, &str)> = None;
    let mut tie = false;
    for k in known {
        let d = distance(&t, &k.to_lowercase().chars().collect::<Vec<_>>());
        match best {
            Some((b, _)) if d > b => {}
            Some((b, _)) if d == b => tie = true,
            _ => {
                best = Some((d, k));
                tie = false;
            }
        }
    }
    match best {
        Some((d, k)) if d <= allowed && !tie => Some(k),
        _ => None,
    }
}

/// ` (did you mean `ID`?)` for a message, or nothing.
pub fn did_you_mean<'a>(typed: &str, known: impl IntoIterator<Item = &'a str>) -> String {
    nearest_id(typed, known).map_or_else(String::new, |k| format!(" (did you mean `{k}`?)"))
}

fn distance(a: &[char], b: &[char]) -> usize {
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.iter().enumerate() {
        let mut cur = vec![i + 1; b.len() + 1];
        for (j, cb) in b.iter().enumerate() {
            cur[j + 1] = (prev[j] + usize::from(ca != cb))
                .min(prev[j + 1] + 1)
                .min(cur[j] + 1);
        }
        prev = cur;
    }
    prev[b.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suggests_the_nearest_id_of_a_likely_typo_only() {
        let ids = ["T1", "T2", "T10", "TC-07", "edge_a"];
        assert_eq!(nearest_id("t10", ids), Some("T10"));
        assert_eq!(nearest_id("TC07", ids), Some("TC-07"));
        assert_eq!(nearest_id("edge_b", ids), Some("edge_a"));
        // T3 is one edit from T1 and from T2: no single suggestion
        assert_eq!(nearest_id("T3", ids), None);
        assert_eq!(nearest_id("pressure", ids), None);
        assert_eq!(did_you_mean("TC07", ids), " (did you mean `TC-07`?)");
        assert_eq!(did_you_mean("xyz", ids), "");
    }
}
