/*!
Templates trained from vetted spectra: the principal-angle code against
scipy, recovery of a known basis from simulated spectra (noise, gaps, random
redshifts, a few wrong redshifts), refitting with the trained set, the set
on disk, and a round trip through a vetted demo campaign.
*/
use crate::support;
use nalgebra::DMatrix;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use std::collections::BTreeMap;
use zvet::campaign::{Campaign, InitOptions};
use zvet::fit::{Engine, FitConfig};
use zvet::review::{Change, Confidence, VerdictClass, ZSource};
use zvet::spectrum::SpectrumMeta;
use zvet::templates::pca::principal_angles;
use zvet::templates::train::{self, Selection, TrainOptions, TrainingSpectrum};
use zvet::templates::{self, FitMode};
use zvet::{ObjectClass, Spectrum};

/// Principal angles against scipy.linalg.subspace_angles, recorded by
/// tests/scripts/subspace_angles.py in tests/data/train/subspace_angles.json
/// (random pairs, pairs a tiny rotation apart, unequal dimensions).
#[test]
fn principal_angles_match_scipy() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/train/subspace_angles.json");
    let v: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    let mat = |m: &serde_json::Value| {
        let rows: Vec<Vec<f64>> = serde_json::from_value(m.clone()).unwrap();
        DMatrix::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
    };
    let cases = v["cases"].as_array().unwrap();
    assert!(cases.len() >= 9);
    for c in cases {
        let want: Vec<f64> = serde_json::from_value(c["angles"].clone()).unwrap();
        let got = principal_angles(&mat(&c["a"]), &mat(&c["b"])).unwrap();
        assert_eq!(got.len(), want.len(), "{}", c["name"]);
        for (g, w) in got.iter().zip(&want) {
            // relative 1e-6 also for angles of 1e-9 rad (the sine branch)
            assert!(
                (g - w).abs() <= 1e-6 * w + 1e-13,
                "{}: {got:?} vs scipy {want:?}",
                c["name"]
            );
        }
    }
}

// --- A known rest-frame basis and spectra simulated from it ----------------

/// Gaussian of unit height.
fn g(lam: f64, mu: f64, sigma: f64) -> f64 {
    (-0.5 * ((lam - mu) / sigma).powi(2)).exp()
}

/// Three rest-frame components (vacuum Å): an old population (blue-falling
/// continuum, 4000 Å break, Ca II H and K, G band, Mg b, Na D absorption), a
/// star-forming one (blue continuum, [O II], Hβ, [O III], Hα, [N II]
/// emission), and a red continuum. Line wavelengths are vacuum values (NIST
/// atomic spectra database, from memory); the shapes are invented for the
/// test and only their span matters.
fn basis(k: usize, lam: f64) -> f64 {
    let x = lam / 5000.0;
    match k {
        0 => {
            let break4000 = 0.6 + 0.4 / (1.0 + (-(lam - 4000.0) / 40.0).exp());
            let abs = [
                (3934.8, 0.5),
                (3969.6, 0.45),
                (4305.6, 0.2),
                (5176.7, 0.2),
                (5891.6, 0.25),
            ]
            .iter()
            .map(|(mu, d)| d * g(lam, *mu, 7.0))
            .sum::<f64>();
            break4000 * x.powf(0.5) * (1.0 - abs)
        }
        1 => {
            let em = [
                (3728.5, 1.5),
                (4862.7, 0.8),
                (4960.3, 0.6),
                (5008.2, 1.8),
                (6564.6, 2.5),
                (6585.3, 0.8),
            ]
            .iter()
            .map(|(mu, a)| a * g(lam, *mu, 6.0))
            .sum::<f64>();
            0.3 * x.powf(-1.5) + em
        }
        _ => x.powf(2.0) * (1.0 + 0.3 * g(lam, 7000.0, 600.0)),
    }
}

