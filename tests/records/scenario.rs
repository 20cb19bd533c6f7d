//! The test campaign: 200 objects, three inspectors, a catalogue and fits,
//! built from a scenario whose numbers the tests know independently.
use super::{class, data, strings};
use crate::support;
use zvet::campaign::{Campaign, InitOptions};
use zvet::fit::{Candidate, FitResult, Warnings};
use zvet::review::merge::CLASSES;
use zvet::review::{Change, Confidence, Flag, VerdictClass, ZSource};
use zvet::ObjectClass;
/// The scenario of [`build_campaign`], kept to compute expectations.
pub struct Scenario {
    pub ids: Vec<String>,
    pub truth: Vec<VerdictClass>,
    pub phot: Vec<VerdictClass>,
    /// ana's redshift per object (None for unclear).
    pub z: Vec<Option<f64>>,
    pub conf: Vec<Confidence>,
    pub catastrophic: Vec<usize>,
    pub flags: Vec<Vec<Flag>>,
}

/// Objects both ana and ben reviewed and agree on.
pub const N_AGREED: usize = 30;
/// Objects after those where ben disagrees on class.
pub const N_CONFLICT: usize = 10;

/// ana's redshift for object i of class c.
pub fn ana_z(i: usize, c: VerdictClass) -> Option<f64> {
    match c {
        VerdictClass::Galaxy => Some(0.1 + 0.005 * i as f64),
        VerdictClass::Quasar => Some(1.0 + 0.01 * i as f64),
        VerdictClass::Star => Some(0.0),
        VerdictClass::Unclear => None,
    }
}

/// The next class in the fixed order (ben's disagreement).
pub fn other_class(c: VerdictClass) -> VerdictClass {
    let i = CLASSES.iter().position(|x| *x == c).unwrap();
    CLASSES[(i + 1) % CLASSES.len()]
}

/// A campaign of 200 objects whose vetted and photometric classes are the
/// scikit-learn "200 objects" case: ana reviews all, ben the first 40 (agrees
/// on 30, disagrees on class on 10), the adjudicator settles those 10 with
/// ana's class. Automatic fits agree with ana except for a few catastrophic
/// redshifts.
pub fn build_campaign(name: &str) -> (Campaign, Scenario) {
    let r = data("sklearn_reference.json");
    let case = &r["confusion"][0];
    assert_eq!(case["name"], "200 objects");
    let truth: Vec<VerdictClass> = strings(&case["truth"]).iter().map(|s| class(s)).collect();
    let phot: Vec<VerdictClass> = strings(&case["pred"]).iter().map(|s| class(s)).collect();
    let n = truth.len();
    let ids: Vec<String> = (0..n).map(|i| format!("o{i:03}")).collect();
    let z: Vec<Option<f64>> = (0..n).map(|i| ana_z(i, truth[i])).collect();
    let conf: Vec<Confidence> = (0..n)
        .map(|i| Confidence::ALL[i % Confidence::ALL.len()])
        .collect();
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
                per_class: vec![],
                refit_kept: false,
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
            ben.record(&ids[i], None, verdict(cl, zz, Confidence::Secure))
                .unwrap();
        }
        let (mut judge, _) = c.open_review_log("judge").unwrap();
        for i in N_AGREED..N_AGREED + N_CONFLICT {
            judge
                .record(&ids[i], None, verdict(truth[i], z[i], Confidence::Secure))
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
