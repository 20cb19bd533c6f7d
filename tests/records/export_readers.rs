//! The exports open in the real libraries: the test writes the CSV, ECSV and
//! FITS catalogue now and runs tests/scripts/check_export_readers.py with
//! pandas and astropy (pinned in `support::PYTHON_LIBS`, installed from the
//! package index into target/reference/python/), which read each file as a
//! user would, with no options; what they read is compared with the rows.
use super::export::{sample_provenance, sample_rows};
use crate::support;
use serde_json::Value;
use zvet::export::{self, Cell, ExportRow, Kind, COLUMNS};

/// Expected value of column `j` of `row` as the readers should see it:
/// `None` for a missing value.
fn expected(row: &ExportRow, j: usize, fits: bool) -> Option<Value> {
    match COLUMNS[j].value(row) {
        Cell::F64(x) => x.map(Value::from),
        Cell::I16(x) => x.map(Value::from),
        Cell::Str(s) if s.is_empty() => None,
        Cell::Str(s) if fits => Some(Value::from(export::to_ascii(&s))),
        Cell::Str(s) => Some(Value::from(s)),
    }
}

/// Compare one reader's values with the rows, column by column. Floats must
/// be the same double (the text is parsed by the reader's own routine);
/// an empty text value may read as missing or as "".
fn compare(what: &str, values: &dyn Fn(&str) -> Vec<Value>, rows: &[ExportRow], fits: bool) {
    for (j, c) in COLUMNS.iter().enumerate() {
        let got = values(c.name);
        assert_eq!(got.len(), rows.len(), "{what} {}", c.name);
        for (i, row) in rows.iter().enumerate() {
            let want = expected(row, j, fits);
            let g = &got[i];
            match (&want, c.kind()) {
                (None, Kind::Str) => assert!(g.is_null() || g == "", "{what} {} row {i}: {g}", c.name),
                (None, _) => assert!(g.is_null(), "{what} {} row {i}: {g}", c.name),
                // "true"/"false" (in_audit_sample) are read as booleans by
                // pandas and astropy, as a user would want
                (Some(w), Kind::Str) if g.is_boolean() => {
                    assert_eq!(
                        g.as_bool().map(|b| b.to_string()).as_deref(),
                        w.as_str(),
                        "{what} {} row {i}",
                        c.name
                    )
                }
                (Some(w), Kind::Str) => assert_eq!(g, w, "{what} {} row {i}", c.name),
                (Some(w), _) => {
                    let (g, w) = (g.as_f64(), w.as_f64().unwrap());
                    assert_eq!(
                        g.map(f64::to_bits),
                        Some(w.to_bits()),
                        "{what} {} row {i}: {g:?} vs {w}",
                        c.name
                    );
                }
            }
        }
    }
}

fn names(v: &Value) -> Vec<&str> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap())
        .collect()
}

#[test]
fn exports_open_in_pandas_and_astropy() {
    let dir = support::scratch("export_readers");
    let rows = sample_rows();
    let prov = sample_provenance();
    let (csv, ecsv, fits) = (dir.join("cat.csv"), dir.join("cat.ecsv"), dir.join("cat.fits"));
    for p in [&csv, &ecsv, &fits] {
        export::write(p, &rows, &prov).unwrap();
    }
    let seen = support::run_reference_script("check_export_readers.py", &[&csv, &ecsv, &fits]);
    let want_names: Vec<&str> = COLUMNS.iter().map(|c| c.name).collect();

    // pandas.read_csv(F), no options (pandas 3.1.1).
    let pd = &seen["pandas_csv"];
    assert_eq!(names(&pd["columns"]), want_names);
    assert_eq!(pd["n_rows"], rows.len());
    for c in COLUMNS.iter().filter(|c| c.kind() == Kind::F64) {
        assert_eq!(pd["dtypes"][c.name], "float64", "{}", c.name);
    }
    compare(
        "pandas csv",
        &|n| pd["values"][n].as_array().unwrap().clone(),
        &rows,
        false,
    );
    // The note with quotes, commas, a newline and non-ASCII text comes back whole.
    assert_eq!(pd["values"]["note"][1], rows[1].note.as_str());

    // astropy Table.read(F) on the CSV: format from the extension.
    let view = |t: &Value| {
        let t = t.clone();
        move |n: &str| t["columns"][n]["values"].as_array().unwrap().clone()
    };
    let ac = &seen["astropy_csv"];
    assert_eq!(names(&ac["colnames"]), want_names);
    compare("astropy csv", &view(ac), &rows, false);

    // astropy on the ECSV: types, units, descriptions and provenance from
    // its header (ECSV 1.0, astropy APE 6).
    let ae = &seen["astropy_ecsv"];
    assert_eq!(names(&ae["colnames"]), want_names);
    compare("astropy ecsv", &view(ae), &rows, false);
    for c in &COLUMNS {
        let col = &ae["columns"][c.name];
        assert_eq!(col["unit"].as_str(), c.unit, "{}", c.name);
        assert_eq!(col["description"], c.doc, "{}", c.name);
        let (kind, size) = (
            col["dtype_kind"].as_str().unwrap(),
            col["itemsize"].as_u64().unwrap(),
        );
        match c.kind() {
            Kind::F64 => assert_eq!((kind, size), ("f", 8), "{}", c.name),
            Kind::I16 => assert_eq!((kind, size), ("i", 2), "{}", c.name),
            Kind::Str => assert_eq!(kind, "U", "{}", c.name),
        }
    }
    // Units are astropy units, not text: degrees are an angle.
    assert_eq!(ae["columns"]["ra"]["physical_type"], "angle");
    assert_eq!(ae["columns"]["mag_r"]["unit"], "mag");
    // an emission line's equivalent width is a length in Å; its flux (in the
    // spectra's own unit × Å, unknown to zvet) carries none
    assert_eq!(ae["columns"]["line_halpha_ew"]["physical_type"], "length");
    assert_eq!(ae["columns"]["line_halpha_ew"]["unit"], "Angstrom");
    assert!(ae["columns"]["line_halpha_flux"]["unit"].is_null());
    assert_eq!(ae["columns"]["line_halpha_flux"]["values"][0], 812.4);
    assert_eq!(pd["values"]["line_hbeta_flux"][0], -3.1);
    assert_eq!(ae["meta"], prov.to_json().unwrap());
    assert_eq!(
        export::Provenance::from_json(&ae["meta"]).unwrap(),
        prov,
        "the provenance astropy read is the one written"
    );

    // astropy on the FITS table.
    let af = &seen["astropy_fits"];
    assert_eq!(names(&af["colnames"]), want_names);
    compare("astropy fits", &view(af), &rows, true);
    assert_eq!(af["columns"]["dec"]["unit"], "deg");
}
