//! Cold open of a fitted campaign: from `Campaign::open` to the first object
//! ready to draw — its spectra read, catalogue joined, cached fits attached,
//! engine built, and the χ²(z) curves of the first object computed (the
//! window's work before it can show the first object; the other objects'
//! curves are computed when they are shown).
//!
//! The campaign (500 objects of the demo survey, every fit cached) is made
//! once under `target/bench-scratch/` and kept for later runs; the files are
//! in the OS cache after the first iteration, so this measures zvet's own
//! work, not the disk.
//!
//! Run: `cargo bench --no-default-features --bench campaign_open`
use criterion::{criterion_group, criterion_main, Criterion};
use std::path::PathBuf;
use zvet::campaign::{Campaign, InitOptions};

const N: usize = 500;

fn campaign() -> PathBuf {
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join(format!("target/bench-scratch/open-{N}"));
    let dir = root.join("campaign");
    if let Ok(c) = Campaign::open(&dir) {
        if c.load_fits().map(|(f, _)| f.len()).unwrap_or(0) >= N {
            return dir;
        }
    }
    let _ = std::fs::remove_dir_all(&root);
    let survey = zvet::demo::generate_n(zvet::demo::DEFAULT_SEED, N);
    let data = root.join("data");
    let written = zvet::demo::write_survey(&survey, &data).expect("writing the demo survey");
    let c = Campaign::init(
        &dir,
        &InitOptions {
            spectra: vec![written.spectra.clone()],
            catalog: Some(written.catalog.clone()),
            ..Default::default()
        },
    )
    .expect("creating the campaign");
    eprintln!(
        "fitting {N} objects once for the benchmark (kept in {})",
        dir.display()
    );
    let (s, _, _) = c.fit_run(None, false, None, &|_| {}, None).expect("fitting");
    assert!(s.fitted >= N * 9 / 10, "{s:?}");
    dir
}

fn cold_open(c: &mut Criterion) {
    let dir = campaign();
    let mut g = c.benchmark_group("campaign");
    g.sample_size(10);
    g.bench_function(format!("cold_open_{N}_fitted_to_first_object"), |b| {
        b.iter(|| {
            let camp = Campaign::open(&dir).unwrap();
            let (objects, _) = camp.load_objects().unwrap();
            assert!(objects.iter().filter(|o| o.fit.is_some()).count() >= N * 9 / 10);
            let engine = camp.engine().unwrap();
            // the first object's χ²(z) curves, as the window asks for them
            let first = engine.fit(&objects[0].spectrum).unwrap();
            assert!(!first.curves.is_empty());
            std::hint::black_box((objects.len(), first.curves.len()))
        })
    });
    g.finish();
}

criterion_group!(benches, cold_open);
criterion_main!(benches);
