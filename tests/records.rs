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

// ------------------------------------------------------------------ export

use crate::support;
use chrono::TimeZone;
use std::collections::BTreeSet;
use zvet::campaign::EngineSettings;
use zvet::export::{self, ExportRow, Provenance, COLUMNS};
use zvet::review::merge::ConsensusState;
use zvet::review::{Confidence, Flag, ZSource};
use zvet::ObjectClass;

/// Fixed rows with the awkward cases: missing values, non-ASCII text,
/// separators and quotes in notes, a newline, every consensus state.
pub fn sample_rows() -> Vec<ExportRow> {
    let base = ExportRow {
        id: "obj-0001".into(),
        ra: Some(150.123456789012),
        dec: Some(-2.5),
        mag: [Some(21.03), Some(20.11), Some(19.72), Some(19.5), Some(19.41)],
        mag_err: [Some(0.08), Some(0.02), Some(0.015), Some(0.02), Some(0.05)],
        phot_class: Some(ObjectClass::Galaxy),
        phot_class_prob: Some(0.93),
        phot_z: Some(0.31),
        auto_class: Some(ObjectClass::Galaxy),
        auto_z: Some(0.3123456789),
        auto_z_err: Some(1.2e-4),
        auto_delta_chi2: Some(812.5),
        auto_warnings: String::new(),
        vetted_class: zvet::review::VerdictClass::Galaxy,
        vetted_z: Some(0.3123456789),
        vetted_z_err: Some(1.2e-4),
        z_source: Some(ZSource::Automatic),
        confidence: Some(Confidence::Certain),
        flags: BTreeSet::new(),
        note: String::new(),
        inspectors: vec!["ana".into()],
        consensus: ConsensusState::Single,
    };
    let mut r2 = base.clone();
    r2.id = "obj-0002".into();
    r2.mag = [None, Some(22.4), Some(21.9), Some(21.0), None];
    r2.mag_err = [None, Some(0.1), Some(0.08), Some(0.05), None];
    r2.phot_class = Some(ObjectClass::Star);
    r2.auto_class = Some(ObjectClass::Quasar);
    r2.auto_z = Some(2.2);
    r2.auto_delta_chi2 = None;
    r2.auto_warnings = "ambiguous|at_grid_edge".into();
    r2.vetted_class = zvet::review::VerdictClass::Quasar;
    r2.vetted_z = Some(2.2051);
    r2.z_source = Some(ZSource::Typed);
    r2.confidence = Some(Confidence::Solid);
    r2.flags = [Flag::BroadAbsorption, Flag::SkyResidual].into_iter().collect();
    r2.note = "C IV, C III] and Mg II; Lyα forest, \"BAL\"\nsecond line, λ 1549 Å".into();
    r2.inspectors = vec!["ana".into(), "ben".into()];
    r2.consensus = ConsensusState::Agreed;
    let mut r3 = base.clone();
    r3.id = "obj-0003".into();
    r3.ra = None;
    r3.dec = None;
    r3.mag = [None; 5];
    r3.mag_err = [None; 5];
    r3.phot_class = None;
    r3.phot_class_prob = None;
    r3.phot_z = None;
    r3.auto_class = None;
    r3.auto_z = None;
    r3.auto_z_err = None;
    r3.auto_delta_chi2 = None;
    r3.vetted_class = zvet::review::VerdictClass::Unclear;
    r3.vetted_z = None;
    r3.vetted_z_err = None;
    r3.z_source = None;
    r3.confidence = None;
    r3.flags = [Flag::LowSignal].into_iter().collect();
    r3.note = "back\\slash, comma".into();
    r3.inspectors = vec!["ana".into(), "ben".into(), "judge".into()];
    r3.consensus = ConsensusState::Adjudicated;
    let mut r4 = base;
    r4.id = "obj-0004".into();
    r4.vetted_class = zvet::review::VerdictClass::Star;
    r4.vetted_z = Some(-0.000123);
    r4.z_source = Some(ZSource::Refit);
    r4.confidence = Some(Confidence::Doubtful);
    vec![r4.clone(), r2, r3, {
        r4.id = "obj-0000".into();
        r4
    }]
}

