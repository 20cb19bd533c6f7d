//! The review window's tools, headless (egui_kittest): adjudication with
//! every inspector's verdict side by side, jump to an object by id, the
//! template overlay (which must leave the verdict alone), photometry and sky
//! over the spectrum, the new flags and automatic smoothing. Logs live in
//! temporary folders.
use egui::{Key, Modifiers};
use egui_kittest::kittest::Queryable;
use egui_kittest::Harness;
use std::path::{Path, PathBuf};
use zvet::demo;
use zvet::review::{read_log, Change, Confidence, Event, Flag, ReviewLog, VerdictClass, ZSource};
use zvet::ui::tools::ToolAction;
use zvet::ui::{action::Action, LogPlace, Session, ZvetApp};

/// Objects in the test survey.
const N: usize = 8;

/// The demo's first objects with their fits attached: the first [`N`] of
/// the GUI tests' shared set (object k of the demo does not depend on the
/// survey's size, and the set is fitted once for all GUI tests).
fn fitted_objects() -> Vec<zvet::campaign::SurveyObject> {
    super::gui::fitted_objects().into_iter().take(N).collect()
}

fn harness_at(place: LogPlace, inspector: &str) -> Harness<'static, ZvetApp> {
    let app = ZvetApp::new(Session {
        title: demo::SURVEY_NAME.to_string(),
        objects: fitted_objects(),
        fitter: zvet::ui::default_engine().unwrap(),
        log_place: place,
        inspector: Some(inspector.into()),
        name_file: None,
    });
    let mut h = Harness::builder()
        .with_size(egui::vec2(1500.0, 950.0))
        .build_ui_state(|ui, app: &mut ZvetApp| app.show(ui), app);
    h.run_steps(3);
    h
}

fn file_harness(name: &str) -> (tempfile::TempDir, PathBuf, Harness<'static, ZvetApp>) {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join(format!("{name}.jsonl"));
    let h = harness_at(LogPlace::File(log.clone()), "tester");
    (dir, log, h)
}

fn events(log: &Path) -> Vec<Event> {
    if !log.exists() {
        return Vec::new();
    }
    read_log(log).unwrap().0
}

fn press(h: &mut Harness<'_, ZvetApp>, key: Key) {
    h.key_press(key);
    h.run_steps(2);
}

fn act(h: &mut Harness<'_, ZvetApp>, a: ToolAction) {
    h.state_mut().apply(Action::Tool(a));
    h.run_steps(2);
}

fn selected_id(h: &Harness<'_, ZvetApp>) -> String {
    let s = &h.state().state;
    s.objects[s.selected.unwrap()].id().to_string()
}

fn ids() -> Vec<String> {
    demo::generate_n(demo::DEFAULT_SEED, N)
        .objects
        .iter()
        .map(|o| o.id().to_string())
        .collect()
}

#[test]
fn single_line_and_no_signal_flags_by_chord_with_their_keys_shown() {
    let (_d, log, mut h) = file_harness("flags");
    // Each flag shows its key beside it, and the help lists all of them.
    h.get_by_label("F→7");
    h.get_by_label("single line");
    h.get_by_label("F→8");
    h.get_by_label("no signal");
    press(&mut h, Key::F);
    press(&mut h, Key::Num7);
    assert_eq!(
        events(&log).last().unwrap().change,
        Change::Flag {
            flag: Flag::SingleLine,
            on: true
        }
    );
    press(&mut h, Key::F);
    press(&mut h, Key::Num8);
    assert_eq!(
        events(&log).last().unwrap().change,
        Change::Flag {
            flag: Flag::NoSignal,
            on: true
        }
    );
    // The file names are the snake_case words.
    let text = std::fs::read_to_string(&log).unwrap();
    assert!(text.contains("\"single_line\"") && text.contains("\"no_signal\""));
    press(&mut h, Key::H);
    h.get_by_label_contains("7 single line, 8 no signal");
    h.get_by_label("J  or  /");
}

