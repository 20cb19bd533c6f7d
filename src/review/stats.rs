/*!
Agreement statistics on categorical labels: the confusion matrix, Cohen's κ
and the proportion of specific agreement per category.

Cohen's κ = (p_o − p_e) / (1 − p_e), with p_o the observed fraction of
agreement and p_e the agreement expected by chance from the two raters'
marginal frequencies. It is undefined (`None`) when p_e = 1, i.e. both raters
used one and the same label throughout.

The proportion of specific agreement for a category c over a (square)
confusion matrix M is 2·M(c,c) / (row_c + col_c): of all the times either
rater used c, the fraction on which the other rater agreed.
*/

/// Confusion matrix of `truth` (rows) against `pred` (columns) over `labels`
/// (in that order). Pairs with a label not in `labels` are skipped.
/// Panics only if the slices differ in length (a programming error).
pub fn confusion_matrix<L: PartialEq>(truth: &[L], pred: &[L], labels: &[L]) -> Vec<Vec<usize>> {
    assert_eq!(truth.len(), pred.len(), "confusion_matrix: lengths differ");
    let mut m = vec![vec![0usize; labels.len()]; labels.len()];
    for (t, p) in truth.iter().zip(pred) {
        let (Some(i), Some(j)) = (
            labels.iter().position(|l| l == t),
            labels.iter().position(|l| l == p),
        ) else {
            continue;
        };
        m[i][j] += 1;
    }
    m
}

/// Cohen's κ from a square confusion matrix; `None` when undefined (no
/// pairs, or chance agreement equal to 1).
pub fn kappa_from_matrix(m: &[Vec<usize>]) -> Option<f64> {
    let k = m.len();
    let n: usize = m.iter().flatten().sum();
    if n == 0 {
        return None;
    }
    let n = n as f64;
    let p_o = (0..k).map(|i| m[i][i] as f64).sum::<f64>() / n;
    let p_e = (0..k)
        .map(|i| {
            let row: usize = m[i].iter().sum();
            let col: usize = m.iter().map(|r| r[i]).sum();
            row as f64 * col as f64
        })
        .sum::<f64>()
        / (n * n);
    if (1.0 - p_e).abs() < 1e-12 {
        return None;
    }
    Some((p_o - p_e) / (1.0 - p_e))
}

/// Cohen's κ of two raters' labels on the same items; the label set is the
/// union of what they used.
pub fn cohen_kappa<L: PartialEq + Clone>(a: &[L], b: &[L]) -> Option<f64> {
    let mut labels: Vec<L> = Vec::new();
    for l in a.iter().chain(b) {
        if !labels.contains(l) {
            labels.push(l.clone());
        }
    }
    kappa_from_matrix(&confusion_matrix(a, b, &labels))
}

/// Proportion of specific agreement for each label of a square matrix
/// (`None` for a label nobody used).
pub fn specific_agreement(m: &[Vec<usize>]) -> Vec<Option<f64>> {
    (0..m.len())
        .map(|c| {
            let row: usize = m[c].iter().sum();
            let col: usize = m.iter().map(|r| r[c]).sum();
            (row + col > 0).then(|| 2.0 * m[c][c] as f64 / (row + col) as f64)
        })
        .collect()
}

/// Fraction of the diagonal per row (per-class accuracy when rows are the
/// reference); `None` for an empty row.
pub fn row_accuracy(m: &[Vec<usize>]) -> Vec<Option<f64>> {
    m.iter()
        .enumerate()
        .map(|(i, r)| {
            let n: usize = r.iter().sum();
            (n > 0).then(|| r[i] as f64 / n as f64)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Expand a 2×2 table [[yy, yn], [ny, nn]] into label lists.
    fn expand(t: [[usize; 2]; 2]) -> (Vec<u8>, Vec<u8>) {
        let (mut a, mut b) = (Vec::new(), Vec::new());
        for (i, row) in t.iter().enumerate() {
            for (j, &n) in row.iter().enumerate() {
                for _ in 0..n {
                    a.push(i as u8);
                    b.push(j as u8);
                }
            }
        }
        (a, b)
    }

    #[test]
    fn kappa_worked_examples() {
        // From memory: the worked example of the encyclopedia article
        // "Cohen's kappa" (50 grant proposals, two readers: 20 both yes,
        // 5 A-yes/B-no, 10 A-no/B-yes, 15 both no) gives p_o = 0.7,
        // p_e = 0.5, κ = 0.4; and its pair of tables with equal p_o = 0.6:
        // [[45, 15], [25, 15]] → κ = 0.1304 and [[25, 35], [5, 35]] → κ = 0.2593.
        // The arithmetic is checked by hand in the comments above; the same
        // tables are also run through scikit-learn in tests/records/agreement.rs.
        let (a, b) = expand([[20, 5], [10, 15]]);
        assert_relative_eq!(cohen_kappa(&a, &b).unwrap(), 0.4, epsilon = 1e-12);
        let (a, b) = expand([[45, 15], [25, 15]]);
        assert_relative_eq!(cohen_kappa(&a, &b).unwrap(), 0.06 / 0.46, epsilon = 1e-12);
        assert_relative_eq!(cohen_kappa(&a, &b).unwrap(), 0.1304, epsilon = 1e-4);
        let (a, b) = expand([[25, 35], [5, 35]]);
        assert_relative_eq!(cohen_kappa(&a, &b).unwrap(), 0.2593, epsilon = 1e-4);
    }

    #[test]
    fn kappa_limits() {
        let a = ["g", "q", "s", "g"];
        assert_relative_eq!(cohen_kappa(&a, &a).unwrap(), 1.0);
        assert_eq!(cohen_kappa(&["g", "g"], &["g", "g"]), None);
        assert_eq!(cohen_kappa::<u8>(&[], &[]), None);
    }

    #[test]
    fn specific_agreement_and_accuracy() {
        let m = vec![vec![8, 2], vec![0, 0]];
        let sa = specific_agreement(&m);
        assert_relative_eq!(sa[0].unwrap(), 16.0 / 18.0);
        assert_relative_eq!(sa[1].unwrap(), 0.0);
        let acc = row_accuracy(&m);
        assert_relative_eq!(acc[0].unwrap(), 0.8);
        assert_eq!(acc[1], None);
    }
}
