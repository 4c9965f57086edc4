//! Williams designs (Williams EJ. Aust J Sci Res A 1949;2:149–168): orders of `t` conditions,
//! one per reader, in which every condition follows every other condition equally often
//! across the rows (first-order carry-over balance). For even `t` one Latin square of `t`
//! rows does it; for odd `t`, that square and its mirror image (`2t` rows).

/// The rows of a Williams design for `t` conditions (`t` rows for even `t`, `2t` for odd),
/// each a permutation of `0..t`.
pub fn williams_rows(t: usize) -> Vec<Vec<usize>> {
    if t == 0 {
        return Vec::new();
    }
    // First row 0, 1, t−1, 2, t−2, … (the standard construction); row i adds i mod t.
    let mut first = Vec::with_capacity(t);
    first.push(0);
    let (mut lo, mut hi) = (1usize, t);
    for k in 1..t {
        if k % 2 == 1 {
            first.push(lo);
            lo += 1;
        } else {
            hi -= 1;
            first.push(hi);
        }
    }
    let mut rows: Vec<Vec<usize>> = (0..t)
        .map(|i| first.iter().map(|&c| (c + i) % t).collect())
        .collect();
    if t % 2 == 1 {
        let mirrored: Vec<Vec<usize>> = rows
            .iter()
            .map(|r| r.iter().rev().copied().collect())
            .collect();
        rows.extend(mirrored);
    }
    rows
}

/// How often condition `j` directly follows condition `i` over `rows` (`[i][j]`).
pub fn successions(rows: &[Vec<usize>], t: usize) -> Vec<Vec<usize>> {
    let mut m = vec![vec![0; t]; t];
    for r in rows {
        for w in r.windows(2) {
            m[w[0]][w[1]] += 1;
        }
    }
    m
}

#[cfg(test)]
mod tests {
    use super::*;

    /// First-order balance (the defining property, Williams 1949): over the design's rows,
    /// every ordered pair of distinct conditions occurs as neighbours equally often — once
    /// for even t, twice for odd t — and every row is a permutation, every condition appearing
    /// once in every position of a square (Latin property).
    #[test]
    fn every_condition_follows_every_other_equally_often() {
        for t in 2..=9 {
            let rows = williams_rows(t);
            assert_eq!(rows.len(), if t % 2 == 0 { t } else { 2 * t });
            for r in &rows {
                let mut s = r.clone();
                s.sort_unstable();
                assert_eq!(s, (0..t).collect::<Vec<_>>(), "t = {t}: a permutation");
            }
            let m = successions(&rows, t);
            let each = if t % 2 == 0 { 1 } else { 2 };
            for (i, row) in m.iter().enumerate() {
                for (j, &n) in row.iter().enumerate() {
                    assert_eq!(n, if i == j { 0 } else { each }, "t = {t}: {i} → {j}");
                }
            }
            for pos in 0..t {
                let mut col: Vec<usize> = rows[..t].iter().map(|r| r[pos]).collect();
                col.sort_unstable();
                assert_eq!(
                    col,
                    (0..t).collect::<Vec<_>>(),
                    "t = {t}: Latin column {pos}"
                );
            }
        }
    }

    /// The published 4-condition square (Williams 1949; reproduced in e.g. Jones & Kenward,
    /// "Design and Analysis of Cross-Over Trials", from memory): rows ABDC, BCAD, CDBA, DACB.
    #[test]
    fn four_conditions_match_the_textbook_square() {
        let rows = williams_rows(4);
        assert_eq!(
            rows,
            vec![
                vec![0, 1, 3, 2],
                vec![1, 2, 0, 3],
                vec![2, 3, 1, 0],
                vec![3, 0, 2, 1]
            ]
        );
    }
}