pub fn sample_provenance() -> Provenance {
    Provenance {
        zvet_version: "0.1.0".into(),
        campaign: "test campaign".into(),
        template_set: "builtin".into(),
        engine: EngineSettings::default(),
        date: chrono::Utc.with_ymd_and_hms(2026, 12, 2, 0, 30, 0).unwrap(),
        tolerance: 0.0015,
        min_confidence: Some(Confidence::Doubtful),
        exclude_flags: vec![Flag::WrongTarget, Flag::Artefact],
    }
}

#[test]
fn export_csv_round_trip() {
    let dir = support::scratch("export_csv");
    let p = dir.join("cat.csv");
    let rows = sample_rows();
    export::write(&p, &rows, &sample_provenance()).unwrap();
    let (back, prov) = export::read(&p).unwrap();
    assert_eq!(back, rows);
    assert_eq!(prov, sample_provenance());
    let text = std::fs::read_to_string(&p).unwrap();
    assert!(text.starts_with("# format: zvet training catalogue\n"));
    assert!(text.contains("# template_set: builtin\n"));
    // The colour columns are the magnitude differences.
    let mut rd = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_reader(text.as_bytes());
    let hdr = rd.headers().unwrap().clone();
    let col = |n: &str| hdr.iter().position(|h| h == n).unwrap();
    let first = rd.records().next().unwrap().unwrap();
    let ug: f64 = first[col("u_g")].parse().unwrap();
    assert_relative_eq!(ug, 21.03 - 20.11, epsilon = 1e-12);
}

#[test]
fn export_fits_round_trip() {
    let dir = support::scratch("export_fits");
    let p = dir.join("cat.fits");
    let rows = sample_rows();
    export::write(&p, &rows, &sample_provenance()).unwrap();
    let (back, prov) = export::read(&p).unwrap();
    assert_eq!(back, rows);
    assert_eq!(prov, sample_provenance());
    // Rewriting replaces the file (atomic rename; fitsio alone would refuse).
    export::write(&p, &rows[..1], &sample_provenance()).unwrap();
    assert_eq!(export::read(&p).unwrap().0.len(), 1);
    assert_eq!(std::fs::read_dir(&dir).unwrap().count(), 1);
}

/// Writes the sample catalogue where tests/scripts/check_export_astropy.py
/// reads it (`target/test-scratch/astropy_export/`). Run it before the script.
#[test]
fn export_fixture_for_astropy() {
    let dir = support::scratch("astropy_export");
    export::write(&dir.join("sample.fits"), &sample_rows(), &sample_provenance()).unwrap();
    export::write(&dir.join("sample.csv"), &sample_rows(), &sample_provenance()).unwrap();
}

#[test]
fn export_rejects_unknown_extension() {
    let err = export::write(Path::new("x.txt"), &[], &sample_provenance()).unwrap_err();
    assert!(err.to_string().contains(".csv or .fits"));
    assert_eq!(COLUMNS.len(), 36);
}

