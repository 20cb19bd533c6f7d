//! Records: agreement statistics against scikit-learn, campaign folders,
//! merge, export round trips (CSV, FITS, astropy-recorded values) and the report.
use approx::assert_relative_eq;
use serde_json::Value;
use std::path::Path;
use zvet::review::merge::CLASSES;
use zvet::review::stats::{cohen_kappa, confusion_matrix};
use zvet::review::VerdictClass;

fn data(name: &str) -> Value {
    let p = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/records")
        .join(name);
    serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap()
}

fn strings(v: &Value) -> Vec<String> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap().to_string())
        .collect()
}

fn class(s: &str) -> VerdictClass {
    serde_json::from_value(Value::String(s.into())).unwrap()
}

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
