//! Case codes and reading orders of a blinded reader study.

use rand::seq::SliceRandom;
use rand::RngExt;

use super::williams::williams_rows;

/// Letters and digits of case codes (no 0/O, 1/I/L, which readers confuse).
const ALPHABET: &[u8] = b"ABCDEFGHJKMNPQRSTUVWXYZ23456789";

/// Length of a case code after its leading `K`.
const CODE_LEN: usize = 6;

/// `n` distinct random case codes (`K` + 6 characters), from the study seed's own stream.
pub fn case_codes(n: usize, rng_seed: u64) -> Vec<String> {
    let mut rng = crate::rng::stream(rng_seed, 0xB11D);
    let mut codes: Vec<String> = Vec::with_capacity(n);
    while codes.len() < n {
        let code: String = std::iter::once('K')
            .chain((0..CODE_LEN).map(|_| ALPHABET[rng.random_range(0..ALPHABET.len())] as char))
            .collect();
        if !codes.contains(&code) {
            codes.push(code);
        }
    }
    codes
}

/// Reading order of one reader: indices into `cases[subject][condition]`.
///
/// Each subject's conditions are read in the order of one row of a Williams design over the
/// conditions (reader `r`, subject `s`: row `(r + s) mod rows`), so across readers every
/// condition follows every other equally often within a subject; subjects take turns
/// (in an order shuffled per reader), so one subject's cases are `subjects` positions apart.
pub fn reading_order(
    reader: usize,
    subjects: usize,
    conditions: usize,
    rng_seed: u64,
) -> Vec<(usize, usize)> {
    let rows = williams_rows(conditions);
    let mut turn: Vec<usize> = (0..subjects).collect();
    turn.shuffle(&mut crate::rng::stream(rng_seed, 0x0DE5 + reader as u64));
    let mut order = Vec::with_capacity(subjects * conditions);
    for p in 0..conditions {
        for &s in &turn {
            let row = &rows[(reader + s) % rows.len()];
            order.push((s, row[p]));
        }
    }
    order
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::blind::williams::successions;

    #[test]
    fn codes_are_distinct_and_differ_between_seeds() {
        let a = case_codes(200, 1);
        let mut s = a.clone();
        s.sort();
        s.dedup();
        assert_eq!(s.len(), 200);
        let b = case_codes(200, 2);
        assert!(
            a.iter().all(|c| !b.contains(c)),
            "no code shared between two seeds"
        );
        assert_eq!(a, case_codes(200, 1), "deterministic");
    }

    /// Within each subject, across a full set of readers (as many as the design has rows),
    /// every condition follows every other equally often; one subject's cases never sit
    /// next to each other when there are several subjects.
    #[test]
    fn orders_are_balanced_per_subject_and_spaced() {
        for t in [4, 5] {
            let readers = williams_rows(t).len();
            let subjects = 3;
            for s in 0..subjects {
                let seqs: Vec<Vec<usize>> = (0..readers)
                    .map(|r| {
                        reading_order(r, subjects, t, 9)
                            .into_iter()
                            .filter(|&(x, _)| x == s)
                            .map(|(_, c)| c)
                            .collect()
                    })
                    .collect();
                let m = successions(&seqs, t);
                let each = if t % 2 == 0 { 1 } else { 2 };
                for (i, row) in m.iter().enumerate() {
                    for (j, &n) in row.iter().enumerate() {
                        assert_eq!(n, if i == j { 0 } else { each }, "t {t} subject {s}");
                    }
                }
            }
            let o = reading_order(0, subjects, t, 9);
            assert_eq!(o.len(), subjects * t);
            assert!(
                o.windows(2).all(|w| w[0].0 != w[1].0),
                "same subject back to back"
            );
        }
    }
}
