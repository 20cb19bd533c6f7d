//! The review loop, headless (egui_kittest): what a key or click records
//! (Space on a reviewed object keeps or asks, class keys record complete
//! verdicts, the chosen class drives the model), queue rows, resume across a
//! restart, each key press counted once, the wavelength zoom, the start-up
//! dialog and the certainty scale. Each test names the behaviour it pins down;
//! the window's own log file is the witness.
use egui::{Key, Modifiers};
use egui_kittest::kittest::Queryable;
use egui_kittest::Harness;
use std::path::Path;
use zvet::demo;
use zvet::review::{Change, Confidence, ReviewLog, VerdictClass, ZSource};
use zvet::ui::action::Action;
use zvet::ui::{LogPlace, Session, ZvetApp};
use zvet::ObjectClass;

use super::gui::{events, fitted_objects, harness, last_change, log_path, press, selected_id, N};

fn select(h: &mut Harness<'_, ZvetApp>, i: usize) {
    h.state_mut().apply(Action::Select(i));
    h.run_steps(2);
}

fn select_id(h: &mut Harness<'_, ZvetApp>, id: &str) {
    let i = h.state().state.objects.iter().position(|o| o.id() == id).unwrap();
    select(h, i);
}

fn apply(h: &mut Harness<'_, ZvetApp>, a: Action) {
    h.state_mut().apply(a);
    h.run_steps(2);
}

fn shift(h: &mut Harness<'_, ZvetApp>, key: Key) {
    h.key_press_modifiers(Modifiers::SHIFT, key);
    h.run_steps(2);
}

fn class_key(c: ObjectClass) -> Key {
    match c {
        ObjectClass::Galaxy => Key::G,
        ObjectClass::Quasar => Key::Q,
        ObjectClass::Star => Key::S,
    }
}

/// A harness on an app built from `session` (for tests that need their own session).
fn harness_on(session: Session) -> Harness<'static, ZvetApp> {
    let mut h = Harness::builder()
        .with_size(egui::vec2(1500.0, 950.0))
        .build_ui_state(|ui, app: &mut ZvetApp| app.show(ui), ZvetApp::new(session));
    h.run_steps(3);
    h
}

fn session(log_place: LogPlace, inspector: Option<&str>, name_file: Option<&Path>) -> Session {
    Session {
        title: demo::SURVEY_NAME.to_string(),
        objects: fitted_objects(),
        fitter: zvet::ui::default_engine().unwrap(),
        log_place,
        inspector: inspector.map(str::to_string),
        name_file: name_file.map(Path::to_path_buf),
    }
}

/// (object, candidate rank ≥ 1) — preferring a candidate of another class than the best.
fn runner_up(h: &Harness<'_, ZvetApp>) -> (usize, usize) {
    let s = &h.state().state;
    // The highest-ranked such candidate over all objects, so that its row is
    // among the first of the candidate list (the list scrolls).
    let mut other: Option<(usize, usize)> = None;
    let mut any = None;
    for i in 0..s.objects.len() {
        // the whole fit (the queue keeps only the best candidate)
        let e = s.objects.load(i).unwrap();
        let Some(f) = e.fit.as_ref() else { continue };
        for k in 1..f.candidates.len() {
            if f.candidates[k].class != f.candidates[0].class {
                if other.is_none_or(|(_, k0)| k < k0) {
                    other = Some((i, k));
                }
                break;
            }
            any.get_or_insert((i, k));
        }
    }
    other.or(any).expect("some fit has two candidates")
}

// ---- defect: Space on a reviewed object ------------------------------------

