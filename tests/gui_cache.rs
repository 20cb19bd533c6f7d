//! A fitted campaign opened in the window, headless (egui_kittest): the
//! cached fits of `fits.jsonl` are used as they are (no object is refitted),
//! the χ²(z) curves are computed only for the object on screen and the next
//! few of the list, and the fits the window does make (objects the cache does
//! not hold yet) are written back to the campaign's cache — read back from the
//! file here and compared with what the window shows.
use egui_kittest::Harness;
use std::collections::BTreeSet;
use std::time::{Duration, Instant};
use zvet::campaign::{Campaign, InitOptions};
use zvet::demo;
use zvet::pipeline::FitRecord;
use zvet::ui::action::{Action, OpenKind};
use zvet::ui::jobs::CURVE_PREFETCH;
use zvet::ui::ZvetApp;

use super::gui::{fitted_objects, harness, log_path, press};

/// Objects in the campaign; the last [`NEW`] have no cached fit.
const N: usize = 9;
const NEW: usize = 2;

/// Run frames until `done` holds (at most 60 s).
fn settle(h: &mut Harness<'_, ZvetApp>, what: &str, done: impl Fn(&ZvetApp) -> bool) {
    let start = Instant::now();
    while !done(h.state()) {
        assert!(
            start.elapsed() < Duration::from_secs(60),
            "waited too long for {what}"
        );
        h.run_steps(1);
        std::thread::sleep(Duration::from_millis(20));
    }
}

fn record_text(r: &FitRecord) -> String {
    // NaN ≠ NaN, so records are compared as the JSON line the cache holds
    r.to_json_line().unwrap()
}

#[test]
fn a_cached_campaign_opens_without_refitting_and_new_fits_go_back_to_its_cache() {
    let (dir, log) = log_path("cache");
    let data = dir.path().join("data");
    // The first objects of the demo survey, whose fits the GUI tests share.
    let w = demo::write_survey(&demo::generate_n(demo::DEFAULT_SEED, N), &data).unwrap();
    let camp_dir = dir.path().join("camp");
    let camp = Campaign::init(
        &camp_dir,
        &InitOptions {
            name: Some("mudflat".into()),
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            ..Default::default()
        },
    )
    .unwrap();
    // Its cache holds fits of all but the last NEW objects (the fits of the
    // same spectra made in memory, as the other GUI tests use them).
    let (objects, _) = camp.load_objects().unwrap();
    assert_eq!(objects.len(), N);
    let cached: Vec<FitRecord> = objects[..N - NEW]
        .iter()
        .zip(fitted_objects())
        .map(|(o, m)| {
            assert_eq!(o.id(), m.id());
            let fit = m.fit.expect("fitted");
            FitRecord::fitted(fit, &zvet::pipeline::source_of(&o.spectrum), "chi2")
        })
        .collect();
    camp.save_records(&cached).unwrap();
    let new_ids: BTreeSet<String> = objects[N - NEW..].iter().map(|o| o.id().to_string()).collect();
    let before = std::fs::read_to_string(camp_dir.join("fits.jsonl")).unwrap();

    let mut h = harness(&log);
    h.state_mut()
        .apply(Action::Open(OpenKind::Campaign, vec![camp_dir.clone()]));
    settle(&mut h, "the campaign", |a| a.state.title == "mudflat");

    // Only the objects without a cached fit are fitted.
    assert_eq!(h.state().fit_progress().1, NEW, "automatic fits asked for");
    {
        let s = &h.state().state;
        for (i, o) in s.objects.iter().enumerate() {
            let has = s.fits[i].is_some();
            assert_eq!(has, !new_ids.contains(o.id()), "{}: fit from the cache", o.id());
        }
    }
    // The background fits finish and are written back; the shown object
    // gets its curves.
    settle(&mut h, "the new fits and the first curves", |a| {
        a.fit_progress().0 == NEW && a.state.current_fit().is_some_and(|f| !f.curves.is_empty())
    });
    // … and everything asked for is done (and taken in by a frame).
    settle(&mut h, "the background work", ZvetApp::background_idle);
    h.run_steps(2);
    // Curves only for the shown object and the next few in the list (and the
    // objects fitted here, whose fits come whole): every other cached fit is
    // still without them, i.e. nothing else was refitted.
    let s = &h.state().state;
    let pos = s.position().unwrap();
    let near: BTreeSet<usize> = s.order[pos..].iter().take(1 + CURVE_PREFETCH).copied().collect();
    let with_curves: Vec<&str> = (0..N)
        .filter(|i| s.objects.has_curves(*i))
        .map(|i| s.objects[i].id())
        .collect();
    for (i, o) in s.objects.iter().enumerate() {
        if !near.contains(&i) && !new_ids.contains(o.id()) {
            assert!(
                !s.objects.has_curves(i),
                "{} is neither shown nor next but has curves (curves on {with_curves:?})",
                o.id()
            );
        }
    }
    assert!(with_curves.len() < N, "{with_curves:?}");

    // The cache now holds the window's fits of the new objects, exactly
    // (written off the window's thread: frames go on while we wait).
    let (records, problems) = {
        let c = Campaign::open(&camp_dir).unwrap();
        let start = Instant::now();
        loop {
            let (r, p) = c.load_records().unwrap();
            if new_ids.iter().all(|id| r.contains_key(id)) || start.elapsed() > Duration::from_secs(30) {
                break (r, p);
            }
            h.run_steps(1);
            std::thread::sleep(Duration::from_millis(50));
        }
    };
    let s = &h.state().state;
    assert!(problems.is_empty(), "{problems:?}");
    assert_eq!(records.len(), N, "messages: {:?}", s.messages);
    for (i, o) in s.objects.iter().enumerate() {
        // the whole fit, as the window reads it when the object is shown
        let e = s.objects.load(i).unwrap();
        let shown = e.fit.clone().expect("fitted");
        let want = FitRecord::fitted(shown, &zvet::pipeline::source_of(&e.spectrum), "chi2");
        assert_eq!(
            record_text(&records[o.id()]),
            record_text(&want),
            "{}: the cache holds what the window shows",
            o.id()
        );
    }
    // The cached records were rewritten as they were.
    for line in before.lines() {
        let r = FitRecord::from_json_line(line).unwrap();
        assert_eq!(record_text(&records[&r.object_id]), record_text(&r));
    }

    // Moving on asks for the next object's curves (prefetched or computed now).
    press(&mut h, egui::Key::N);
    settle(&mut h, "the next object's curves", |a| {
        a.state.current_fit().is_some_and(|f| !f.curves.is_empty())
    });
}