/// What astropy 8.0.2 read from our FITS and CSV export of [`sample_rows`]
/// (recorded by tests/scripts/check_export_astropy.py into
/// tests/data/records/astropy_export.json) equals what the current writer puts
/// in: column names and order, types (float64 'D', int16 'I', ASCII 'A'),
/// units, masking of missing values, values, provenance keywords.
#[test]
fn export_matches_astropy_view() {
    use zvet::export::{Cell, Kind};
    let rec = data("astropy_export.json");
    let rows = sample_rows();
    assert_eq!(rec["n_rows"].as_u64().unwrap() as usize, rows.len());
    let cols = rec["columns"].as_array().unwrap();
    assert_eq!(cols.len(), COLUMNS.len());
    for (j, (spec, c)) in COLUMNS.iter().zip(cols).enumerate() {
        assert_eq!(c["name"], spec.name);
        let (kind, size) = (c["kind"].as_str().unwrap(), c["itemsize"].as_u64().unwrap());
        match spec.kind {
            Kind::F64 => assert_eq!((kind, size), ("f", 8), "{}", spec.name),
            Kind::I16 => assert_eq!((kind, size), ("i", 2), "{}", spec.name),
            Kind::Str => assert!(kind == "S" || kind == "U", "{}", spec.name),
        }
        assert_eq!(c["unit"].as_str(), spec.unit, "{}", spec.name);
        let masked = c["masked"].as_array().unwrap();
        let values = c["values"].as_array().unwrap();
        for (i, row) in rows.iter().enumerate() {
            let cell = &row.cells()[j];
            match cell {
                Cell::F64(x) => {
                    assert_eq!(masked[i].as_bool().unwrap(), x.is_none(), "{} row {i}", spec.name);
                    if let Some(x) = x {
                        assert_relative_eq!(values[i].as_f64().unwrap(), *x, epsilon = 0.0);
                    }
                }
                Cell::I16(x) => {
                    assert_eq!(masked[i].as_bool().unwrap(), x.is_none(), "{} row {i}", spec.name);
                    assert_eq!(values[i].as_i64().unwrap(), x.map_or(0, i64::from));
                }
                Cell::Str(s) => {
                    assert_eq!(
                        values[i].as_str().unwrap(),
                        zvet::export::to_ascii(s),
                        "{} row {i}",
                        spec.name
                    );
                }
            }
        }
    }
    let h = &rec["header"];
    let p = sample_provenance();
    assert_eq!(h["ZVETVER"], p.zvet_version.as_str());
    assert_eq!(h["TEMPLSET"], p.template_set.as_str());
    assert_eq!(h["DATE"], "2026-12-02T00:30:00");
    assert_eq!(h["MINCONF"], "doubtful");
    assert_eq!(h["EXCLFLAG"], "wrong_target,artefact");
    assert_relative_eq!(h["ZTOL"].as_f64().unwrap(), p.tolerance);
    assert_relative_eq!(h["DLOGLAM"].as_f64().unwrap(), p.engine.dloglam);
    assert_eq!(h["NPOLY"].as_u64().unwrap() as usize, p.engine.poly_terms);
    // The CSV reads in astropy's generic CSV reader, '#' lines as comments,
    // UTF-8 notes with quotes and newlines intact.
    let csv = &rec["csv"];
    let names: Vec<String> = strings(&csv["colnames"]);
    assert_eq!(names, COLUMNS.iter().map(|c| c.name).collect::<Vec<_>>());
    assert_eq!(csv["note"][1].as_str().unwrap(), rows[1].note);
    assert_relative_eq!(csv["vetted_z"][1].as_f64().unwrap(), rows[1].vetted_z.unwrap());
}

// ------------------------------------------------- campaign, merge, report

use std::collections::BTreeMap;
use zvet::campaign::{Campaign, InitOptions};
use zvet::fit::{Candidate, FitResult, Warnings};
use zvet::review::{Change, ReviewLog};

/// The scenario of [`build_campaign`], kept to compute expectations.
struct Scenario {
    ids: Vec<String>,
    truth: Vec<VerdictClass>,
    phot: Vec<VerdictClass>,
    /// ana's redshift per object (None for unclear).
    z: Vec<Option<f64>>,
    conf: Vec<Confidence>,
    catastrophic: Vec<usize>,
    flags: Vec<Vec<Flag>>,
}

const N_AGREED: usize = 30;
const N_CONFLICT: usize = 10;

fn ana_z(i: usize, c: VerdictClass) -> Option<f64> {
    match c {
        VerdictClass::Galaxy => Some(0.1 + 0.005 * i as f64),
        VerdictClass::Quasar => Some(1.0 + 0.01 * i as f64),
        VerdictClass::Star => Some(0.0),
        VerdictClass::Unclear => None,
    }
}

fn other_class(c: VerdictClass) -> VerdictClass {
    let i = CLASSES.iter().position(|x| *x == c).unwrap();
    CLASSES[(i + 1) % CLASSES.len()]
}