#[test]
fn jump_to_an_object_by_id_and_by_prefix() {
    let (_d, log, mut h) = file_harness("jump");
    let ids = ids();
    let target = ids[5].clone();
    assert_ne!(selected_id(&h), target);
    press(&mut h, Key::J);
    assert!(h.state().state.tools.jump.is_some(), "J opens the field");
    // The J itself did not go into the field.
    assert_eq!(h.state().state.tools.jump.as_deref(), Some(""));
    h.get_by_label("Go to object");
    h.input_mut()
        .events
        .push(egui::Event::Text(target.to_lowercase()));
    h.run_steps(2);
    press(&mut h, Key::Enter);
    assert_eq!(selected_id(&h), target, "the exact id, typed in lower case");
    assert!(h.state().state.tools.jump.is_none(), "the field closed");

    // A prefix shared by every demo id: the list shows matches; Enter takes
    // the first in id order.
    let mut sorted = ids.clone();
    sorted.sort();
    let common: String = {
        let (a, b) = (&sorted[0], &sorted[sorted.len() - 1]);
        a.chars()
            .zip(b.chars())
            .take_while(|(x, y)| x == y)
            .map(|(x, _)| x)
            .collect()
    };
    assert!(!common.is_empty());
    press(&mut h, Key::Slash);
    h.input_mut().events.push(egui::Event::Text(common.clone()));
    h.run_steps(2);
    h.get_by_label(sorted[1].as_str());
    press(&mut h, Key::Enter);
    assert_eq!(selected_id(&h), sorted[0]);

    // No match: a plain message, the selection stays, nothing is recorded.
    press(&mut h, Key::J);
    h.input_mut()
        .events
        .push(egui::Event::Text("no-such-object".into()));
    h.run_steps(2);
    h.get_by_label("no object id starts with 'no-such-object'");
    press(&mut h, Key::Enter);
    assert_eq!(selected_id(&h), sorted[0]);
    press(&mut h, Key::Escape);
    assert!(h.state().state.tools.jump.is_none());
    assert!(events(&log).is_empty(), "jumping records nothing");
}

#[test]
fn template_overlay_is_drawn_and_leaves_the_verdict_alone() {
    let (_d, log, mut h) = file_harness("overlay");
    press(&mut h, Key::Space);
    let before = events(&log);
    assert_eq!(before.len(), 1);
    let verdict = h.state().current_verdict().cloned();
    let shown = h.state().state.shown.clone();
    // M lays the first template over the spectrum, Shift+M goes back.
    press(&mut h, Key::M);
    let first = h.state().state.tools.overlay.clone().expect("M chose a template");
    assert!(
        !h.state().state.tools.prepared.overlay.is_empty(),
        "its model is drawn"
    );
    // Pick a star type by name, as from the list.
    let star = h
        .state()
        .state
        .tools
        .templates
        .iter()
        .find(|t| t.class == zvet::ObjectClass::Star)
        .cloned()
        .expect("the engine has star templates");
    act(&mut h, ToolAction::SetOverlay(Some(star.clone())));
    assert!(
        h.query_all_by_label_contains(&format!("overlay: {}", star.label))
            .count()
            >= 1
    );
    let drawn = &h.state().state.tools.prepared;
    assert!(drawn.overlay_error.is_none(), "{:?}", drawn.overlay_error);
    assert!(drawn.overlay.len() > 100);
    press(&mut h, Key::M);
    press(&mut h, Key::Num0); // a view key in between changes nothing either
    act(&mut h, ToolAction::SetOverlay(Some(first)));
    h.key_press_modifiers(Modifiers::SHIFT, Key::M);
    h.run_steps(2);
    assert!(h.state().state.tools.overlay.is_none(), "Shift+M back to none");
    // The log, the verdict and the shown solution are exactly as before.
    assert_eq!(events(&log), before);
    assert_eq!(h.state().current_verdict().cloned(), verdict);
    assert_eq!(h.state().state.shown, shown);
}