#[test]
fn space_on_a_reviewed_object_keeps_the_verdict_and_the_panel_shows_it() {
    let (_d, log) = log_path("keep");
    let mut h = harness(&log);
    let (i, k) = runner_up(&h);
    select(&mut h, i);
    let cand = h.state().state.current_fit().unwrap().candidates[k].clone();
    h.get_by_label(&format!("accept #{}", k + 1)).click();
    h.run_steps(2);
    assert_eq!(events(&log).len(), 1);
    // Away and back: the recorded verdict is what is shown, not the automatic answer.
    let pos = h.state().state.position().unwrap();
    press(&mut h, if pos == 0 { Key::N } else { Key::B });
    press(&mut h, if pos == 0 { Key::B } else { Key::N });
    assert_eq!(h.state().state.selected, Some(i));
    let shown = h.state().state.shown.clone().unwrap();
    assert_eq!(shown.class(), cand.class);
    assert!((shown.z() - cand.z).abs() < 1e-12);
    assert_eq!(shown.source, ZSource::Candidate);
    h.get_by_label("reviewed — recorded verdict");
    h.get_by_label("Keep recorded  [Space]");
    h.get_by_label(&format!("{:.5} ± {:.5}", cand.z, cand.z_err));
    h.get_by_label("chosen candidate");
    // "secure" twice: the recorded certainty, and the selected grade button.
    assert!(h.query_all_by_label("secure").count() >= 2);
    // Space keeps it: nothing is written.
    press(&mut h, Key::Space);
    assert_eq!(
        events(&log).len(),
        1,
        "Space on a reviewed object wrote {:?}",
        last_change(&log)
    );
    h.get_by_label_contains("kept the recorded verdict");
    // Another solution on screen: Space asks, Esc keeps.
    press(&mut h, Key::C);
    press(&mut h, Key::Space);
    assert_eq!(events(&log).len(), 1);
    assert!(h.state().state.pending.is_some());
    h.get_by_label_contains("Replace the recorded verdict");
    press(&mut h, Key::Escape);
    assert!(h.state().state.pending.is_none());
    assert_eq!(events(&log).len(), 1);
    let back = h.state().state.shown.as_ref().unwrap().z();
    assert!((back - cand.z).abs() < 1e-12, "back to the recorded");
    // Asked and confirmed with a second Space: replaced, once.
    press(&mut h, Key::C);
    let other = h.state().state.shown.clone().unwrap();
    press(&mut h, Key::Space);
    press(&mut h, Key::Space);
    let ev = events(&log);
    assert_eq!(ev.len(), 2);
    match &ev[1].change {
        Change::Verdict { z, class, .. } => {
            assert_eq!(*z, Some(other.z()));
            assert_eq!(*class, other.class().into());
        }
        c => panic!("{c:?}"),
    }
}

// ---- defect: the chosen class drives model, markers, close-ups, refit -------

#[test]
fn the_chosen_class_drives_model_markers_closeups_and_refit() {
    let (_d, log) = log_path("class_drives");
    let mut h = harness(&log);
    let i = h.state().state.selected.unwrap();
    let best = h.state().state.current_fit().unwrap().best().unwrap().class;
    // A class the fit did not pick, with templates of its own (galaxy or
    // quasar: z = 0.6 is outside a star's range).
    let chosen = [ObjectClass::Galaxy, ObjectClass::Quasar]
        .into_iter()
        .find(|c| {
            *c != best
                && h.state()
                    .state
                    .objects
                    .load(i)
                    .unwrap()
                    .fit
                    .as_ref()
                    .unwrap()
                    .curves
                    .iter()
                    .any(|k| k.class == *c)
        })
        .unwrap();
    press(&mut h, class_key(chosen));
    apply(&mut h, Action::TypeZ("0.6".into()));
    let shown = h.state().state.shown.clone().unwrap();
    assert_eq!(shown.class(), chosen, "the shown model is of the chosen class");
    assert!((shown.z() - 0.6).abs() < 1e-12);
    h.get_by_label(&format!("shown: {chosen} at z = 0.60000 (set by hand)"));
    match last_change(&log) {
        Change::Verdict { class, z, source, .. } => {
            assert_eq!(class, chosen.into());
            assert_eq!(z, Some(0.6));
            assert_eq!(source, ZSource::Typed);
        }
        c => panic!("{c:?}"),
    }
    // Markers and close-ups are the chosen class's features.
    let p = h.state().prepare_current().unwrap();
    for m in &p.lines {
        let line = zvet::lines::all().iter().find(|l| l.name == m.label).unwrap();
        assert_eq!(
            zvet::ui::view::line_kind_for(line, Some(chosen)),
            Some(m.kind),
            "{}",
            m.label
        );
    }
    let allowed: Vec<&str> = zvet::ui::view::closeup_lines(Some(chosen))
        .iter()
        .map(|l| l.name)
        .collect();
    assert!(p.closeups.iter().all(|c| allowed.contains(&c.name)));
    // R refits in the chosen class.
    press(&mut h, Key::R);
    for _ in 0..600 {
        if h.state().state.refit.is_some() {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(50));
        h.run_steps(1);
    }
    let refit = h.state().state.refit.clone().expect("refit arrived");
    assert!(refit.candidates.iter().all(|c| c.class == chosen));
    assert_eq!(h.state().state.shown.as_ref().unwrap().class(), chosen);
}