/// A campaign of 200 objects whose vetted and photometric classes are the
/// scikit-learn "200 objects" case: ana reviews all, ben the first 40 (agrees
/// on 30, disagrees on class on 10), the adjudicator settles those 10 with
/// ana's class. Automatic fits agree with ana except for a few catastrophic
/// redshifts.
fn build_campaign(name: &str) -> (Campaign, Scenario) {
    let r = data("sklearn_reference.json");
    let case = &r["confusion"][0];
    assert_eq!(case["name"], "200 objects");
    let truth: Vec<VerdictClass> = strings(&case["truth"]).iter().map(|s| class(s)).collect();
    let phot: Vec<VerdictClass> = strings(&case["pred"]).iter().map(|s| class(s)).collect();
    let n = truth.len();
    let ids: Vec<String> = (0..n).map(|i| format!("o{i:03}")).collect();
    let z: Vec<Option<f64>> = (0..n).map(|i| ana_z(i, truth[i])).collect();
    let conf: Vec<Confidence> = (0..n).map(|i| Confidence::ALL[i % 4]).collect();
    let flags: Vec<Vec<Flag>> = (0..n)
        .map(|i| {
            let mut f = Vec::new();
            if i % 10 == 0 {
                f.push(Flag::LowSignal);
            }
            if i % 15 == 0 {
                f.push(Flag::Blend);
            }
            f
        })
        .collect();
    let catastrophic: Vec<usize> = [3, 50, 77, 120, 150, 181, 199, 5, 8, 13]
        .into_iter()
        .filter(|&i| truth[i] != VerdictClass::Unclear)
        .take(7)
        .collect();
    assert_eq!(catastrophic.len(), 7);

    let dir = support::scratch(name);
    let spectra = dir.join("spectra");
    std::fs::create_dir_all(&spectra).unwrap();
    let cat_path = dir.join("catalogue.csv");
    let mut cat =
        String::from("id,ra,dec,u,g,r,i,z,u_err,g_err,r_err,i_err,z_err,phot_class,phot_class_prob,phot_z\n");
    for i in 0..n {
        let pc = phot[i].as_str();
        cat.push_str(&format!(
            "{},{},{},21.0,20.5,20.0,19.8,19.7,0.1,0.05,0.04,0.04,0.08,{pc},0.9,0.3\n",
            ids[i],
            10.0 + 0.01 * i as f64,
            -1.0 - 0.01 * i as f64
        ));
    }
    std::fs::write(&cat_path, cat).unwrap();
    let camp_dir = dir.join("campaign");
    let mut c = Campaign::init(
        &camp_dir,
        &InitOptions {
            spectra: vec![spectra],
            catalog: Some(cat_path),
            inspectors: vec!["ana".into(), "ben".into()],
            adjudicator: Some("judge".into()),
            ..InitOptions::default()
        },
    )
    .unwrap();

    let fits: Vec<FitResult> = (0..n)
        .map(|i| {
            let auto_class = truth[i].object_class().unwrap_or(ObjectClass::Galaxy);
            let mut az = z[i].unwrap_or(0.2);
            if catastrophic.contains(&i) {
                az += 0.2;
            }
            FitResult {
                object_id: ids[i].clone(),
                candidates: vec![Candidate {
                    class: auto_class,
                    template: "t".into(),
                    z: az,
                    z_err: 1e-4,
                    chi2: 1000.0,
                    coeffs: vec![1.0],
                }],
                delta_chi2: if i % 2 == 0 { f64::INFINITY } else { 50.0 },
                chi2_reduced: 1.0,
                n_good: 3000,
                snr_median: 8.0,
                warnings: Warnings::default(),
                curves: vec![],
                lines: vec![],
            }
        })
        .collect();
    c.save_fits(&fits).unwrap();

    let verdict = |class: VerdictClass, z: Option<f64>, confidence| Change::Verdict {
        class,
        z,
        z_err: z.map(|_| 1e-4),
        source: ZSource::Automatic,
        confidence,
    };
    {
        let (mut ana, _) = c.open_review_log("ana").unwrap();
        for i in 0..n {
            ana.record(&ids[i], None, verdict(truth[i], z[i], conf[i]))
                .unwrap();
            for f in &flags[i] {
                ana.record(&ids[i], None, Change::Flag { flag: *f, on: true })
                    .unwrap();
            }
        }
        let (mut ben, _) = c.open_review_log("ben").unwrap();
        for i in 0..N_AGREED + N_CONFLICT {
            let (cl, zz) = if i < N_AGREED {
                (truth[i], z[i].map(|z| z + 0.0005 * (1.0 + z)))
            } else {
                let o = other_class(truth[i]);
                (o, ana_z(i, o))
            };
            ben.record(&ids[i], None, verdict(cl, zz, Confidence::Certain))
                .unwrap();
        }
        let (mut judge, _) = c.open_review_log("judge").unwrap();
        for i in N_AGREED..N_AGREED + N_CONFLICT {
            judge
                .record(&ids[i], None, verdict(truth[i], z[i], Confidence::Certain))
                .unwrap();
        }
    }
    let scenario = Scenario {
        ids,
        truth,
        phot,
        z,
        conf,
        catastrophic,
        flags,
    };
    (c, scenario)
}

