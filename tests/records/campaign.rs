//! Campaign folders: reopen, merge, report and export built from the logs,
//! the command line, and a campaign over real spectrum files.
use super::data;
use super::scenario::{build_campaign, other_class, N_AGREED, N_CONFLICT};
use crate::support;
use approx::assert_relative_eq;
use serde_json::Value;
use std::collections::BTreeMap;
use zvet::campaign::{Campaign, InitOptions};
use zvet::export;
use zvet::review::merge::ConsensusState;
use zvet::review::stats::cohen_kappa;
use zvet::review::{Confidence, Flag, VerdictClass};
use zvet::ObjectClass;

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
        let zv = if i < N_AGREED && s.conf[i] != Confidence::Secure {
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
    let mut want_conf = [0usize; 4];
    for i in 0..200 {
        let level = if (N_AGREED..N_AGREED + N_CONFLICT).contains(&i) {
            Confidence::Secure
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
    let r7 = rows.iter().find(|r| r.catalog.id == "o007").unwrap();
    assert_eq!(r7.vetted_class, s.truth[7]);
    assert_eq!(r7.catalog.phot_class.map(VerdictClass::from), Some(s.phot[7]));
    assert_relative_eq!(r7.catalog.ra.unwrap(), 10.07);
    assert_relative_eq!(r7.colours()[0].unwrap(), 0.5);
    assert_eq!(r7.inspectors, vec!["ana", "ben"]);

    let opts = export::ExportOptions {
        min_confidence: Some(Confidence::Secure),
        exclude_flags: vec![Flag::LowSignal],
    };
    let out = c.exports_dir().join("solid.csv");
    let sum = export::export_campaign(&c, &out, &opts).unwrap();
    let want = (0..200)
        .filter(|&i| {
            let adjudicated = (N_AGREED..N_AGREED + N_CONFLICT).contains(&i);
            let conf = if adjudicated {
                Confidence::Secure
            } else {
                s.conf[i]
            };
            let low = !adjudicated && s.flags[i].contains(&Flag::LowSignal);
            conf >= Confidence::Secure && !low
        })
        .count();
    assert_eq!(sum.rows, want);
    assert_eq!(sum.filtered, 200 - want);
    let (rows, prov) = export::read(&out).unwrap();
    assert_eq!(rows.len(), want);
    assert_eq!(prov.min_confidence, Some(Confidence::Secure));
    assert!(rows.iter().all(|r| r.confidence >= Some(Confidence::Secure)));
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

/// The report on (the first objects of) the demo survey, written to files,
/// made a campaign, fitted and reviewed: every file is written and its
/// numbers match the log and the survey's truth.
#[test]
fn report_on_the_demo_survey() {
    use zvet::review::{Change, ZSource};
    // Few objects and a coarser grid keep the engine's share of the suite small.
    let n_obj = 6;
    let survey = zvet::demo::generate_n(zvet::demo::DEFAULT_SEED, n_obj);
    let dir = support::scratch("demo_report");
    let w = zvet::demo::write_survey(&survey, &dir.join("files")).unwrap();
    let mut c = Campaign::init(
        &dir.join("campaign"),
        &InitOptions {
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            engine: zvet::campaign::EngineSettings {
                dloglam: 2e-4,
                ..Default::default()
            },
            ..InitOptions::default()
        },
    )
    .unwrap();
    let (mut objects, problems) = c.load_objects().unwrap();
    assert!(problems.is_empty(), "{problems:?}");
    assert_eq!(objects.len(), n_obj);
    let (fitted, failed) = c.fit_objects(&mut objects, false).unwrap();
    assert_eq!(fitted + failed.len(), n_obj);
    // The inspector vets every object with the generator's truth.
    let truth: BTreeMap<&str, &zvet::demo::DemoTruth> =
        survey.truth.iter().map(|t| (t.id.as_str(), t)).collect();
    {
        let (mut log, _) = c.open_review_log("ana").unwrap();
        for o in &objects {
            let t = truth[o.id()];
            let class = t.class.map_or(VerdictClass::Unclear, VerdictClass::from);
            let z = t.class.map(|_| t.z);
            let change = Change::Verdict {
                class,
                z,
                z_err: None,
                source: ZSource::Typed,
                confidence: Confidence::Secure,
            };
            let seen = o.fit.as_ref().and_then(zvet::review::FitSeen::of);
            log.record(o.id(), seen, change).unwrap();
        }
    }
    let input = zvet::report::input_from_campaign(&c).unwrap();
    let n = zvet::report::numbers(&input);
    let out = c.exports_dir().join("report");
    zvet::report::write_report(&out, &n).unwrap();
    for f in zvet::report::REPORT_FILES {
        assert!(out.join(f).exists(), "{f}");
    }
    // Photometric classes: right exactly where the generator says so.
    let classed: Vec<_> = survey.truth.iter().filter(|t| t.class.is_some()).collect();
    let diag: usize = (0..3).map(|i| n.photometric.matrix[i][i]).sum();
    assert_eq!(n.photometric.n, n_obj);
    assert_eq!(diag, classed.iter().filter(|t| !t.phot_wrong).count());
    // Redshifts: one pair per classed object with a fit; catastrophic ones
    // counted directly from the fits and the truth.
    let fits: BTreeMap<&str, f64> = objects
        .iter()
        .filter_map(|o| Some((o.id(), o.fit.as_ref()?.best()?.z)))
        .collect();
    let pairs: Vec<(f64, f64)> = classed
        .iter()
        .filter_map(|t| Some((*fits.get(t.id.as_str())?, t.z)))
        .collect();
    assert!(pairs.len() >= 3, "{pairs:?}");
    assert_eq!(n.z_pairs.len(), pairs.len());
    let bad = pairs
        .iter()
        .filter(|(a, z)| (a - z).abs() / (1.0 + z) > 0.01)
        .count();
    assert_eq!(n.z_catastrophic, bad);
    assert_eq!(n.inspectors[0].reviewed, n_obj);
    assert_eq!(n.consensus["single"], n_obj);
}

#[test]
fn campaign_export_keeps_the_line_columns_of_the_cached_fits() {
    // The campaign export reads only fit summaries (bounded memory); the
    // line cells must still come through from the cache's line measurements.
    let (c, s) = build_campaign("campaign_export_lines");
    let (mut records, _) = c.load_records().unwrap();
    let r7 = records.get_mut("o007").unwrap();
    let fit = r7.fit.as_mut().unwrap();
    let z = fit.best().unwrap().z;
    fit.lines = vec![zvet::fit::LineMeasurement {
        name: "Hα".into(),
        rest_wave: 6564.61,
        obs_wave: 6564.61 * (1.0 + z),
        flux: 123.5,
        flux_err: 4.5,
        sigma_kms: 80.0,
        ew_rest: 31.0,
        snr: 123.5 / 4.5,
        width_fitted: true,
        continuum: 1.0,
        abs_ew_rest: None,
    }];
    let all: Vec<_> = records.into_values().collect();
    c.save_records(&all).unwrap();
    let out = c.exports_dir().join("lines.csv");
    export::export_campaign(&c, &out, &Default::default()).unwrap();
    let (rows, _) = export::read(&out).unwrap();
    let row = rows.iter().find(|r| r.catalog.id == "o007").unwrap();
    // lines are exported when the vetted z is the automatic one (within the
    // export's velocity limit), as o007's is in the scenario
    let dv = zvet::fit::velocity_sep_kms(z, row.vetted_z.unwrap());
    assert!(
        dv <= export::LINE_EXPORT_MAX_DV_KMS,
        "o007: vetted z {dv} km/s from the fit"
    );
    assert_eq!(row.lines[0].flux, Some(123.5));
    assert_eq!(row.lines[0].flux_err, Some(4.5));
    assert_eq!(row.lines[0].ew, Some(31.0));
    assert!(s.ids.contains(&"o007".to_string()));
    // every other row has no line values (their fits measured none)
    assert!(rows
        .iter()
        .filter(|r| r.catalog.id != "o007")
        .all(|r| r.lines[0].flux.is_none()));
}

#[test]
fn campaign_export_marks_the_audit_sample_and_weights_it() {
    // An audit sample of 20 of the scenario's 200 objects, drawn by
    // photometric class; every object of the scenario is vetted, so each
    // sampled object's weight is N_h / n_h, the inverse of its inclusion
    // probability, and every other object's weight is 1.
    use zvet::audit::campaign::{save_sample, view};
    use zvet::audit::sample::{Allocation, AuditSample};
    let (c, _) = build_campaign("campaign_export_audit");
    let v = view(&c).unwrap();
    let sample = AuditSample::draw(&v.units, "phot_class", 20, Allocation::Equal, 5).unwrap();
    save_sample(&c, &sample).unwrap();
    let out = c.exports_dir().join("audit.csv");
    export::export_campaign(&c, &out, &Default::default()).unwrap();
    let (rows, _) = export::read(&out).unwrap();
    let index = sample.index();
    let mut total_weight = 0.0;
    for r in &rows {
        match index.get(r.catalog.id.as_str()) {
            Some(&(h, _)) => {
                assert!(r.in_audit_sample, "{}", r.catalog.id);
                let st = &sample.strata[h];
                assert_relative_eq!(
                    r.weight.unwrap(),
                    st.population as f64 / st.sampled as f64,
                    max_relative = 1e-5
                );
                total_weight += r.weight.unwrap();
            }
            None => {
                assert!(!r.in_audit_sample);
                assert_eq!(r.weight, Some(1.0));
            }
        }
    }
    // the weights of the sample add up to the catalogue (Horvitz–Thompson)
    assert_relative_eq!(total_weight, 200.0, max_relative = 1e-4);
}

#[test]
fn a_damaged_audit_sample_loses_the_audit_section_not_the_report() {
    let (c, _) = build_campaign("campaign_bad_audit");
    let sample = c.dir().join(zvet::audit::SAMPLE_FILE);
    std::fs::write(&sample, "{\"format\": 1, \"seed\": 3").unwrap();
    let input = zvet::report::input_from_campaign(&c).unwrap();
    assert!(input.audit_sample.is_none());
    assert!(
        input
            .problems
            .iter()
            .any(|p| p.contains("audit sample left out") && p.contains("audit-sample.json")),
        "{:?}",
        input.problems
    );
    // drawing over it needs --replace, and the error says so
    let zvet = env!("CARGO_BIN_EXE_zvet");
    let out = std::process::Command::new(zvet)
        .args(["campaign", "sample"])
        .arg(c.dir())
        .args(["--size", "10"])
        .output()
        .unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("audit-sample.json") && err.contains("--replace"),
        "{err}"
    );
    let out = std::process::Command::new(zvet)
        .args(["campaign", "sample"])
        .arg(c.dir())
        .args(["--size", "10", "--replace"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let s = zvet::audit::campaign::load_sample(&c)
        .unwrap()
        .expect("a new sample");
    assert_eq!(s.members.len(), 10);
}