// ---- defect: complete verdicts; window, export and report agree ------------

#[test]
fn recording_keys_record_complete_verdicts_and_window_export_report_agree() {
    let (_d, log) = log_path("complete");
    // An older log: a class with no redshift on object 4 (incomplete).
    let ids: Vec<String> = fitted_objects().iter().map(|o| o.id().to_string()).collect();
    {
        let (mut old, _) = ReviewLog::open(&log, "tester").unwrap();
        old.record(
            &ids[4],
            None,
            Change::Class {
                class: VerdictClass::Star,
            },
        )
        .unwrap();
    }
    let mut h = harness(&log);
    h.get_by_label(&format!("reviewed 0 / {N}"));
    let at = |h: &Harness<'_, ZvetApp>, id: &str| {
        h.state().state.objects.iter().position(|o| o.id() == id).unwrap()
    };
    select_id(&mut h, &ids[0]);
    press(&mut h, Key::S); // a class key: star with a redshift
    select_id(&mut h, &ids[1]);
    press(&mut h, Key::U); // unclear: complete without a redshift
    select_id(&mut h, &ids[2]);
    shift(&mut h, Key::G); // a grade on a new object accepts the shown solution
    select_id(&mut h, &ids[3]);
    press(&mut h, Key::F);
    press(&mut h, Key::Num1); // a flag alone is not a review
    h.get_by_label(&format!("reviewed 3 / {N}"));
    for (k, want) in [(0, true), (1, true), (2, true), (3, false), (4, false)] {
        let item = &h.state().state.items[at(&h, &ids[k])];
        assert_eq!(item.is_reviewed(), want, "{}", ids[k]);
    }
    h.get_by_label_contains(&format!("◐ {}", ids[4]));
    let v2 = h.state().verdict_of(at(&h, &ids[2])).unwrap().clone();
    assert_eq!(v2.confidence, Some(Confidence::Guess));
    assert!(v2.z.is_some());
    drop(h);
    // The export and the report apply the same rule to the same log.
    let il = zvet::review::merge::InspectorLog::read(&log, "tester").unwrap();
    let merged = zvet::review::merge::merge(std::slice::from_ref(&il), &Default::default());
    let rows = zvet::export::build_rows(
        &merged,
        &Default::default(),
        &Default::default(),
        &Default::default(),
    );
    let exported: Vec<&str> = rows.iter().map(|r| r.catalog.id.as_str()).collect();
    let mut want: Vec<&str> = ids[..3].iter().map(String::as_str).collect();
    want.sort();
    assert_eq!(exported, want);
    let n = zvet::report::numbers(&zvet::report::ReportInput {
        campaign: "t".into(),
        merged: Some(merged),
        logs: vec![il],
        catalog: Default::default(),
        fits: Default::default(),
        n_objects: Some(N),
        problems: vec![],
        audit_sample: None,
    });
    assert_eq!(n.inspectors[0].reviewed, 3);
    let graded: usize = n.confidence.iter().map(|(_, v)| v).sum();
    assert_eq!(graded, 3);
}

// ---- defect: queue rows show the vetted class and z -------------------------