/// Basis `k` averaged over a template pixel centred at log10 λ `ll` of
/// width `dll` in log10 λ, widened by the simulated spectrograph's 2.4 Å
/// pixels at the median redshift (the rest-frame flux a resampled pixel holds).
fn pixel_mean(k: usize, ll: f64, dll: f64) -> f64 {
    let lam = 10f64.powf(ll);
    let width = lam * dll * std::f64::consts::LN_10 + 2.4 / 1.18;
    let n = 24;
    (0..n)
        .map(|i| basis(k, lam + width * ((i as f64 + 0.5) / n as f64 - 0.5)))
        .sum::<f64>()
        / n as f64
}

const OBS_LO: f64 = 3800.0;
const OBS_HI: f64 = 8600.0;

/// One simulated galaxy at redshift `z`: amplitudes (1–2, 0–1.5, 0–1) of
/// the basis, 2.4 Å pixels, noise 2 % of the mean flux (S/N ≈ 50 per pixel),
/// a masked stretch of 120 Å and a few dead pixels.
fn simulate(id: &str, z: f64, rng: &mut ChaCha8Rng) -> Spectrum {
    let a = [
        rng.random_range(1.0..2.0),
        rng.random_range(0.0..1.5),
        rng.random_range(0.0..1.0),
    ];
    let n = ((OBS_HI - OBS_LO) / 2.4) as usize;
    let wave: Vec<f64> = (0..n).map(|i| OBS_LO + 2.4 * i as f64).collect();
    let model: Vec<f64> = wave
        .iter()
        .map(|w| (0..3).map(|k| a[k] * basis(k, w / (1.0 + z))).sum())
        .collect();
    let sigma = 0.02 * model.iter().sum::<f64>() / n as f64;
    let noise = Normal::new(0.0, sigma).unwrap();
    let flux: Vec<f64> = model.iter().map(|m| m + noise.sample(rng)).collect();
    let gap = rng.random_range(OBS_LO..OBS_HI - 120.0);
    let good: Vec<bool> = wave
        .iter()
        .enumerate()
        .map(|(i, w)| !(gap..gap + 120.0).contains(w) && i % 397 != 5)
        .collect();
    Spectrum::new(
        wave,
        flux,
        Some(vec![1.0 / (sigma * sigma); n]),
        Some(good),
        SpectrumMeta {
            id: id.into(),
            ..Default::default()
        },
    )
    .unwrap()
}

/// The training set: 44 galaxies at random z in 0.02–0.35, of which 2 carry a
/// wrong "vetted" redshift (off by 0.08) that the outlier rejection must catch.
fn training_set() -> (Vec<TrainingSpectrum>, Vec<String>) {
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let mut out = Vec::new();
    let mut wrong = Vec::new();
    for i in 0..44 {
        let z = rng.random_range(0.02..0.35);
        let id = format!("sim{i:03}");
        let s = simulate(&id, z, &mut rng);
        let vetted = if i % 23 == 4 {
            wrong.push(id.clone());
            z + 0.08
        } else {
            z
        };
        out.push(TrainingSpectrum {
            id,
            class: ObjectClass::Galaxy,
            z: vetted,
            group: None,
            spectrum: s,
        });
    }
    (out, wrong)
}

fn options() -> TrainOptions {
    TrainOptions {
        name: "simtrained".into(),
        components: 3,
        // a coarser grid than the built-in one keeps the debug-build test quick
        dloglam: 3e-4,
        iterations: 60,
        // the simulated spectra have no template mismatch to allow for
        sys_floor: 0.0,
        source: "simulated spectra".into(),
        ..TrainOptions::default()
    }
}

/// The training set and the set trained from it (trained once for the tests
/// that share it).
fn trained() -> &'static (Vec<String>, train::Trained) {
    static T: std::sync::OnceLock<(Vec<String>, train::Trained)> = std::sync::OnceLock::new();
    T.get_or_init(|| {
        let (spectra, wrong) = training_set();
        (wrong, train::train(&spectra, &options()).unwrap())
    })
}

