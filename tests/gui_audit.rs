//! The window's audit orders on a campaign with an audit sample: "audit
//! sample" lists the drawn objects in the sample's random review order, "vet
//! next" puts the unvetted ones first, and the panel says that only the
//! sample feeds the catalogue-wide estimates.
use std::time::{Duration, Instant};
use zvet::audit::campaign::{save_sample, view};
use zvet::audit::sample::{Allocation, AuditSample};
use zvet::campaign::{Campaign, InitOptions};
use zvet::demo;
use zvet::pipeline::FitRecord;
use zvet::queue::SortKey;
use zvet::ui::action::{Action, OpenKind};

use super::gui::{fitted_objects, harness, log_path};

#[test]
fn audit_orders_follow_the_sample() {
    let (dir, log) = log_path("audit");
    let objects_in_memory = fitted_objects();
    let n = objects_in_memory.len();
    let w = demo::write_survey(&demo::generate_n(demo::DEFAULT_SEED, n), &dir.path().join("data")).unwrap();
    let camp_dir = dir.path().join("camp");
    let camp = Campaign::init(
        &camp_dir,
        &InitOptions {
            name: Some("saltings".into()),
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            ..Default::default()
        },
    )
    .unwrap();
    let (objects, _) = camp.load_objects().unwrap();
    let records: Vec<FitRecord> = objects
        .iter()
        .zip(objects_in_memory)
        .map(|(o, m)| {
            FitRecord::fitted(
                m.fit.expect("fitted"),
                &zvet::pipeline::source_of(&o.spectrum),
                "chi2",
            )
        })
        .collect();
    camp.save_records(&records).unwrap();
    let v = view(&camp).unwrap();
    let sample = AuditSample::draw(&v.units, "phot_class", 4, Allocation::Proportional, 3).unwrap();
    save_sample(&camp, &sample).unwrap();
    let drawn: Vec<String> = sample.members.iter().map(|m| m.id.clone()).collect();

    let mut h = harness(&log);
    h.state_mut()
        .apply(Action::Open(OpenKind::Campaign, vec![camp_dir.clone()]));
    let start = Instant::now();
    while h.state().state.audit.is_none() {
        assert!(start.elapsed() < Duration::from_secs(60), "campaign not opened");
        h.run_steps(1);
        std::thread::sleep(Duration::from_millis(20));
    }
    for key in [SortKey::AuditSample, SortKey::VetNext] {
        h.state_mut().apply(Action::SetSort(key));
        h.run_steps(2);
        let st = &h.state().state;
        let first: Vec<String> = st.order[..drawn.len()]
            .iter()
            .map(|&i| st.objects[i].id().to_string())
            .collect();
        assert_eq!(
            first, drawn,
            "{key:?}: the sample in its random order comes first"
        );
        assert_eq!(st.order.len(), n, "{key:?}: every object stays listed");
        let line = zvet::ui::panels::queue::audit_line(st);
        assert!(
            line.contains("vetted 0 of 4") && line.contains("only the sample's verdicts feed"),
            "{line}"
        );
    }
}