#[test]
fn a_reviewed_row_shows_the_vetted_class_and_z() {
    let (_d, log) = log_path("row");
    let mut h = harness(&log);
    let id = selected_id(&h);
    press(&mut h, Key::Q);
    apply(&mut h, Action::TypeZ("5.424".into()));
    h.get_by_label_contains(&format!("● {id}  Q  5.424"));
}

// ---- defect: each key press counts once -------------------------------------

#[test]
fn every_key_press_in_one_frame_counts() {
    let (_d, log) = log_path("fast_keys");
    let mut h = harness(&log);
    let start = h.state().state.position().unwrap();
    for _ in 0..5 {
        for pressed in [true, false] {
            h.input_mut().events.push(egui::Event::Key {
                key: Key::N,
                pressed,
                modifiers: Modifiers::NONE,
                repeat: false,
                physical_key: None,
            });
        }
    }
    h.step();
    h.run_steps(1);
    assert_eq!(h.state().state.position().unwrap(), start + 5);
    // Space, N, Space, N in one frame: two verdicts on two objects.
    for key in [Key::Space, Key::N, Key::Space, Key::N] {
        for pressed in [true, false] {
            h.input_mut().events.push(egui::Event::Key {
                key,
                pressed,
                modifiers: Modifiers::NONE,
                repeat: false,
                physical_key: None,
            });
        }
    }
    h.step();
    h.run_steps(1);
    let ev = events(&log);
    assert_eq!(ev.len(), 2);
    assert_ne!(ev[0].object_id, ev[1].object_id);
    assert_eq!(h.state().state.position().unwrap(), start + 7);
}

// ---- defect: resume ----------------------------------------------------------

#[test]
fn resume_across_a_restart_of_the_app_state() {
    let (_d, log) = log_path("resume");
    let filter = zvet::queue::Filter {
        min_snr: Some(0.0),
        ..Default::default()
    };
    let (id, order, width) = {
        let mut h = harness(&log);
        apply(&mut h, Action::SetSort(zvet::queue::SortKey::Id));
        apply(&mut h, Action::SetFilter(filter.clone()));
        press(&mut h, Key::CloseBracket);
        press(&mut h, Key::CloseBracket);
        press(&mut h, Key::O);
        let third = h.state().state.order[3];
        select(&mut h, third);
        let w = h.state().state.view.smoothing;
        assert!(
            !h.state().state.tools.auto_smoothing,
            "[ and ] set the width by hand"
        );
        (selected_id(&h), h.state().state.order.clone(), w)
    };
    // A new window on the same campaign and inspector.
    let h = harness(&log);
    let s = &h.state().state;
    assert_eq!(selected_id(&h), id);
    assert_eq!(s.sort, zvet::queue::SortKey::Id);
    assert_eq!(s.filter, filter);
    assert_eq!(s.order, order);
    // the width set by hand, not the automatic one of the object on screen
    assert_eq!(s.view.smoothing, width);
    assert!(!s.tools.auto_smoothing);
    assert!(s.view.rest_frame);
}

#[test]
fn arriving_fits_never_reorder_the_list() {
    let (_d, log) = log_path("no_jump");
    let mut objects = fitted_objects();
    objects[N - 1].fit = None; // fitted in the background
    let mut h = harness_on(Session {
        objects,
        ..session(LogPlace::File(log.clone()), Some("tester"), None)
    });
    let before = h.state().state.order.clone();
    for _ in 0..1200 {
        if h.state().state.fits[N - 1].is_some() {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(50));
        h.run_steps(1);
    }
    assert!(
        h.state().state.fits[N - 1].is_some(),
        "the background fit arrived"
    );
    h.run_steps(2);
    assert_eq!(h.state().state.order, before, "rows stayed where they were");
    assert!(h.state().state.order_stale);
    h.get_by_label("re-sort (order out of date)").click();
    h.run_steps(2);
    assert!(!h.state().state.order_stale);
}

// ---- defects: smoothing of the model, masked gaps, χ² panel, zoom, lines ----