/// Training recovers the simulator's basis: the largest principal angle
/// between span(trained templates) and span(true basis, averaged over each
/// template pixel) on the trained range stays below 10°, with the two
/// wrong-redshift spectra rejected. The bound is the noise limit (by
/// construction of the test): each pixel's component values are solved from
/// the ~30 spectra covering it, so the weakest direction (coefficient rms
/// ≈ 1.5 in an orthonormal basis) is known per pixel to 0.02/(√30·1.5) and
/// over ~1500 pixels to ≈ 0.07 rad (4°); measured 5.2°, and 0.5° when the
/// simulation's noise is cut a thousandfold.
#[test]
fn training_recovers_a_known_basis_and_rejects_wrong_redshifts() {
    let (wrong, t) = trained();
    let gal = t.set.class(ObjectClass::Galaxy).unwrap();
    assert_eq!(gal.mode, FitMode::Basis);
    assert_eq!(gal.templates.len(), 3);
    let summary = &t.provenance.groups[0];
    // every wrong redshift is set aside; at most 2 of the 42 good spectra go
    // with them (χ² clipping also catches a good spectrum in the tail)
    assert!(
        wrong.iter().all(|w| summary.rejected.contains(w)),
        "rejected {:?}",
        summary.rejected
    );
    assert!(
        summary.rejected.len() <= wrong.len() + 2,
        "rejected {:?}",
        summary.rejected
    );
    assert_eq!(summary.spectra_used, 44 - summary.rejected.len());
    assert!(summary.power_explained.windows(2).all(|w| w[0] <= w[1]));
    assert!(*summary.power_explained.last().unwrap() > 0.99);
    // the rest range covered by at least 9 spectra (3K): inside the
    // simulated 3800/1.35 … 8600/1.02 Å and most of it
    let (lo, hi) = summary.rest_range;
    assert!(
        (2800.0..3200.0).contains(&lo) && hi > 7600.0 && hi < 8440.0,
        "{lo}–{hi}"
    );
    // compare on the trained range (the templates continue flat beyond it)
    let t0 = &gal.templates[0];
    let j0 = (0..t0.flux.len()).find(|&j| t0.wave(j) >= lo * 1.0001).unwrap();
    let j1 = (0..t0.flux.len())
        .rev()
        .find(|&j| t0.wave(j) <= hi / 1.0001)
        .unwrap();
    let p = j1 - j0 + 1;
    let trained = DMatrix::from_fn(p, 3, |j, c| gal.templates[c].flux[j0 + j]);
    let truth = DMatrix::from_fn(p, 3, |j, c| {
        pixel_mean(c, t0.loglam0 + (j0 + j) as f64 * t0.dloglam, t0.dloglam)
    });
    let ang = principal_angles(&truth, &trained).unwrap();
    let deg: Vec<f64> = ang.iter().map(|a| a.to_degrees()).collect();
    eprintln!("principal angles (deg) trained vs true basis: {deg:?}");
    assert!(deg[0] < 10.0, "angles {deg:?}");
    // the built-in classes that were not trained are kept
    assert!(t.set.class(ObjectClass::Quasar).is_some() && t.set.class(ObjectClass::Star).is_some());
    assert_eq!(
        t.provenance.from_builtin,
        vec![ObjectClass::Quasar, ObjectClass::Star]
    );
}

