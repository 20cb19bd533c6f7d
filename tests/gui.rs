//! The review window, headless (egui_kittest): it opens on the demo survey,
//! and every verdict given by keyboard or mouse appends the right event to
//! the review log (a temporary file, never the user's data directory).
use egui::Key;
use egui_kittest::kittest::Queryable;
use egui_kittest::Harness;
use std::path::{Path, PathBuf};
use zvet::demo;
use zvet::fit::FitResult;
use zvet::review::{read_log, Change, Confidence, Event, Flag, VerdictClass, ZSource};
use zvet::ui::{LogPlace, Session, ZvetApp};

/// Objects in the test survey (the hard cases come first in the demo order).
pub(crate) const N: usize = 10;

/// The demo's first objects with their automatic fits already attached, so
/// the tests do not wait for the background workers.
pub(crate) fn fitted_objects() -> Vec<zvet::campaign::SurveyObject> {
    static FITS: std::sync::OnceLock<Vec<Option<FitResult>>> = std::sync::OnceLock::new();
    let survey = demo::generate_n(demo::DEFAULT_SEED, N);
    let fits = FITS.get_or_init(|| {
        let engine = zvet::ui::default_engine().unwrap();
        survey
            .objects
            .iter()
            .map(|o| engine.fit(&o.spectrum).ok())
            .collect()
    });
    survey
        .objects
        .into_iter()
        .zip(fits.iter().cloned())
        .map(|(mut o, f)| {
            o.fit = f;
            o
        })
        .collect()
}

pub(crate) fn new_app(log: &Path) -> ZvetApp {
    ZvetApp::new(Session {
        title: demo::SURVEY_NAME.to_string(),
        objects: fitted_objects(),
        fitter: zvet::ui::default_engine().unwrap(),
        log_place: LogPlace::File(log.to_path_buf()),
        inspector: Some("tester".into()),
        name_file: None,
    })
}

pub(crate) fn harness(log: &Path) -> Harness<'static, ZvetApp> {
    let mut h = Harness::builder()
        .with_size(egui::vec2(1500.0, 950.0))
        .build_ui_state(|ui, app: &mut ZvetApp| app.show(ui), new_app(log));
    h.run_steps(3);
    h
}

pub(crate) fn log_path(name: &str) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join(format!("{name}.jsonl"));
    (dir, p)
}

pub(crate) fn events(log: &Path) -> Vec<Event> {
    if !log.exists() {
        return Vec::new();
    }
    read_log(log).unwrap().0
}

pub(crate) fn last_change(log: &Path) -> Change {
    events(log).last().expect("an event was recorded").change.clone()
}

pub(crate) fn selected_id(h: &Harness<'_, ZvetApp>) -> String {
    let s = &h.state().state;
    s.objects[s.selected.unwrap()].id().to_string()
}

pub(crate) fn press(h: &mut Harness<'_, ZvetApp>, key: Key) {
    h.key_press(key);
    h.run_steps(2);
}

#[test]
fn opens_on_the_demo_with_progress_and_a_selection() {
    let (_d, log) = log_path("open");
    let h = harness(&log);
    h.get_by_label(demo::SURVEY_NAME);
    h.get_by_label(&format!("reviewed 0 / {N}"));
    let app = h.state();
    assert_eq!(app.state.objects.len(), N);
    assert!(app.state.selected.is_some());
    assert!(app.state.shown.is_some(), "the automatic answer is shown");
    assert!(events(&log).is_empty(), "opening records nothing");
}

#[test]
fn space_then_n_vets_a_clean_object_in_two_keys() {
    let (_d, log) = log_path("two_keys");
    let mut h = harness(&log);
    let first = selected_id(&h);
    let best = h.state().state.current_fit().unwrap().best().unwrap().clone();
    press(&mut h, Key::Space);
    press(&mut h, Key::N);
    let ev = events(&log);
    assert_eq!(ev.len(), 1);
    assert_eq!(ev[0].object_id, first);
    assert_eq!(ev[0].inspector, "tester");
    assert_eq!(
        ev[0].change,
        Change::Verdict {
            class: best.class.into(),
            z: Some(best.z),
            z_err: Some(best.z_err),
            source: ZSource::Automatic,
            confidence: Confidence::Secure,
        }
    );
    let fit = ev[0].fit.as_ref().expect("the fit seen is recorded");
    assert_eq!(fit.class, best.class);
    assert_ne!(selected_id(&h), first, "N moved on");
    h.get_by_label(&format!("reviewed 1 / {N}"));
}

