//! Records: agreement statistics against scikit-learn ([`agreement`]), the
//! training-catalogue export ([`export`]), campaign folders with merge,
//! report and command line ([`campaign`], built on [`scenario`]).
use serde_json::Value;
use std::path::Path;
use zvet::review::VerdictClass;

mod agreement;
mod campaign;
mod export;
mod export_readers;
mod scenario;

/// A recorded reference file of tests/data/records/.
pub fn data(name: &str) -> Value {
    let p = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/records")
        .join(name);
    serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap()
}

/// A JSON array of strings.
pub fn strings(v: &Value) -> Vec<String> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap().to_string())
        .collect()
}

/// A class from its lower-case name.
pub fn class(s: &str) -> VerdictClass {
    serde_json::from_value(Value::String(s.into())).unwrap()
}