#[test]
fn photometry_and_sky_over_the_spectrum() {
    let (_d, _log, mut h) = file_harness("phot");
    // An object whose catalogue row has at least three magnitudes.
    let i = h
        .state()
        .state
        .objects
        .iter()
        .position(|o| {
            o.catalog
                .as_ref()
                .is_some_and(|r| r.mag.iter().flatten().count() >= 3)
        })
        .expect("a demo object with photometry");
    h.state_mut().apply(Action::Select(i));
    h.run_steps(2);
    let p = &h.state().state.tools.prepared;
    // The demo rows carry u g r i z; the demo flux unit is f_λ.
    assert!(p.phot_note.is_none(), "{:?}", p.phot_note);
    assert!(p.phot.len() >= 3, "{} points", p.phot.len());
    let obj = h.state().state.current().unwrap().clone();
    let row = obj.catalog.clone().unwrap();
    let pts = zvet::photometry::points(&row, 1e-17);
    assert_eq!(p.phot, pts);
    // Sky: off by default, K shows it, K hides it.
    assert!(p.sky.is_empty());
    press(&mut h, Key::K);
    let n = obj.spectrum.sky().map(|s| s.len()).unwrap_or(0);
    assert!(n > 0, "the demo spectra carry their sky");
    assert_eq!(h.state().state.tools.prepared.sky.len(), n);
    press(&mut h, Key::K);
    assert!(h.state().state.tools.prepared.sky.is_empty());
    // I hides the photometry.
    press(&mut h, Key::I);
    assert!(h.state().state.tools.prepared.phot.is_empty());
}

#[test]
fn automatic_smoothing_follows_the_median_snr_until_set_by_hand() {
    let (_d, _log, mut h) = file_harness("smooth");
    for _ in 0..N {
        let want = {
            let o = h.state().state.current().unwrap();
            zvet::spectrum::auto_boxcar_width(o.spectrum.median_snr())
        };
        assert_eq!(h.state().state.view.smoothing, want);
        press(&mut h, Key::N);
    }
    press(&mut h, Key::CloseBracket);
    assert!(!h.state().state.tools.auto_smoothing, "] takes over by hand");
    let w = h.state().state.view.smoothing;
    press(&mut h, Key::B);
    assert_eq!(h.state().state.view.smoothing, w, "kept while moving");
    press(&mut h, Key::Backslash);
    assert!(h.state().state.tools.auto_smoothing);
}

/// Two inspectors who disagree on the first two objects and agree on the third.
fn two_inspectors(folder: &Path, ids: &[String]) {
    let opinion = |class, z, conf| Change::Verdict {
        class,
        z: Some(z),
        z_err: Some(1e-4),
        source: ZSource::Automatic,
        confidence: conf,
    };
    let (mut ana, _) = ReviewLog::open(&folder.join("ana.jsonl"), "ana").unwrap();
    ana.record(
        &ids[0],
        None,
        opinion(VerdictClass::Galaxy, 0.5, Confidence::Secure),
    )
    .unwrap();
    ana.record(
        &ids[0],
        None,
        Change::Note {
            text: "Hα and [N II]".into(),
        },
    )
    .unwrap();
    ana.record(
        &ids[1],
        None,
        opinion(VerdictClass::Quasar, 2.0, Confidence::Secure),
    )
    .unwrap();
    ana.record(
        &ids[2],
        None,
        opinion(VerdictClass::Star, 0.0, Confidence::Secure),
    )
    .unwrap();
    let (mut ben, _) = ReviewLog::open(&folder.join("ben.jsonl"), "ben").unwrap();
    ben.record(
        &ids[0],
        None,
        opinion(VerdictClass::Star, 0.0001, Confidence::Probable),
    )
    .unwrap();
    ben.record(
        &ids[0],
        None,
        Change::Flag {
            flag: Flag::SingleLine,
            on: true,
        },
    )
    .unwrap();
    // |Δz|/(1+z) = 0.02/3.01 > the merge's tolerance
    ben.record(
        &ids[1],
        None,
        opinion(VerdictClass::Quasar, 2.02, Confidence::Secure),
    )
    .unwrap();
    ben.record(
        &ids[2],
        None,
        opinion(VerdictClass::Star, 0.0, Confidence::Secure),
    )
    .unwrap();
}