#[test]
fn campaign_reopens_with_its_manifest() {
    let (c, s) = build_campaign("campaign_reopen");
    let c2 = Campaign::open(c.dir()).unwrap();
    assert_eq!(c2.manifest(), c.manifest());
    assert_eq!(c2.manifest().inspectors, vec!["ana", "ben", "judge"]);
    assert_eq!(c2.log_inspectors().unwrap(), vec!["ana", "ben", "judge"]);
    let (fits, problems) = c2.load_fits().unwrap();
    assert!(problems.is_empty());
    assert_eq!(fits.len(), s.ids.len());
    assert!(fits["o000"].delta_chi2.is_infinite());
    let (cat, problems) = c2.load_catalog().unwrap();
    assert!(problems.is_empty());
    assert_eq!(cat.len(), 200);
    assert_eq!(cat["o001"].phot_class.map(VerdictClass::from), Some(s.phot[1]));
    // init refuses an existing campaign; open refuses a plain folder.
    assert!(Campaign::init(c.dir(), &InitOptions::default()).is_err());
    let plain = support::scratch("campaign_plain");
    let err = Campaign::open(&plain).unwrap_err().to_string();
    assert!(err.contains("not a campaign folder"), "{err}");
    // A second process (here: a second handle) on ana's log is refused.
    let mut c3 = c2.clone();
    let (_held, _) = c3.open_review_log("ana").unwrap();
    assert!(c3.open_review_log("ana").is_err());
    assert!(c3.open_review_log("../evil").is_err());
}

#[test]
fn merge_of_the_campaign_matches_the_logs() {
    let (c, s) = build_campaign("campaign_merge");
    let (m, problems) = c.merge(None).unwrap();
    assert!(problems.is_empty());
    let counts = m.counts();
    assert_eq!(counts[&ConsensusState::Single], 200 - N_AGREED - N_CONFLICT);
    assert_eq!(counts[&ConsensusState::Agreed], N_AGREED);
    assert_eq!(counts[&ConsensusState::Adjudicated], N_CONFLICT);
    assert_eq!(m.conflicts().count(), 0);
    let p = &m.stats.pairs[0];
    assert_eq!((p.a.as_str(), p.b.as_str()), ("ana", "ben"));
    assert_eq!(p.n_common, N_AGREED + N_CONFLICT);
    assert_relative_eq!(p.class_agreement.unwrap(), N_AGREED as f64 / 40.0);
    // κ of the same label lists through the tested function.
    let a: Vec<_> = s.truth[..40].to_vec();
    let b: Vec<_> = (0..40)
        .map(|i| {
            if i < N_AGREED {
                s.truth[i]
            } else {
                other_class(s.truth[i])
            }
        })
        .collect();
    assert_relative_eq!(p.kappa.unwrap(), cohen_kappa(&a, &b).unwrap(), epsilon = 1e-12);
    // Without the adjudicator the ten disagreements are conflicts.
    let (logs, _) = c.read_logs().unwrap();
    let no_judge: Vec<_> = logs.into_iter().filter(|l| l.inspector != "judge").collect();
    let m2 = zvet::review::merge::merge(&no_judge, &Default::default());
    assert_eq!(m2.conflicts().count(), N_CONFLICT);
    // A tighter tolerance than ben's 0.0005·(1+z) offsets turns agreements
    // into conflicts (except unclear objects, which carry no redshift).
    let (m3, _) = c.merge(Some(0.0001)).unwrap();
    let zero_offset = (0..N_AGREED).filter(|&i| s.z[i].is_none()).count();
    assert_eq!(m3.counts()[&ConsensusState::Conflict], N_AGREED - zero_offset);
}

