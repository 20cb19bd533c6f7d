//! The window reads objects on demand (headless, egui_kittest): a campaign
//! opens with summaries only, moving through the queue reads each shown
//! object's spectrum and full fit from the files, and a spectrum file damaged
//! after the open gives a message, not a panic, with the review log untouched.
use super::gui::{fitted_objects, harness, log_path, press, N};
use egui::Key;
use egui_kittest::kittest::Queryable;
use egui_kittest::Harness;
use std::time::{Duration, Instant};
use zvet::campaign::{Campaign, InitOptions};
use zvet::demo;
use zvet::pipeline::FitRecord;
use zvet::ui::action::{Action, OpenKind};
use zvet::ui::ZvetApp;

fn settle(h: &mut Harness<'_, ZvetApp>, what: &str, done: impl Fn(&ZvetApp) -> bool) {
    let start = Instant::now();
    while !done(h.state()) {
        assert!(
            start.elapsed() < Duration::from_secs(300),
            "waited too long for {what}"
        );
        h.run_steps(1);
        std::thread::sleep(Duration::from_millis(20));
    }
}

#[test]
fn moving_through_the_queue_reads_each_object_when_shown() {
    let (dir, log) = log_path("store");
    let data = dir.path().join("data");
    // the demo's first objects, one FITS file each, with their fits cached
    let survey = demo::generate_n(demo::DEFAULT_SEED, N);
    let w = demo::write_survey(&survey, &data).unwrap();
    let camp_dir = dir.path().join("camp");
    let camp = Campaign::init(
        &camp_dir,
        &InitOptions {
            name: Some("lagoon".into()),
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            ..Default::default()
        },
    )
    .unwrap();
    let records: Vec<FitRecord> = fitted_objects()
        .into_iter()
        .map(|o| FitRecord::fitted(o.fit.expect("fitted"), "", "chi2"))
        .collect();
    camp.save_records(&records).unwrap();

    let mut h = harness(&log);
    h.state_mut()
        .apply(Action::Open(OpenKind::Campaign, vec![camp_dir.clone()]));
    settle(&mut h, "the campaign", |a| a.state.title == "lagoon");
    assert_eq!(h.state().fit_progress().1, 0, "every fit comes from the cache");
    settle(&mut h, "the read-ahead", |a| {
        !a.prefetching() && a.background_idle()
    });
    {
        let s = &h.state().state;
        let (held, _, reads) = s.objects.held();
        // the shown object and the few after it, not the campaign
        assert!(held <= 1 + zvet::store::PREFETCH, "{held} objects held at open");
        assert!(reads <= 1 + zvet::store::PREFETCH, "{reads} spectra read at open");
        // the queue's summaries hold no more than the best candidate
        assert!(s
            .fits
            .iter()
            .all(|f| f.as_ref().is_some_and(|f| f.candidates.len() == 1)));
    }

    // Step through the whole queue: each object shown is the one whose id
    // is selected, with the numbers of the demo survey that wrote its file
    // (double precision: equal), and its full fit (all candidates).
    let fits: std::collections::HashMap<String, zvet::fit::FitResult> = fitted_objects()
        .into_iter()
        .map(|o| (o.id().to_string(), o.fit.unwrap()))
        .collect();
    let mut seen = std::collections::BTreeSet::new();
    for step in 0..N {
        let s = &h.state().state;
        let sel = s.selected.unwrap();
        let id = s.objects[sel].id().to_string();
        let shown = s
            .current()
            .unwrap_or_else(|| panic!("step {step}: {id} not shown"));
        assert_eq!(shown.id(), id);
        let truth = survey.objects.iter().find(|o| o.id() == id).unwrap();
        assert_eq!(shown.spectrum.flux(), truth.spectrum.flux(), "{id}");
        assert_eq!(shown.spectrum.wave(), truth.spectrum.wave(), "{id}");
        let full = s.current_fit().unwrap();
        assert_eq!(
            full.candidates, fits[&id].candidates,
            "{id}: the whole fit record"
        );
        h.get_by_label_contains(&format!("Verdict on {id}"));
        seen.insert(id);
        press(&mut h, Key::N);
    }
    assert_eq!(seen.len(), N, "every object shown once");
    let (held, _, _) = h.state().state.objects.held();
    assert!(held <= zvet::store::CACHE);
}

#[test]
fn a_damaged_spectrum_met_on_demand_is_a_message_and_nothing_is_lost() {
    let (dir, log) = log_path("damaged");
    let data = dir.path().join("data");
    let w = demo::write_survey(&demo::generate_n(demo::DEFAULT_SEED, N), &data).unwrap();
    let camp_dir = dir.path().join("camp");
    Campaign::init(
        &camp_dir,
        &InitOptions {
            name: Some("estuary".into()),
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            ..Default::default()
        },
    )
    .unwrap();
    let mut h = harness(&log);
    h.state_mut()
        .apply(Action::Open(OpenKind::Campaign, vec![camp_dir.clone()]));
    settle(&mut h, "the campaign", |a| a.state.title == "estuary");
    // a note on the first object shown
    h.state_mut()
        .apply(Action::SetNote("seen before the damage".into()));
    h.run_steps(1);
    let log_file = camp_dir.join("reviews/tester.jsonl");
    let before = std::fs::read(&log_file).unwrap();
    assert!(!before.is_empty(), "the verdict is in the log");
    // stop the background fits (they would read the file first), then damage
    // the file of an object further down the list, not read yet
    h.state_mut().apply(Action::CancelFits);
    settle(&mut h, "the fits in hand", ZvetApp::background_idle);
    let target = {
        let s = &h.state().state;
        let pos = s.position().unwrap();
        let far = s.order[pos + 6..]
            .iter()
            .copied()
            .find(|&i| !s.objects.is_cached(i))
            .expect("an object not read yet");
        s.objects[far].id().to_string()
    };
    let file = w.spectra.join(format!("{target}.fits"));
    std::fs::write(&file, b"SIMPLE  =                    T / damaged after the open").unwrap();
    // move onto it by the jump box's way in (select by index)
    let idx = h
        .state()
        .state
        .objects
        .iter()
        .position(|o| o.id() == target)
        .unwrap();
    h.state_mut().apply(Action::Select(idx));
    h.run_steps(2);
    {
        let s = &h.state().state;
        assert_eq!(s.selected, Some(idx));
        assert!(s.current().is_none(), "nothing drawn for it");
        let e = s.load_error.as_deref().expect("a message");
        assert!(e.contains(&target) && e.contains("cannot be read"), "{e}");
        assert!(s.messages.iter().any(|m| m.is_error && m.text.contains(&target)));
    }
    h.get_by_label_contains("could not be read, so it cannot be shown");
    // keys and notes on it record nothing and do not panic; the log is untouched
    press(&mut h, Key::G);
    press(&mut h, Key::Space);
    h.state_mut().apply(Action::SetNote("unseen".into()));
    h.run_steps(1);
    assert_eq!(
        std::fs::read(&log_file).unwrap(),
        before,
        "the review log is untouched"
    );
    // the window goes on: the next object shows
    press(&mut h, Key::N);
    settle(&mut h, "the next object", |a| a.state.current().is_some());
}