#[test]
fn adjudication_shows_every_verdict_and_the_decision_is_an_ordinary_verdict() {
    let dir = tempfile::tempdir().unwrap();
    let ids = ids();
    two_inspectors(dir.path(), &ids);
    let mut h = harness_at(LogPlace::Folder(dir.path().to_path_buf()), "judge");
    // The conflicts-only filter lists exactly the two disputed objects.
    h.key_press_modifiers(Modifiers::SHIFT, Key::A);
    h.run_steps(2);
    let listed: Vec<String> = {
        let s = &h.state().state;
        s.order.iter().map(|&i| s.objects[i].id().to_string()).collect()
    };
    let mut want = vec![ids[0].clone(), ids[1].clone()];
    want.sort();
    let mut got = listed.clone();
    got.sort();
    assert_eq!(got, want);
    h.get_by_label_contains("inspectors disagree (2)");

    // Side by side on the first object.
    let i0 = h
        .state()
        .state
        .objects
        .iter()
        .position(|o| o.id() == ids[0])
        .unwrap();
    h.state_mut().apply(Action::Select(i0));
    press(&mut h, Key::A);
    h.get_by_label("All inspectors");
    h.get_by_label_contains("conflict — class differs");
    h.get_by_label("ana");
    h.get_by_label("ben");
    h.get_by_label("0.50000");
    h.get_by_label("0.00010");
    h.get_by_label("Hα and [N II]");
    // ben's flag and certainty (the verdict panel has a widget of each name too)
    assert_eq!(h.query_all_by_label("single line").count(), 2);
    assert!(h.query_all_by_label(Confidence::Probable.as_str()).count() >= 2);

    // "show" draws ben's star without recording anything.
    let judge_log = dir.path().join("judge.jsonl");
    act(&mut h, ToolAction::ShowOpinion("ben".into()));
    let shown = h.state().state.shown.clone().unwrap();
    assert_eq!(shown.class(), zvet::ObjectClass::Star);
    assert!((shown.z() - 0.0001).abs() < 1e-12);
    assert!(events(&judge_log).is_empty());

    // "adopt" records ana's class and z, and her note, in the judge's own log.
    act(&mut h, ToolAction::AdoptOpinion("ana".into()));
    let ev = events(&judge_log);
    assert_eq!(ev.len(), 2);
    assert!(ev.iter().all(|e| e.inspector == "judge" && e.object_id == ids[0]));
    assert_eq!(
        ev[0].change,
        Change::Verdict {
            class: VerdictClass::Galaxy,
            z: Some(0.5),
            z_err: Some(1e-4),
            source: ZSource::Automatic,
            confidence: zvet::ui::DEFAULT_CONFIDENCE,
        }
    );
    assert_eq!(
        ev[1].change,
        Change::Note {
            text: "Hα and [N II]".into()
        }
    );
    // What the judge's log now says is ana's verdict, with the judge's grade.
    let opinion = |h: &Harness<'_, ZvetApp>, who: &str| {
        let a = h.state().state.tools.adjudication.clone().unwrap();
        a.opinions(&ids[0])
            .into_iter()
            .find(|(n, _)| *n == who)
            .unwrap()
            .1
            .clone()
    };
    let replayed = |log: &Path| zvet::review::replay(&events(log)).remove(&ids[0]).unwrap();
    let meant = zvet::review::Verdict {
        confidence: Some(zvet::ui::DEFAULT_CONFIDENCE),
        ..opinion(&h, "ana")
    };
    assert_eq!(replayed(&judge_log), meant);
    h.get_by_label_contains("adopted ana's verdict");
    // Adopting ben's instead raises his flag and clears ana's note: the
    // judge's verdict is then ben's (class, z, flags, note), not a mixture.
    act(&mut h, ToolAction::AdoptOpinion("ben".into()));
    let ev = events(&judge_log);
    assert_eq!(ev.len(), 5, "{ev:?}");
    assert_eq!(
        ev[3].change,
        Change::Flag {
            flag: Flag::SingleLine,
            on: true
        }
    );
    assert_eq!(ev[4].change, Change::Note { text: String::new() });
    let meant = zvet::review::Verdict {
        confidence: Some(zvet::ui::DEFAULT_CONFIDENCE),
        ..opinion(&h, "ben")
    };
    assert_eq!(replayed(&judge_log), meant);
    assert_eq!(h.state().state.note_text, "", "the note field follows");
    // Back to ana's: the flag is cleared again, her note comes back.
    act(&mut h, ToolAction::AdoptOpinion("ana".into()));
    let meant = zvet::review::Verdict {
        confidence: Some(zvet::ui::DEFAULT_CONFIDENCE),
        ..opinion(&h, "ana")
    };
    assert_eq!(replayed(&judge_log), meant);
    assert_eq!(events(&judge_log).len(), 8);
    // The other logs are untouched, and the window's merge knows the new verdict.
    assert_eq!(events(&dir.path().join("ana.jsonl")).len(), 4);
    assert_eq!(events(&dir.path().join("ben.jsonl")).len(), 4);
    let a = h.state().state.tools.adjudication.clone().unwrap();
    let judge = a
        .opinions(&ids[0])
        .into_iter()
        .find(|(n, _)| *n == "judge")
        .unwrap()
        .1
        .clone();
    assert_eq!(judge.class, Some(VerdictClass::Galaxy));
    // The list does not move under the adjudicator's hand.
    let now: Vec<String> = {
        let s = &h.state().state;
        s.order.iter().map(|&i| s.objects[i].id().to_string()).collect()
    };
    assert_eq!(now, listed);
}