/// The trained set, written in the layout of `templates-spectra/` and read
/// back, refits new spectra from the same simulator to their true redshift:
/// |Δz|/(1+z) ≤ 3e-4 (90 km/s), under half of a trained-template pixel
/// (3e-4 in log10 λ ≈ 207 km/s) — by construction of the test.
#[test]
fn the_trained_set_refits_simulated_spectra_to_the_truth() {
    let (_, t) = trained();
    let dir = support::scratch("train_refit");
    train::write_trained(t, &dir).unwrap();
    let set = templates::read_set(&dir).unwrap();
    assert_eq!(set.name, "simtrained");
    assert!(set.provenance.contains("Bailey 2012"));
    let d = templates::read_descriptor(&dir.join("simtrained.json")).unwrap();
    let gen = d.generator.unwrap();
    assert_eq!(gen["spectra_in"], 44);
    assert_eq!(gen["groups"][0]["components"], 3);
    assert!(gen["groups"][0]["power_explained"].as_array().unwrap().len() == 3);
    let engine = Engine::new(
        &set,
        FitConfig {
            classes: vec![ObjectClass::Galaxy],
            z_galaxy: (0.0, 0.45),
            ..FitConfig::default()
        },
    )
    .unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(99);
    for i in 0..4 {
        let z = rng.random_range(0.03..0.33);
        let s = simulate(&format!("new{i}"), z, &mut rng);
        let f = engine.fit(&s).unwrap();
        let b = f.best().unwrap();
        let dz = (b.z - z).abs() / (1.0 + z);
        assert!(dz <= 3e-4, "spectrum {i}: z {} vs true {z} (Δ {dz:.2e})", b.z);
        assert!(f.chi2_reduced < 1.5, "reduced χ² {}", f.chi2_reduced);
    }
}

/// Unusable input: bad redshifts and too few spectra come back as problems
/// or a clear error, never a panic.
#[test]
fn bad_training_input_is_reported() {
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let mk = |z: f64, rng: &mut ChaCha8Rng| TrainingSpectrum {
        id: format!("z{z}"),
        class: ObjectClass::Galaxy,
        z,
        group: None,
        spectrum: simulate("x", 0.1, rng),
    };
    let spectra = vec![mk(f64::NAN, &mut rng), mk(-3.0, &mut rng), mk(0.1, &mut rng)];
    match train::train(&spectra, &options()) {
        Err(train::TrainError::Nothing(p)) => {
            let text = p.join("\n");
            assert!(
                text.contains("cannot be used") && text.contains("galaxy: not trained"),
                "{text}"
            );
        }
        other => panic!("expected nothing trained, got {other:?}"),
    }
    // a table with a missing file, a bad class and a bad z
    let dir = support::scratch("train_table_bad");
    let table = dir.join("t.csv");
    std::fs::write(
        &table,
        "path,class,z\nnone.fits,galaxy,0.1\nx.fits,planet,0.1\nx.fits,galaxy,abc\n",
    )
    .unwrap();
    let (v, problems) = train::from_table(&table, &Default::default(), &Selection::default()).unwrap();
    assert!(v.is_empty());
    assert_eq!(problems.len(), 3, "{problems:?}");
    std::fs::write(&table, "file,kind\n").unwrap();
    assert!(train::from_table(&table, &Default::default(), &Selection::default()).is_err());
}

