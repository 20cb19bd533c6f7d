//! The window goes through the library, headless (egui_kittest): inspector
//! names pass the library's check, a campaign's review log is opened by the
//! campaign, a folder's kind is judged from its content (a copy of the
//! shipped template set under another name is taken as templates), and the
//! flux, its error band, the model and an overlay are smoothed by the
//! library's one smoothing.
use egui_kittest::Harness;
use std::path::Path;
use std::time::{Duration, Instant};
use zvet::ui::action::{Action, OpenKind};
use zvet::ui::{LogPlace, Session, ZvetApp};

use super::gui::{fitted_objects, harness, log_path};

fn harness_on(place: LogPlace, inspector: Option<&str>) -> Harness<'static, ZvetApp> {
    let app = ZvetApp::new(Session {
        title: "seams".into(),
        objects: fitted_objects(),
        fitter: zvet::ui::default_engine().unwrap(),
        log_place: place,
        inspector: inspector.map(str::to_string),
        name_file: None,
    });
    let mut h = Harness::builder()
        .with_size(egui::vec2(1500.0, 950.0))
        .build_ui_state(|ui, app: &mut ZvetApp| app.show(ui), app);
    h.run_steps(3);
    h
}

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

fn said(app: &ZvetApp, text: &str) -> bool {
    app.state.messages.iter().any(|m| m.text.contains(text))
}

#[test]
fn inspector_names_pass_the_librarys_check() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness_on(LogPlace::Folder(dir.path().to_path_buf()), None);
    for bad in ["Ada Lovelace", "../x", ".hidden"] {
        assert!(zvet::campaign::check_inspector(bad).is_err(), "{bad}");
        h.state_mut().apply(Action::SetInspector(bad.into()));
        h.run_steps(2);
        let app = h.state();
        assert!(app.log().is_none(), "{bad}: no log opened");
        assert_eq!(app.state.name_prompt.as_deref(), Some(bad), "asked again");
        assert!(
            said(app, "could not open the review log"),
            "{:?}",
            app.state.messages
        );
    }
    assert!(
        std::fs::read_dir(dir.path()).unwrap().next().is_none(),
        "nothing was created for a refused name"
    );
    h.state_mut().apply(Action::SetInspector("ada.l".into()));
    h.run_steps(2);
    assert_eq!(h.state().log().unwrap().path(), dir.path().join("ada.l.jsonl"));
}

#[test]
fn a_campaigns_log_is_opened_by_the_campaign() {
    let (dir, _) = log_path("camp-log");
    let w = zvet::demo::write_survey(&zvet::demo::generate_n(5, 2), &dir.path().join("data")).unwrap();
    let camp = dir.path().join("camp");
    zvet::campaign::Campaign::init(
        &camp,
        &zvet::campaign::InitOptions {
            name: Some("reed bed".into()),
            spectra: vec![w.spectra.clone()],
            ..Default::default()
        },
    )
    .unwrap();
    let mut h = harness_on(LogPlace::Pending, Some("cy"));
    h.state_mut()
        .apply(Action::Open(OpenKind::Campaign, vec![camp.clone()]));
    settle(&mut h, "the campaign", |a| a.log().is_some());
    assert_eq!(
        h.state().log().unwrap().path(),
        camp.join("reviews").join("cy.jsonl")
    );
    // The campaign registered its new inspector, as `zvet campaign` does.
    let c = zvet::campaign::Campaign::open(&camp).unwrap();
    assert_eq!(c.manifest().inspectors, vec!["cy".to_string()]);
}

/// A folder dropped on the window, as a desktop integration hands it over.
#[derive(Debug)]
struct Dropped(std::path::PathBuf);

impl egui::DroppedFile for Dropped {
    fn path(&self) -> &Path {
        &self.0
    }
    fn bytes(&self) -> Result<Vec<u8>, String> {
        Err("a folder".into())
    }
}

#[test]
fn a_renamed_copy_of_the_template_set_dropped_on_the_window_is_taken_as_templates() {
    let (dir, log) = log_path("drop");
    let copy = dir.path().join("my spectra copy");
    std::fs::create_dir(&copy).unwrap();
    let shipped = Path::new(env!("CARGO_MANIFEST_DIR")).join("templates-spectra");
    for e in std::fs::read_dir(&shipped).unwrap() {
        let p = e.unwrap().path();
        std::fs::copy(&p, copy.join(p.file_name().unwrap())).unwrap();
    }
    let mut h = harness(&log);
    h.input_mut()
        .dropped_files
        .push(std::sync::Arc::new(Dropped(copy.clone())));
    h.run_steps(1);
    settle(&mut h, "the template set", |a| {
        said(a, "template set 'builtin'") || a.state.messages.iter().any(|m| m.is_error)
    });
    let app = h.state();
    assert!(
        !app.state.messages.iter().any(|m| m.is_error),
        "{:?}",
        app.state.messages
    );
    // The objects stay (nothing was read as spectra) and are refitted on the set.
    assert_eq!(app.state.objects.len(), super::gui::N);
    assert_eq!(app.state.title, zvet::demo::SURVEY_NAME);
}

#[test]
fn flux_band_and_model_are_smoothed_by_the_librarys_smoothing() {
    let (_d, log) = log_path("smooth");
    let mut h = harness(&log);
    h.state_mut().state.tools.auto_smoothing = false;
    h.state_mut().state.view.smoothing = 9;
    h.run_steps(2);
    let app = h.state();
    let o = app.state.current().unwrap();
    let shown = app.state.shown.clone().unwrap();
    let s = &o.spectrum;
    let p = app.prepare_current().unwrap();
    // the library's boxcar of the flux, and its 1σ from the smoothed ivar
    let lib = s.smooth_boxcar(9);
    let good: Vec<usize> = (0..s.len()).filter(|&i| s.good()[i]).collect();
    assert_eq!(p.flux.len(), good.len());
    for (k, &i) in good.iter().enumerate() {
        assert!((p.flux[k] - lib.flux[i]).abs() <= 1e-12 * lib.flux[i].abs().max(1.0));
        let sigma = 1.0 / lib.ivar[i].sqrt();
        assert!((p.hi[k] - p.flux[k] - sigma).abs() <= 1e-9 * sigma.max(1e-30));
    }
    // the model through the same smoothing, with the same weights
    let engine = zvet::ui::default_engine().unwrap();
    let model = engine.model(s, &shown.candidate);
    let want = s.smooth_values_boxcar(&model, 9);
    let want: Vec<[f64; 2]> = s
        .wave()
        .iter()
        .zip(&want)
        .filter(|(_, y)| y.is_finite())
        .map(|(x, y)| [*x, *y])
        .collect();
    assert!(!want.is_empty());
    assert_eq!(p.model.len(), want.len());
    for (a, b) in p.model.iter().zip(&want) {
        assert!((a[0] - b[0]).abs() < 1e-9 && (a[1] - b[1]).abs() <= 1e-12 * b[1].abs().max(1.0));
    }
    // and the sky spectrum (the demo's files carry one), drawn on request
    let sky = s.sky().expect("the demo carries a sky").to_vec();
    let want: Vec<f64> = s
        .smooth_values_boxcar(&sky, 9)
        .into_iter()
        .filter(|y| y.is_finite())
        .collect();
    h.state_mut().state.tools.show_sky = true;
    h.run_steps(2);
    let drawn: Vec<f64> = h.state().state.tools.prepared.sky.iter().map(|q| q[1]).collect();
    assert_eq!(drawn.len(), want.len());
    for (a, b) in drawn.iter().zip(&want) {
        assert!((a - b).abs() <= 1e-12 * b.abs().max(1.0));
    }
}
