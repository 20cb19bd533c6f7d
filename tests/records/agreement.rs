//! Cohen's κ and the confusion matrix against scikit-learn.
use super::{class, data, strings};
use approx::assert_relative_eq;
use zvet::review::merge::CLASSES;
use zvet::review::stats::{cohen_kappa, confusion_matrix};
use zvet::review::VerdictClass;

/// κ against scikit-learn's `cohen_kappa_score` on fixed label lists recorded
/// by tests/scripts/sklearn_reference.py (scikit-learn 1.9.1).
#[test]
fn kappa_matches_scikit_learn() {
    let r = data("sklearn_reference.json");
    let cases = r["kappa"].as_array().unwrap();
    assert!(cases.len() >= 5);
    for c in cases {
        let (a, b) = (strings(&c["a"]), strings(&c["b"]));
        let want = c["kappa"].as_f64().unwrap();
        let got = cohen_kappa(&a, &b).unwrap();
        assert_relative_eq!(got, want, epsilon = 1e-12);
    }
}

/// Confusion matrices against scikit-learn's `confusion_matrix` (rows truth,
/// columns prediction, labels galaxy/quasar/star/unclear), recorded by
/// tests/scripts/sklearn_reference.py.
#[test]
fn confusion_matrix_matches_scikit_learn() {
    let r = data("sklearn_reference.json");
    for c in r["confusion"].as_array().unwrap() {
        let truth: Vec<VerdictClass> = strings(&c["truth"]).iter().map(|s| class(s)).collect();
        let pred: Vec<VerdictClass> = strings(&c["pred"]).iter().map(|s| class(s)).collect();
        let labels: Vec<VerdictClass> = strings(&c["labels"]).iter().map(|s| class(s)).collect();
        assert_eq!(labels, CLASSES.to_vec());
        let want: Vec<Vec<usize>> = serde_json::from_value(c["matrix"].clone()).unwrap();
        assert_eq!(confusion_matrix(&truth, &pred, &labels), want);
    }
}