#[test]
fn class_confidence_flag_and_note_by_keyboard() {
    let (_d, log) = log_path("keys");
    let mut h = harness(&log);
    let id = selected_id(&h);
    press(&mut h, Key::Q);
    // A class key records a complete verdict: the class with a redshift.
    match last_change(&log) {
        Change::Verdict {
            class, z, confidence, ..
        } => {
            assert_eq!(class, VerdictClass::Quasar);
            assert!(z.is_some_and(f64::is_finite));
            assert_eq!(confidence, Confidence::Secure);
        }
        other => panic!("expected a verdict, got {other:?}"),
    }
    h.key_press_modifiers(egui::Modifiers::SHIFT, Key::P);
    h.run_steps(2);
    assert_eq!(
        last_change(&log),
        Change::Confidence {
            confidence: Confidence::Probable
        }
    );
    press(&mut h, Key::F);
    press(&mut h, Key::Num3);
    assert_eq!(
        last_change(&log),
        Change::Flag {
            flag: Flag::Blend,
            on: true
        }
    );
    press(&mut h, Key::F);
    press(&mut h, Key::Num3);
    assert_eq!(
        last_change(&log),
        Change::Flag {
            flag: Flag::Blend,
            on: false
        }
    );
    press(&mut h, Key::E);
    h.get_by_label("note (E; Enter records)")
        .type_text("two lines, one blue");
    h.run_steps(2);
    press(&mut h, Key::Enter);
    assert_eq!(
        last_change(&log),
        Change::Note {
            text: "two lines, one blue".into()
        }
    );
    assert!(events(&log).iter().all(|e| e.object_id == id));
    // While the note field had the keyboard, letters did not act as keys.
    assert_eq!(events(&log).len(), 5);
}

#[test]
fn class_confidence_flag_and_note_by_mouse() {
    let (_d, log) = log_path("mouse");
    let mut h = harness(&log);
    h.get_by_label("star").click();
    h.run_steps(2);
    assert!(
        matches!(
            last_change(&log),
            Change::Verdict {
                class: VerdictClass::Star,
                z: Some(_),
                ..
            }
        ),
        "{:?}",
        last_change(&log)
    );
    h.get_by_label("probable").click();
    h.run_steps(2);
    assert_eq!(
        last_change(&log),
        Change::Confidence {
            confidence: Confidence::Probable
        }
    );
    h.get_by_label("sky residual").click();
    h.run_steps(2);
    assert_eq!(
        last_change(&log),
        Change::Flag {
            flag: Flag::SkyResidual,
            on: true
        }
    );
    h.get_by_label("note (E; Enter records)").click();
    h.run_steps(1);
    h.get_by_label("note (E; Enter records)").type_text("sky at 5579");
    h.run_steps(2);
    h.get_by_label("save note").click();
    h.run_steps(2);
    assert_eq!(
        last_change(&log),
        Change::Note {
            text: "sky at 5579".into()
        }
    );
    let v = h.state().current_verdict().unwrap().clone();
    assert_eq!(v.class, Some(VerdictClass::Star));
    assert!(v.flags.contains(&Flag::SkyResidual));
}

#[test]
fn selecting_an_object_by_click_and_by_key() {
    let (_d, log) = log_path("select");
    let mut h = harness(&log);
    let app = h.state();
    let pos = app.state.position().unwrap();
    let target = app.state.order[pos + 2];
    let id = app.state.objects[target].id().to_string();
    h.get_by_label_contains(&format!(" {id} ")).click();
    h.run_steps(2);
    assert_eq!(h.state().state.selected, Some(target));
    h.get_by_label(&format!("Verdict on {id}"));
    press(&mut h, Key::B);
    let back = h.state().state.order[pos + 1];
    assert_eq!(h.state().state.selected, Some(back));
    assert!(events(&log).is_empty(), "selecting records nothing");
}