#[test]
fn the_model_is_smoothed_like_the_flux() {
    let (_d, log) = log_path("smooth_model");
    let mut h = harness(&log);
    let engine = zvet::ui::default_engine().unwrap();
    // From the automatic width, three steps of 2 px by hand.
    let w0 = h.state().state.view.smoothing;
    for _ in 0..3 {
        press(&mut h, Key::CloseBracket);
    }
    let w = h.state().state.view.smoothing;
    assert_eq!(w, w0 + 6);
    let app = h.state();
    let obj = app.state.current().unwrap();
    let raw = engine.model(&obj.spectrum, &app.state.shown.as_ref().unwrap().candidate);
    let want = obj.spectrum.smooth_values_boxcar(&raw, w);
    let p = app.prepare_current().unwrap();
    assert!(!p.model.is_empty());
    let wave = obj.spectrum.wave();
    let mut compared = 0;
    for (i, m) in want.iter().enumerate().filter(|(_, m)| m.is_finite()) {
        let pt = p.model.iter().find(|q| (q[0] - wave[i]).abs() < 1e-9).unwrap();
        assert!((pt[1] - m).abs() <= 1e-9 * m.abs().max(1.0));
        compared += 1;
    }
    assert!(compared > 100);
    // …and differs from the unsmoothed model (the old behaviour drew `raw`).
    assert!(want
        .iter()
        .zip(&raw)
        .any(|(a, b)| (a - b).abs() > 1e-6 * b.abs().max(1e-3)));
}

#[test]
fn flux_and_band_break_at_masked_runs() {
    let (_d, log) = log_path("gaps");
    let mut h = harness(&log);
    let i = (0..N)
        .find(|&i| {
            let o = h.state().state.objects.load(i).unwrap();
            let g = o.spectrum.good();
            let first = g.iter().position(|x| *x).unwrap_or(0);
            let last = g.iter().rposition(|x| *x).unwrap_or(0);
            g[first..last].iter().any(|x| !x)
        })
        .expect("a demo spectrum with masked pixels inside it");
    select(&mut h, i);
    let p = h.state().prepare_current().unwrap();
    assert!(p.segments.len() >= 2);
    for seg in &p.segments {
        let (a, b) = (p.x[seg.start], p.x[seg.end - 1]);
        for &(m0, m1) in &p.masked {
            assert!(m1 <= a || m0 >= b, "segment {a}–{b} crosses masked {m0}–{m1}");
        }
    }
}

#[test]
fn chi2_markers_sit_on_the_drawn_curves_and_the_panel_says_what_is_ranked() {
    let (_d, log) = log_path("chi2");
    let h = harness(&log);
    h.get_by_label_contains("ranked by refined χ²");
    let fit = h.state().state.current_fit().unwrap().clone();
    let floor = zvet::ui::panels::chi2::curves_floor(&fit);
    for c in &fit.curves {
        assert!(c.chi2.iter().filter(|x| x.is_finite()).all(|x| *x >= floor));
    }
    for cand in &fit.candidates {
        // Straight linear interpolation of the candidate's own template curve.
        let curve = fit
            .curves
            .iter()
            .find(|k| k.class == cand.class && k.template == cand.template);
        let Some(curve) = curve else { continue };
        let j = curve.z.iter().position(|z| *z >= cand.z).unwrap();
        if j == 0 {
            continue;
        }
        let t = (cand.z - curve.z[j - 1]) / (curve.z[j] - curve.z[j - 1]);
        let want = curve.chi2[j - 1] * (1.0 - t) + curve.chi2[j] * t;
        let got = zvet::ui::panels::chi2::on_curve(&fit, cand).unwrap();
        assert!((got - want).abs() <= 1e-9 * want.abs(), "{got} vs {want}");
    }
}