#[test]
fn adjudication_in_a_campaign_uses_its_adjudicator() {
    // A campaign folder: `<campaign>/reviews/*.jsonl` and the manifest's adjudicator.
    let dir = tempfile::tempdir().unwrap();
    let ids = ids();
    zvet::campaign::Campaign::init(
        dir.path(),
        &zvet::campaign::InitOptions {
            adjudicator: Some("judge".into()),
            ..Default::default()
        },
    )
    .unwrap();
    let reviews = dir.path().join("reviews");
    two_inspectors(&reviews, &ids);
    let mut h = harness_at(LogPlace::Folder(reviews.clone()), "judge");
    let i0 = h
        .state()
        .state
        .objects
        .iter()
        .position(|o| o.id() == ids[0])
        .unwrap();
    h.state_mut().apply(Action::Select(i0));
    press(&mut h, Key::A);
    h.get_by_label("You are the adjudicator: your verdict decides.");
    act(&mut h, ToolAction::AdoptOpinion("ben".into()));
    h.run_steps(2);
    h.get_by_label("decided by the adjudicator");
    // Through the library's merge: the object is adjudicated as the judge said.
    let c = zvet::campaign::Campaign::open(dir.path()).unwrap();
    let (m, _) = c.merge(None).unwrap();
    let o = &m.objects[&ids[0]];
    assert_eq!(o.state, zvet::review::merge::ConsensusState::Adjudicated);
    assert_eq!(o.verdict.as_ref().unwrap().class, Some(VerdictClass::Star));
    // Still listed as disputed among the regular inspectors.
    assert!(h
        .state()
        .state
        .tools
        .adjudication
        .as_ref()
        .unwrap()
        .conflicts
        .contains(&ids[0]));
}