/// Round trip through the demo survey: written to files, made a campaign,
/// vetted in the review log with the generator's truth (a few verdicts only
/// "tentative"), trained from the campaign with the command-line tool, then a
/// second campaign fitted with the trained set finds the true redshifts of
/// ordinary galaxies.
#[test]
fn demo_campaign_round_trip() {
    use zvet::demo::DemoKind;
    let n_obj = 90;
    let survey = zvet::demo::generate_n(zvet::demo::DEFAULT_SEED, n_obj);
    let dir = support::scratch("train_demo");
    let w = zvet::demo::write_survey(&survey, &dir.join("files")).unwrap();
    let mut c = Campaign::init(
        &dir.join("vetted"),
        &InitOptions {
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            ..InitOptions::default()
        },
    )
    .unwrap();
    let mut tentative = Vec::new();
    {
        let (mut log, _) = c.open_review_log("ana").unwrap();
        for (k, t) in survey.truth.iter().enumerate() {
            let class = t.class.map_or(VerdictClass::Unclear, VerdictClass::from);
            let confidence = if k % 10 == 3 {
                tentative.push(t.id.clone());
                Confidence::Probable
            } else {
                Confidence::Secure
            };
            let change = Change::Verdict {
                class,
                z: t.class.map(|_| t.z),
                z_err: None,
                source: ZSource::Typed,
                confidence,
            };
            log.record(&t.id, None, change).unwrap();
        }
    }
    // The library's view: tentative verdicts and flagged objects are left out.
    let (vetted, _) = train::from_campaign(&c, &Selection::default()).unwrap();
    assert!(vetted.iter().all(|v| !tentative.contains(&v.id)));
    let n_class = |k: ObjectClass| vetted.iter().filter(|v| v.class == k).count();
    assert!(
        n_class(ObjectClass::Galaxy) >= 20,
        "{}",
        n_class(ObjectClass::Galaxy)
    );

    // The command line, as a user types it.
    let out = dir.join("trained");
    let cli = <zvet::cli::Cli as clap::Parser>::try_parse_from([
        "zvet",
        "templates",
        "train",
        c.dir().to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--class",
        "galaxy,star",
        "--components",
        "3",
        "--dloglam",
        "3e-4",
    ])
    .unwrap();
    zvet::cli::run(cli.command.unwrap()).unwrap();
    let set = templates::read_set(&out).unwrap();
    assert_eq!(set.class(ObjectClass::Galaxy).unwrap().templates.len(), 3);
    assert_eq!(set.class(ObjectClass::Star).unwrap().mode, FitMode::EachAlone);
    let d = templates::read_descriptor(&out.join("trained.json")).unwrap();
    let gen = d.generator.unwrap();
    assert!(gen["source"].as_str().unwrap().contains("certainty >= secure"));
    assert_eq!(gen["from_builtin"], serde_json::json!(["quasar"]));

    // A campaign that fits with the trained set.
    let ordinary: Vec<usize> = (0..n_obj)
        .filter(|&i| matches!(survey.truth[i].kind, DemoKind::Passive | DemoKind::StarForming))
        .take(4)
        .collect();
    let files = dir.join("refit");
    std::fs::create_dir_all(&files).unwrap();
    for &i in &ordinary {
        let id = survey.truth[i].id.clone();
        std::fs::copy(
            w.spectra.join(format!("{id}.fits")),
            files.join(format!("{id}.fits")),
        )
        .unwrap();
    }
    let c2 = Campaign::init(
        &dir.join("refit-campaign"),
        &InitOptions {
            spectra: vec![files],
            templates: Some(out.clone()),
            engine: zvet::campaign::EngineSettings {
                dloglam: 2e-4,
                classes: vec![ObjectClass::Galaxy, ObjectClass::Star],
                ..Default::default()
            },
            ..InitOptions::default()
        },
    )
    .unwrap();
    let (mut objects, problems) = c2.load_objects().unwrap();
    assert!(problems.is_empty(), "{problems:?}");
    let (fitted, failed) = c2.fit_objects(&mut objects, false).unwrap();
    assert_eq!((fitted, failed.len()), (ordinary.len(), 0), "{failed:?}");
    let truth: BTreeMap<&str, f64> = survey.truth.iter().map(|t| (t.id.as_str(), t.z)).collect();
    for o in &objects {
        let b = o.fit.as_ref().unwrap().best().unwrap();
        let z = truth[o.id()];
        // the recovery tests' success threshold, 5e-4 (1+z) (150 km/s): the
        // trained set must find these as well as the built-in set does
        assert!(
            b.class == ObjectClass::Galaxy && (b.z - z).abs() <= 5e-4 * (1.0 + z),
            "{}: {} z {} vs {z}",
            o.id(),
            b.class,
            b.z
        );
        assert!(b.template.starts_with("galaxy"), "{}", b.template);
    }
}