#[test]
fn report_numbers_match_the_logs_and_scikit_learn() {
    let (c, s) = build_campaign("campaign_report");
    let input = zvet::report::input_from_campaign(&c).unwrap();
    let n = zvet::report::numbers(&input);
    // Confusion matrix (rows vetted, columns photometric) equals
    // scikit-learn's confusion_matrix(truth, pred) recorded by
    // tests/scripts/sklearn_reference.py.
    let r = data("sklearn_reference.json");
    let want: Vec<Vec<usize>> = serde_json::from_value(r["confusion"][0]["matrix"].clone()).unwrap();
    assert_eq!(n.photometric.matrix, want);
    assert_eq!(n.photometric.n, 200);
    for (i, acc) in n.photometric.accuracy.iter().enumerate().take(3) {
        let row: usize = want[i].iter().sum();
        assert_relative_eq!(acc.unwrap(), want[i][i] as f64 / row as f64);
    }
    assert_eq!(n.photometric.accuracy[3], None);
    // Redshifts: every non-unclear object is compared; the planted
    // catastrophic ones and only they are outliers.
    let n_z = s.truth.iter().filter(|c| **c != VerdictClass::Unclear).count();
    assert_eq!(n.z_pairs.len(), n_z);
    assert_eq!(n.z_catastrophic, s.catastrophic.len());
    assert_relative_eq!(n.z_catastrophic_rate.unwrap(), 7.0 / n_z as f64);
    let mut out_ids: Vec<&str> = n.outliers.iter().map(|o| o.id.as_str()).collect();
    out_ids.sort();
    let mut want_ids: Vec<&str> = s.catastrophic.iter().map(|&i| s.ids[i].as_str()).collect();
    want_ids.sort();
    assert_eq!(out_ids, want_ids);
    for o in &n.outliers {
        // The consensus redshift is the most confident inspector's: ben's
        // (certain) where ana was less sure, else ana's.
        let i = s.ids.iter().position(|id| *id == o.id).unwrap();
        let za = s.z[i].unwrap();
        let zv = if i < N_AGREED && s.conf[i] != Confidence::Certain {
            za + 0.0005 * (1.0 + za)
        } else {
            za
        };
        assert_relative_eq!(o.vetted_z, zv, epsilon = 1e-12);
        assert_relative_eq!(o.dz, (za + 0.2 - zv).abs() / (1.0 + zv), epsilon = 1e-12);
    }
    // Progress per inspector.
    let prog: BTreeMap<&str, usize> = n
        .inspectors
        .iter()
        .map(|p| (p.name.as_str(), p.reviewed))
        .collect();
    assert_eq!(prog, BTreeMap::from([("ana", 200), ("ben", 40), ("judge", 10)]));
    // Confidence of consensus verdicts: ana's (the lower one where ben agreed),
    // certain for the adjudicated.
    let mut want_conf = [0usize; 5];
    for i in 0..200 {
        let level = if (N_AGREED..N_AGREED + N_CONFLICT).contains(&i) {
            Confidence::Certain
        } else {
            s.conf[i]
        };
        want_conf[level.level() as usize - 1] += 1;
    }
    let got_conf: Vec<usize> = n.confidence.iter().map(|(_, v)| *v).collect();
    assert_eq!(got_conf, want_conf.to_vec());
    // Flags: ana's flags survive the merge except on adjudicated objects.
    let count = |f: Flag| {
        (0..200)
            .filter(|i| !(N_AGREED..N_AGREED + N_CONFLICT).contains(i) && s.flags[*i].contains(&f))
            .count()
    };
    let flags: BTreeMap<&str, usize> = n.flags.iter().map(|(k, v)| (k.as_str(), *v)).collect();
    assert_eq!(flags["low_signal"], count(Flag::LowSignal));
    assert_eq!(flags["blend"], count(Flag::Blend));
    assert_eq!(n.n_objects, Some(200));

    // Writing: every file, the HTML self-contained with the plots inline.
    let out = support::scratch("campaign_report_out");
    let written = zvet::report::write_report(&out, &n).unwrap();
    assert_eq!(written.len(), zvet::report::REPORT_FILES.len());
    for f in zvet::report::REPORT_FILES {
        assert!(std::fs::metadata(out.join(f)).unwrap().len() > 200, "{f}");
    }
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert_eq!(html.matches("<svg").count(), 6);
    assert!(!html.contains("src=\"http"));
    let json: Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap();
    assert_eq!(json["z_catastrophic"], 7);
    let svg = std::fs::read_to_string(out.join("confusion_photometric.svg")).unwrap();
    assert!(
        svg.contains(&format!("\n{}\n</text>", want[0][0])),
        "count in the matrix plot"
    );
}