#[test]
fn the_wheel_zooms_in_wavelength_only() {
    let (_d, log) = log_path("wheel");
    let mut h = harness(&log);
    let b0 = h.state().state.spectrum_bounds.unwrap();
    let header = h.get_by_label("rest frame (O)").rect();
    let at = egui::pos2(header.center().x, header.bottom() + 120.0);
    h.hover_at(at);
    h.run_steps(2);
    h.event(egui::Event::MouseWheel {
        unit: egui::MouseWheelUnit::Point,
        delta: egui::vec2(0.0, 120.0),
        phase: egui::TouchPhase::Move,
        source: egui::MouseWheelSource::Unknown,
        modifiers: Modifiers::NONE,
    });
    h.run_steps(20);
    let b1 = h.state().state.spectrum_bounds.unwrap();
    assert!(
        b1[1] - b1[0] < 0.9 * (b0[1] - b0[0]),
        "λ zoomed in: {b0:?} → {b1:?}"
    );
    assert!(
        ((b1[3] - b1[2]) - (b0[3] - b0[2])).abs() < 1e-9 * (b0[3] - b0[2]).abs(),
        "flux axis kept"
    );
    // The `0` key: the whole spectrum again (a double click does the same).
    press(&mut h, Key::Num0);
    let b2 = h.state().state.spectrum_bounds.unwrap();
    assert!(b2[1] - b2[0] > 0.99 * (b0[1] - b0[0]), "{b2:?}");
}

/// A double click at `at`: press, release, press, release, a frame each.
fn double_click_at(h: &mut Harness<'_, ZvetApp>, at: egui::Pos2) {
    for pressed in [true, false, true, false] {
        h.event(egui::Event::PointerButton {
            pos: at,
            button: egui::PointerButton::Primary,
            pressed,
            modifiers: Modifiers::NONE,
        });
        h.step();
    }
}

#[test]
fn wheel_and_drag_move_in_wavelength_and_a_double_click_shows_everything() {
    let (_d, log) = log_path("dblclick");
    // Frames of 1/60 s (the default quarter second is longer than a double
    // click may take).
    let mut h = Harness::builder()
        .with_size(egui::vec2(1500.0, 950.0))
        .with_step_dt(1.0 / 60.0)
        .build_ui_state(|ui, app: &mut ZvetApp| app.show(ui), super::gui::new_app(&log));
    h.run_steps(3);
    let b0 = h.state().state.spectrum_bounds.unwrap();
    let header = h.get_by_label("rest frame (O)").rect();
    let at = egui::pos2(header.center().x, header.bottom() + 120.0);
    h.hover_at(at);
    h.run_steps(2);
    h.event(egui::Event::MouseWheel {
        unit: egui::MouseWheelUnit::Point,
        delta: egui::vec2(0.0, 240.0),
        phase: egui::TouchPhase::Move,
        source: egui::MouseWheelSource::Unknown,
        modifiers: Modifiers::NONE,
    });
    h.run_steps(20);
    let b1 = h.state().state.spectrum_bounds.unwrap();
    let width = |b: &[f64; 4]| b[1] - b[0];
    assert!(
        width(&b1) < 0.8 * width(&b0),
        "wheel zoomed in λ: {b0:?} → {b1:?}"
    );
    // A drag to the left pans towards the red, at the same zoom and flux range.
    h.event(egui::Event::PointerButton {
        pos: at,
        button: egui::PointerButton::Primary,
        pressed: true,
        modifiers: Modifiers::NONE,
    });
    h.step();
    for k in 1..=10 {
        h.event(egui::Event::PointerMoved(at - egui::vec2(20.0 * k as f32, 0.0)));
        h.step();
    }
    h.event(egui::Event::PointerButton {
        pos: at - egui::vec2(200.0, 0.0),
        button: egui::PointerButton::Primary,
        pressed: false,
        modifiers: Modifiers::NONE,
    });
    h.run_steps(3);
    let b2 = h.state().state.spectrum_bounds.unwrap();
    assert!(
        b2[0] > b1[0] + 0.05 * width(&b1),
        "dragged towards the red: {b1:?} → {b2:?}"
    );
    assert!((width(&b2) / width(&b1) - 1.0).abs() < 1e-6, "same zoom");
    assert!(
        ((b2[3] - b2[2]) / (b1[3] - b1[2]) - 1.0).abs() < 1e-6,
        "flux axis kept"
    );
    // A double click: the whole spectrum again.
    h.hover_at(at);
    h.step();
    double_click_at(&mut h, at);
    h.run_steps(3);
    let b3 = h.state().state.spectrum_bounds.unwrap();
    for k in 0..2 {
        assert!(
            (b3[k] - b0[k]).abs() < 1e-6 * width(&b0),
            "double click: back to the whole spectrum {b0:?}, got {b3:?}"
        );
    }
    // Nothing of this is a verdict.
    assert!(events(&log).is_empty());
}