/// A quick stand-in engine: every fit is a galaxy at z = 0.1 with one χ²(z)
/// curve of 2000 points (the window's memory rule, not the fit, is tested).
struct Quick;

impl zvet::ui::jobs::Fitter for Quick {
    fn fit(&self, s: &zvet::Spectrum) -> Result<zvet::fit::FitResult, String> {
        let z: Vec<f64> = (0..2000).map(|k| k as f64 * 1e-3).collect();
        Ok(zvet::fit::FitResult {
            object_id: s.meta.id.clone(),
            candidates: vec![zvet::fit::Candidate {
                class: zvet::ObjectClass::Galaxy,
                template: "quick".into(),
                z: 0.1,
                z_err: 1e-4,
                chi2: 1.0,
                coeffs: vec![],
            }],
            delta_chi2: 100.0,
            chi2_reduced: 1.0,
            n_good: s.n_good(),
            snr_median: 5.0,
            warnings: Default::default(),
            curves: vec![zvet::fit::Chi2Curve {
                class: zvet::ObjectClass::Galaxy,
                template: "quick".into(),
                chi2: z.iter().map(|z| (z - 0.1).powi(2)).collect(),
                z,
            }],
            lines: vec![],
            per_class: vec![],
            refit_kept: false,
        })
    }
    fn refit_near(
        &self,
        s: &zvet::Spectrum,
        _z: f64,
        _class: Option<zvet::ObjectClass>,
        _hw: f64,
    ) -> Result<zvet::fit::FitResult, String> {
        self.fit(s)
    }
    fn model(&self, s: &zvet::Spectrum, _c: &zvet::fit::Candidate) -> Vec<f64> {
        vec![f64::NAN; s.len()]
    }
}

#[test]
fn only_a_bounded_number_of_objects_keep_their_curves() {
    use zvet::ui::jobs::{Fitter, CURVE_CACHE};
    let n = CURVE_CACHE + 14;
    let objects: Vec<_> = demo::generate_n(demo::DEFAULT_SEED, n)
        .objects
        .into_iter()
        .map(|mut o| {
            // as from a campaign's cache: a fit without curves
            let mut f = Quick.fit(&o.spectrum).unwrap();
            f.curves.clear();
            o.fit = Some(f);
            o
        })
        .collect();
    let (_d, log) = log_path("lru");
    let app = ZvetApp::new(zvet::ui::Session {
        title: "lru".into(),
        objects,
        fitter: std::sync::Arc::new(Quick),
        log_place: zvet::ui::LogPlace::File(log),
        inspector: Some("tester".into()),
        name_file: None,
    });
    let mut h = Harness::builder()
        .with_size(egui::vec2(1500.0, 950.0))
        .build_ui_state(|ui, app: &mut ZvetApp| app.show(ui), app);
    h.run_steps(3);
    let holding = |a: &ZvetApp| {
        (0..a.state.objects.len())
            .filter(|&i| a.state.objects.has_curves(i))
            .count()
    };
    let shown_has_curves = |a: &ZvetApp| a.state.current_fit().is_some_and(|f| !f.curves.is_empty());
    let first = h.state().state.selected.unwrap();
    for step in 0..n - 1 {
        settle(&mut h, "the shown object's curves", |a| {
            a.background_idle() && shown_has_curves(a)
        });
        h.run_steps(1);
        let kept = holding(h.state());
        assert!(kept <= CURVE_CACHE, "step {step}: {kept} objects hold curves");
        press(&mut h, egui::Key::N);
    }
    settle(&mut h, "the background work", ZvetApp::background_idle);
    h.run_steps(1);
    assert_eq!(holding(h.state()), CURVE_CACHE, "the cache is full, not more");
    // The first object's curves were dropped long ago; shown again, they come back.
    assert!(!h.state().state.objects.has_curves(first));
    h.state_mut().apply(Action::Select(first));
    settle(&mut h, "the first object's curves again", shown_has_curves);
    assert!(holding(h.state()) <= CURVE_CACHE);
}