#[test]
fn export_of_the_campaign_applies_filters() {
    let (c, s) = build_campaign("campaign_export");
    let out = c.exports_dir().join("all.fits");
    let sum = export::export_campaign(&c, &out, &Default::default()).unwrap();
    assert_eq!((sum.rows, sum.filtered, sum.conflicts), (200, 0, 0));
    let (rows, prov) = export::read(&out).unwrap();
    assert_eq!(rows.len(), 200);
    assert_eq!(prov.template_set, "builtin");
    let r7 = rows.iter().find(|r| r.id == "o007").unwrap();
    assert_eq!(r7.vetted_class, s.truth[7]);
    assert_eq!(r7.phot_class.map(VerdictClass::from), Some(s.phot[7]));
    assert_relative_eq!(r7.ra.unwrap(), 10.07);
    assert_relative_eq!(r7.colours()[0].unwrap(), 0.5);
    assert_eq!(r7.inspectors, vec!["ana", "ben"]);

    let opts = export::ExportOptions {
        min_confidence: Some(Confidence::Solid),
        exclude_flags: vec![Flag::LowSignal],
    };
    let out = c.exports_dir().join("solid.csv");
    let sum = export::export_campaign(&c, &out, &opts).unwrap();
    let want = (0..200)
        .filter(|&i| {
            let adjudicated = (N_AGREED..N_AGREED + N_CONFLICT).contains(&i);
            let conf = if adjudicated {
                Confidence::Certain
            } else {
                s.conf[i]
            };
            let low = !adjudicated && s.flags[i].contains(&Flag::LowSignal);
            conf >= Confidence::Solid && !low
        })
        .count();
    assert_eq!(sum.rows, want);
    assert_eq!(sum.filtered, 200 - want);
    let (rows, prov) = export::read(&out).unwrap();
    assert_eq!(rows.len(), want);
    assert_eq!(prov.min_confidence, Some(Confidence::Solid));
    assert!(rows.iter().all(|r| r.confidence >= Some(Confidence::Solid)));
}

#[test]
fn command_line_merge_export_report() {
    let (c, _) = build_campaign("campaign_cli");
    let exe = env!("CARGO_BIN_EXE_zvet");
    let run = |args: &[&str]| {
        let o = std::process::Command::new(exe).args(args).output().unwrap();
        let text = String::from_utf8_lossy(&o.stdout).into_owned() + &String::from_utf8_lossy(&o.stderr);
        (o.status.success(), text)
    };
    let dir = c.dir().to_str().unwrap();
    let (ok, text) = run(&["merge", dir]);
    assert!(ok, "{text}");
    assert!(text.contains("adjudicated  10"), "{text}");
    assert!(text.contains("ana – ben: 40 in common"), "{text}");
    let out = c.exports_dir().join("cli.csv");
    let (ok, text) = run(&[
        "export",
        dir,
        "--out",
        out.to_str().unwrap(),
        "--min-confidence",
        "certain",
        "--exclude-flags",
        "blend,low_signal",
    ]);
    assert!(ok, "{text}");
    assert!(out.exists());
    let (ok, text) = run(&["export", dir, "--out", "x.csv", "--min-confidence", "sure"]);
    assert!(!ok && text.contains("expected one of"), "{text}");
    let rep = c.dir().join("rep");
    let (ok, text) = run(&["report", dir, "--out", rep.to_str().unwrap()]);
    assert!(ok, "{text}");
    assert!(rep.join("report.html").exists());
    let (ok, text) = run(&["campaign", "status", dir]);
    assert!(ok && text.contains("ben"), "{text}");
}

