//! The review window's object store (`zvet::store`) on a fitted campaign:
//! opening it (the inputs listed by id, the catalogue joined, `fits.jsonl`
//! indexed: what the window does before it draws the first object) and
//! showing one object that is not in the cache (its spectrum read from its
//! multi-object table, its whole fit record read at its byte offset).
//! Targets: open of 50 000 objects ≤ 3 s (with the first object drawn);
//! switch and draw ≤ 16 ms.
//!
//! The campaign: `ZVET_BENCH_CAMPAIGN=DIR` (a fitted campaign, e.g. one made
//! by `scripts/scale-bench.sh 50000`), else a demo campaign of
//! `ZVET_BENCH_OBJECTS` objects (default 5000) made once under
//! `target/bench-scratch/` — the demo's 4000-pixel spectra in tables of 1000
//! rows, and fit records of the engine's shape and size: the first 50 objects
//! are fitted for real and their records repeated under the other ids.
//!
//! Run: `cargo bench --no-default-features --bench window_store`
use criterion::{criterion_group, criterion_main, Criterion};
use std::path::PathBuf;
use zvet::campaign::{Campaign, InitOptions};
use zvet::pipeline::FitRecord;
use zvet::store::{ObjectStore, CACHE};

fn campaign() -> PathBuf {
    if let Some(d) = std::env::var_os("ZVET_BENCH_CAMPAIGN") {
        return PathBuf::from(d);
    }
    let n: usize = std::env::var("ZVET_BENCH_OBJECTS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(5000);
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join(format!("target/bench-scratch/window-{n}"));
    let dir = root.join("campaign");
    if let Ok(c) = Campaign::open(&dir) {
        if c.count_fits().map(|(k, _)| k).unwrap_or(0) >= n {
            return dir;
        }
    }
    let _ = std::fs::remove_dir_all(&root);
    eprintln!(
        "writing a demo campaign of {n} objects once (kept in {})",
        root.display()
    );
    let opts = zvet::demo::ScaleOptions {
        seed: zvet::demo::DEFAULT_SEED,
        objects: n,
        chunk: 1000,
    };
    let w = zvet::demo::write_scaled(&root.join("data"), &opts, &mut |_| {}, None).expect("demo");
    let c = Campaign::init(
        &dir,
        &InitOptions {
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            ..Default::default()
        },
    )
    .expect("campaign");
    let engine = c.engine().expect("engine");
    let found = zvet::pipeline::find(&c.spectra_paths(), &[], &c.read_options());
    let spectra: Vec<zvet::Spectrum> = zvet::pipeline::stream(found.files, c.read_options())
        .filter_map(Result::ok)
        .collect();
    let real: Vec<FitRecord> = spectra
        .iter()
        .take(50)
        .map(|s| {
            let f = engine.fit(s).expect("fit");
            FitRecord::fitted(f, &zvet::pipeline::source_of(s), "chi2")
        })
        .collect();
    let records: Vec<FitRecord> = spectra
        .iter()
        .enumerate()
        .map(|(k, s)| {
            let mut r = real[k % real.len()].clone();
            r.object_id = s.meta.id.clone();
            r.source = zvet::pipeline::source_of(s);
            if let Some(f) = &mut r.fit {
                f.object_id = s.meta.id.clone();
            }
            r
        })
        .collect();
    drop(spectra);
    c.save_records(&records).expect("cache");
    dir
}

fn store(c: &mut Criterion) {
    let dir = campaign();
    let camp = Campaign::open(&dir).expect("a campaign");
    let opened = ObjectStore::open_campaign(&camp).expect("open");
    let n = opened.store.len();
    let fitted = opened.fits.iter().filter(|f| f.is_some()).count();
    assert!(fitted >= n * 9 / 10, "{fitted} of {n} fitted");
    drop(opened);
    let mut g = c.benchmark_group("window_store");
    g.sample_size(10);
    g.bench_function(format!("open_{n}_fitted_and_read_the_first_object"), |b| {
        b.iter(|| {
            let camp = Campaign::open(&dir).unwrap();
            let opened = ObjectStore::open_campaign(&camp).unwrap();
            let first = opened.store.load(0).unwrap();
            std::hint::black_box((opened.store.len(), first.spectrum.len()))
        })
    });
    let store = ObjectStore::open_campaign(&camp).unwrap().store;
    // a stride past the cache: every object shown is read from the files
    let stride = CACHE * 7 + 1;
    let mut k = 0usize;
    g.sample_size(30);
    g.bench_function(format!("show_one_object_not_cached_of_{n}"), |b| {
        b.iter(|| {
            k = (k + stride) % n;
            let e = store.load(k).unwrap();
            std::hint::black_box((e.spectrum.len(), e.fit.as_ref().map(|f| f.candidates.len())))
        })
    });
    g.finish();
}

criterion_group!(benches, store);
criterion_main!(benches);