#[test]
fn previewing_and_accepting_a_candidate() {
    let (_d, log) = log_path("candidate");
    let mut h = harness(&log);
    // Find an object with at least two candidates.
    let idx = {
        let s = &h.state().state;
        (0..s.objects.len())
            .find(|&i| {
                // the whole fit (the queue keeps only the best candidate)
                let e = s.objects.load(i).unwrap();
                e.fit.as_ref().is_some_and(|f| f.candidates.len() >= 2)
            })
            .expect("some fit has two candidates")
    };
    h.state_mut().apply(zvet::ui::action::Action::Select(idx));
    h.run_steps(2);
    let second = h.state().state.current_fit().unwrap().candidates[1].clone();
    h.get_by_label("show #2").click();
    h.run_steps(2);
    let shown = h.state().state.shown.clone().unwrap();
    assert_eq!(shown.rank, Some(1));
    assert_eq!(shown.source, ZSource::Candidate);
    assert!((shown.z() - second.z).abs() < 1e-12, "the shown z moved");
    assert!(events(&log).is_empty(), "previewing records nothing");
    h.get_by_label("accept #2").click();
    h.run_steps(2);
    assert_eq!(
        last_change(&log),
        Change::Verdict {
            class: second.class.into(),
            z: Some(second.z),
            z_err: Some(second.z_err),
            source: ZSource::Candidate,
            confidence: Confidence::Secure,
        }
    );
}

#[test]
fn typing_a_redshift() {
    let (_d, log) = log_path("typed");
    let mut h = harness(&log);
    h.get_by_label("redshift").click();
    h.run_steps(1);
    h.key_press_modifiers(egui::Modifiers::COMMAND, Key::A);
    h.get_by_label("redshift").type_text("0.51234");
    h.run_steps(1);
    h.get_by_label("set z").click();
    h.run_steps(2);
    let class = h.state().state.shown.as_ref().unwrap().class();
    assert_eq!(
        last_change(&log),
        Change::Verdict {
            class: class.into(),
            z: Some(0.51234),
            z_err: None,
            source: ZSource::Typed,
            confidence: Confidence::Secure,
        }
    );
    // Nonsense is refused with a message, nothing recorded.
    let n = events(&log).len();
    h.state_mut()
        .apply(zvet::ui::action::Action::TypeZ("banana".into()));
    h.run_steps(2);
    assert_eq!(events(&log).len(), n);
    h.get_by_label_contains("'banana' is not a number");
}

#[test]
fn undo_and_redo() {
    let (_d, log) = log_path("undo");
    let mut h = harness(&log);
    press(&mut h, Key::G);
    press(&mut h, Key::S);
    assert_eq!(
        h.state().current_verdict().unwrap().class,
        Some(VerdictClass::Star)
    );
    h.key_press_modifiers(egui::Modifiers::COMMAND, Key::Z);
    h.run_steps(2);
    assert_eq!(last_change(&log), Change::Undo);
    assert_eq!(
        h.state().current_verdict().unwrap().class,
        Some(VerdictClass::Galaxy)
    );
    h.get_by_label("redo").click();
    h.run_steps(2);
    assert_eq!(last_change(&log), Change::Redo);
    assert_eq!(
        h.state().current_verdict().unwrap().class,
        Some(VerdictClass::Star)
    );
}