/// A campaign over real files: spectra written as text tables (simulated
/// from the built-in templates), a catalogue with non-default column names;
/// `load_objects` joins them and `fit_objects` fills `fits.jsonl`.
#[test]
fn campaign_over_spectrum_files_loads_and_fits() {
    use rand::SeedableRng;
    use zvet::fit::synth::{simulate, SimSpec};
    let dir = support::scratch("campaign_files");
    let spectra = dir.join("spectra");
    std::fs::create_dir_all(&spectra).unwrap();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
    let truth = [(ObjectClass::Galaxy, 0.35), (ObjectClass::Quasar, 2.1)];
    for (k, (class, z)) in truth.iter().enumerate() {
        let spec = SimSpec {
            class: *class,
            z: *z,
            snr: 15.0,
            n: 2500,
            max_masks: 0,
            ..SimSpec::default()
        };
        let (s, _) = simulate(zvet::templates::builtin(), &spec, &mut rng).unwrap();
        let mut text = String::from("# wave flux err\n");
        for i in 0..s.wave().len() {
            let ivar = s.ivar()[i];
            text.push_str(&format!(
                "{} {} {}\n",
                s.wave()[i],
                s.flux()[i],
                1.0 / ivar.sqrt()
            ));
        }
        std::fs::write(spectra.join(format!("obj{k}.txt")), text).unwrap();
    }
    std::fs::write(spectra.join("broken.txt"), "not a spectrum\n").unwrap();
    let cat = dir.join("cat.csv");
    std::fs::write(
        &cat,
        "OBJ,RA,DEC,pc\nobj0,1.5,2.5,galaxy\nobj1,3.5,4.5,star\nobj9,0,0,star\n",
    )
    .unwrap();
    let columns = BTreeMap::from([
        ("id".to_string(), "OBJ".to_string()),
        ("phot_class".to_string(), "pc".to_string()),
    ]);
    let c = Campaign::init(
        &dir.join("camp"),
        &InitOptions {
            spectra: vec![spectra],
            catalog: Some(cat),
            columns,
            ..InitOptions::default()
        },
    )
    .unwrap();
    let (mut objects, problems) = c.load_objects().unwrap();
    assert_eq!(objects.len(), 2, "{problems:?}");
    assert!(problems.iter().any(|p| p.contains("broken.txt")), "{problems:?}");
    assert_eq!(objects[0].id(), "obj0");
    assert_eq!(
        objects[1].catalog.as_ref().unwrap().phot_class,
        Some(ObjectClass::Star)
    );
    assert_relative_eq!(objects[0].catalog.as_ref().unwrap().ra.unwrap(), 1.5);
    let (n, failed) = c.fit_objects(&mut objects, false).unwrap();
    assert_eq!((n, failed.len()), (2, 0));
    // The engine recovers the simulated redshifts; the cache gives them back.
    let (objects, _) = Campaign::open(c.dir()).unwrap().load_objects().unwrap();
    for (o, (class, z)) in objects.iter().zip(truth) {
        let best = o.fit.as_ref().unwrap().best().unwrap().clone();
        assert_eq!(best.class, class);
        assert!((best.z - z).abs() / (1.0 + z) < 0.002, "{} {}", best.z, z);
    }
    // Nothing left to fit.
    let mut objects = objects;
    assert_eq!(c.fit_objects(&mut objects, false).unwrap().0, 0);
}