#[test]
fn a_star_shows_stellar_features_not_nebular_lines() {
    let (_d, log) = log_path("star_lines");
    let mut h = harness(&log);
    let i = (0..N).find(|&i| {
        h.state().state.fits[i]
            .as_ref()
            .and_then(|f| f.best())
            .is_some_and(|b| b.class == ObjectClass::Star)
    });
    let Some(i) = i else {
        // No star among the first objects: show one by hand.
        press(&mut h, Key::S);
        return assert_stellar(&h);
    };
    select(&mut h, i);
    assert_stellar(&h);
}

fn assert_stellar(h: &Harness<'_, ZvetApp>) {
    assert_eq!(h.state().state.shown.as_ref().unwrap().class(), ObjectClass::Star);
    let p = h.state().prepare_current().unwrap();
    assert!(
        p.lines.iter().all(|m| !m.label.starts_with("[O")),
        "nebular labels on a star"
    );
    assert!(p.closeups.iter().all(|c| !c.name.starts_with("[O")));
}

// ---- defect: start-up ---------------------------------------------------------

#[test]
fn the_name_dialog_can_be_left_and_the_window_quit() {
    let (dir, _) = log_path("dialog");
    let mut h = harness_on(session(LogPlace::Folder(dir.path().to_path_buf()), None, None));
    assert!(h.state().state.name_prompt.is_some());
    h.get_by_label("quit (Ctrl+Q)");
    press(&mut h, Key::Escape);
    assert!(h.state().state.name_prompt.is_none(), "Esc leaves the dialog");
    // Recording without a name asks again, and writes nothing.
    press(&mut h, Key::Space);
    assert!(h.state().state.name_prompt.is_some());
    assert!(std::fs::read_dir(dir.path()).unwrap().next().is_none());
    h.key_press_modifiers(Modifiers::COMMAND, Key::Q);
    h.run_steps(2);
    assert!(h.state().state.quit_asked);
    // Quit is in the help table.
    assert!(zvet::ui::keys::KEYS.iter().any(|(k, _)| k.contains("Ctrl+Q")));
}

#[test]
fn a_command_line_name_is_not_remembered_and_no_log_opens_before_the_files() {
    let (dir, _) = log_path("names");
    let name_file = dir.path().join("inspector.txt");
    std::fs::write(&name_file, "kim\n").unwrap();
    // Files still being read: the name is known, but no log is opened anywhere.
    let h = harness_on(session(LogPlace::Pending, Some("cli"), Some(&name_file)));
    assert!(h.state().log().is_none());
    drop(h);
    let place = LogPlace::Folder(dir.path().join("reviews"));
    let mut h = harness_on(session(place, Some("cli"), Some(&name_file)));
    assert!(h.state().log().is_some());
    assert_eq!(std::fs::read_to_string(&name_file).unwrap().trim(), "kim");
    h.get_by_label_contains("for this session only");
    // A name typed in the dialog is remembered.
    apply(&mut h, Action::SetInspector("ana".into()));
    assert_eq!(std::fs::read_to_string(&name_file).unwrap().trim(), "ana");
}