#[test]
fn disagreement_filter_lists_exactly_the_disagreeing_objects() {
    let (_d, log) = log_path("filter");
    let mut h = harness(&log);
    h.get_by_label("photometry disagrees").click();
    h.run_steps(2);
    let s = &h.state().state;
    // Computed here from the catalogue and the fits, not from the queue code.
    let mut expected: Vec<usize> = (0..s.objects.len())
        .filter(|&i| {
            let phot = s.objects[i].catalog.as_ref().and_then(|c| c.phot_class);
            let fit = s.fits[i].as_ref().and_then(|f| f.best()).map(|c| c.class);
            matches!((phot, fit), (Some(p), Some(f)) if p != f)
        })
        .collect();
    let mut shown = s.order.clone();
    shown.sort();
    expected.sort();
    assert!(!expected.is_empty(), "the test survey has disagreements");
    assert_eq!(shown, expected);
    // Every listed row carries the disagreement mark, and only those rows are listed.
    // A queue row ends in " ≠" (ui/panels/queue.rs); the facts panel of the
    // shown object says "≠ photometry says …" once, and nothing else has "≠".
    let rows = h.query_all_by_label_contains(" ≠").count();
    assert_eq!(rows, expected.len());
    let facts = h.query_all_by_label_contains("≠ photometry says").count();
    assert_eq!(h.query_all_by_label_contains("≠").count(), rows + facts);
    assert!(facts <= 1);
    h.get_by_label(&format!("showing {} of {N}", expected.len()));
}

#[test]
fn refit_near_the_shown_z_is_a_refit_verdict() {
    let (_d, log) = log_path("refit");
    let mut h = harness(&log);
    let z0 = h.state().state.shown.as_ref().unwrap().z();
    press(&mut h, Key::R);
    // The refit runs on a worker thread: step until it is back (bounded).
    for _ in 0..600 {
        if h.state().state.refit.is_some() {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(50));
        h.run_steps(1);
    }
    let shown = h.state().state.shown.clone().expect("refit arrived");
    assert_eq!(shown.source, ZSource::Refit);
    // Within the ±2000 km/s window around the old z.
    assert!((shown.z() - z0).abs() <= 2000.0 / 299_792.458 * (1.0 + z0) * 1.01);
    press(&mut h, Key::Space);
    match last_change(&log) {
        Change::Verdict { source, z, .. } => {
            assert_eq!(source, ZSource::Refit);
            assert_eq!(z, Some(shown.z()));
        }
        other => panic!("expected a verdict, got {other:?}"),
    }
}