#[test]
fn the_dialog_offers_the_campaigns_inspectors_and_status_lists_them() {
    let (dir, _) = log_path("known");
    let data = dir.path().join("data");
    let w = demo::write_survey(&demo::generate_n(5, 3), &data).unwrap();
    let camp = dir.path().join("camp");
    zvet::campaign::Campaign::init(
        &camp,
        &zvet::campaign::InitOptions {
            name: Some("mudflats".into()),
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            inspectors: vec!["ana".into(), "ben".into()],
            ..Default::default()
        },
    )
    .unwrap();
    let mut h = harness_on(session(LogPlace::Pending, None, None));
    h.state_mut().apply(Action::Open(
        zvet::ui::action::OpenKind::Campaign,
        vec![camp.clone()],
    ));
    for _ in 0..400 {
        h.run_steps(1);
        if h.state().state.title == "mudflats" {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    assert_eq!(h.state().state.known_inspectors, ["ana", "ben"]);
    h.run_steps(2);
    h.get_by_label("continue as ben").click();
    h.run_steps(2);
    assert!(camp.join("reviews").join("ben.jsonl").exists());
    drop(h);
    // `campaign status` lists registered inspectors before anyone reviewed.
    let ana_log = camp.join("reviews").join("ana.jsonl");
    assert!(!ana_log.exists());
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_zvet"))
        .args(["campaign", "status", camp.to_str().unwrap()])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("inspector ana") && text.contains("0 reviewed"),
        "{text}"
    );
}

// ---- our certainty scale ----------------------------------------------------------

#[test]
fn certainty_grades_by_letter_keys_and_old_words_stay_readable() {
    let (_d, log) = log_path("grades");
    let ids: Vec<String> = fitted_objects().iter().map(|o| o.id().to_string()).collect();
    // A log in the old four words, as an older zvet wrote it.
    let old = |seq: u32, id: &str, word: &str| {
        format!(
            "{{\"v\":1,\"seq\":{seq},\"time\":\"2026-11-01T10:00:00Z\",\"inspector\":\"tester\",\
             \"object_id\":\"{id}\",\"fit\":null,\"action\":\"verdict\",\"class\":\"galaxy\",\
             \"z\":0.5,\"z_err\":null,\"source\":\"typed\",\"confidence\":\"{word}\"}}\n"
        )
    };
    let text = old(1, &ids[0], "certain") + &old(2, &ids[1], "tentative") + &old(3, &ids[2], "doubtful");
    std::fs::write(&log, text).unwrap();
    let mut h = harness(&log);
    let at = |h: &Harness<'_, ZvetApp>, id: &str| {
        h.state().state.objects.iter().position(|o| o.id() == id).unwrap()
    };
    let grade = |h: &Harness<'_, ZvetApp>, k: usize| h.state().verdict_of(at(h, &ids[k])).unwrap().confidence;
    assert_eq!(grade(&h, 0), Some(Confidence::Secure));
    assert_eq!(grade(&h, 1), Some(Confidence::Probable));
    assert_eq!(grade(&h, 2), Some(Confidence::Guess));
    h.get_by_label(&format!("reviewed 3 / {N}"));
    // Letters set the grade of a reviewed object; the digit row does not.
    select_id(&mut h, &ids[2]);
    let n = events(&log).len();
    press(&mut h, Key::Num4);
    press(&mut h, Key::Num2);
    assert_eq!(events(&log).len(), n, "digits record no grade");
    shift(&mut h, Key::P);
    assert_eq!(
        last_change(&log),
        Change::Confidence {
            confidence: Confidence::Probable
        }
    );
    shift(&mut h, Key::S);
    assert_eq!(
        last_change(&log),
        Change::Confidence {
            confidence: Confidence::Secure
        }
    );
    // A plain accept on a new object is secure.
    select_id(&mut h, &ids[5]);
    press(&mut h, Key::Space);
    assert!(matches!(
        last_change(&log),
        Change::Verdict {
            confidence: Confidence::Secure,
            ..
        }
    ));
    // The log is now written in the new words.
    let raw = std::fs::read_to_string(&log).unwrap();
    let last = raw.lines().last().unwrap();
    assert!(last.contains("\"confidence\":\"secure\""), "{last}");
}