#[test]
fn errors_show_in_the_window_and_nothing_crashes() {
    let (_d, log) = log_path("errors");
    let mut h = harness(&log);
    let before = h.state().state.messages.len();
    h.state_mut().apply(zvet::ui::action::Action::Open(
        zvet::ui::action::OpenKind::Spectra,
        vec![PathBuf::from("/no/such/folder/anywhere")],
    ));
    for _ in 0..200 {
        h.run_steps(1);
        if h.state().state.messages.len() > before {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    let m = h.state().state.messages.last().expect("a message").clone();
    assert!(m.is_error, "{m:?}");
    assert_eq!(h.state().state.objects.len(), N, "the open survey is kept");
    h.get_by_label(&m.text);
}

/// Key press and its character in one frame, as a real keyboard delivers
/// them (kittest's `key_press` spreads events over frames).
pub(crate) fn key_and_text(key: Key, text: &str) -> [egui::Event; 3] {
    let k = |pressed| egui::Event::Key {
        key,
        pressed,
        modifiers: egui::Modifiers::NONE,
        repeat: false,
        physical_key: None,
    };
    [k(true), egui::Event::Text(text.into()), k(false)]
}

#[test]
fn letters_typed_right_after_e_go_into_the_note() {
    let (_d, log) = log_path("race");
    let mut h = harness(&log);
    h.input_mut().events.extend(key_and_text(Key::E, "e"));
    h.step();
    // The very next frame carries a letter that is also a class key.
    h.input_mut().events.extend(key_and_text(Key::S, "s"));
    h.step();
    h.run_steps(1);
    assert!(events(&log).is_empty(), "no class was set: {:?}", events(&log));
    assert_eq!(h.state().state.note_text, "s");
}

#[test]
fn letters_typed_in_the_same_frame_as_e_go_into_the_note() {
    let (_d, log) = log_path("race_same_frame");
    let mut h = harness(&log);
    for (key, text) in [(Key::E, "e"), (Key::S, "s"), (Key::Q, "q")] {
        h.input_mut().events.extend(key_and_text(key, text));
    }
    h.step();
    h.run_steps(2);
    assert!(events(&log).is_empty(), "no class was set: {:?}", events(&log));
    assert_eq!(h.state().state.note_text, "sq");
}

#[test]
fn opening_a_campaign_folder_reads_spectra_catalogue_and_uses_its_logs() {
    let (dir, log) = log_path("campaign");
    let data = dir.path().join("data");
    let w = demo::write_survey(&demo::generate_n(5, 4), &data).unwrap();
    let camp = dir.path().join("camp");
    zvet::campaign::Campaign::init(
        &camp,
        &zvet::campaign::InitOptions {
            name: Some("tidal flats".into()),
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            ..Default::default()
        },
    )
    .unwrap();
    let mut h = harness(&log);
    h.state_mut().apply(zvet::ui::action::Action::Open(
        zvet::ui::action::OpenKind::Campaign,
        vec![camp.clone()],
    ));
    for _ in 0..400 {
        h.run_steps(1);
        if h.state().state.title == "tidal flats" {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    let s = &h.state().state;
    assert_eq!(s.title, "tidal flats");
    assert_eq!(s.objects.len(), 4);
    assert!(s.objects.iter().all(|o| o.catalog.is_some()), "catalogue joined");
    press(&mut h, Key::U);
    let camp_log = camp.join("reviews").join("tester.jsonl");
    assert_eq!(
        last_change(&camp_log),
        Change::Verdict {
            class: VerdictClass::Unclear,
            z: None,
            z_err: None,
            source: ZSource::Typed,
            confidence: Confidence::Secure,
        }
    );
    assert!(events(&log).is_empty(), "the demo's log was left alone");
}

#[test]
fn typing_a_redshift_from_the_keyboard_replaces_the_old_one() {
    let (_d, log) = log_path("typed_keys");
    let mut h = harness(&log);
    assert!(!h.state().state.z_text.is_empty(), "the field shows the fit's z");
    h.input_mut().events.extend(key_and_text(Key::Z, "z"));
    h.step();
    h.input_mut().events.push(egui::Event::Text("1.234".into()));
    h.step();
    h.input_mut().events.push(egui::Event::Key {
        key: Key::Enter,
        pressed: true,
        modifiers: egui::Modifiers::NONE,
        repeat: false,
        physical_key: None,
    });
    h.step();
    h.run_steps(2);
    assert!(
        matches!(
            last_change(&log),
            Change::Verdict { z: Some(z), source: ZSource::Typed, .. } if (z - 1.234).abs() < 1e-12
        ),
        "{:?}",
        last_change(&log)
    );
}

#[test]
fn nudging_the_redshift_and_the_view_keys() {
    let (_d, log) = log_path("nudge");
    let mut h = harness(&log);
    let z0 = h.state().state.shown.as_ref().unwrap().z();
    // two steps up and one down: one NUDGE_STEP · (1 + z) up, as a typed redshift
    press(&mut h, Key::Period);
    press(&mut h, Key::Period);
    press(&mut h, Key::Comma);
    let z1 = h.state().state.shown.as_ref().unwrap().z();
    let step = |z: f64| zvet::ui::NUDGE_STEP * (1.0 + z);
    let expect = {
        let a = z0 + step(z0);
        let b = a + step(a);
        b - step(b)
    };
    assert!((z1 - expect).abs() < 1e-12, "{z1} vs {expect}");
    assert!(events(&log).is_empty(), "nudging records nothing by itself");
    press(&mut h, Key::Space);
    match last_change(&log) {
        Change::Verdict { z, source, .. } => {
            assert!((z.unwrap() - z1).abs() < 1e-12);
            assert_eq!(source, ZSource::Typed);
        }
        other => panic!("{other:?}"),
    }
    // view keys change the view only: rest frame and smoothing (odd widths)
    let (rest, smooth) = (h.state().state.view.rest_frame, h.state().state.view.smoothing);
    press(&mut h, Key::O);
    press(&mut h, Key::CloseBracket);
    assert_eq!(h.state().state.view.rest_frame, !rest);
    assert_eq!(h.state().state.view.smoothing, smooth + 2);
    press(&mut h, Key::OpenBracket);
    press(&mut h, Key::OpenBracket);
    assert_eq!(
        h.state().state.view.smoothing,
        (smooth as isize - 2).max(1) as usize
    );
    assert_eq!(events(&log).len(), 1, "view keys record nothing");
}
