//! Speed of the redshift engine: spectra per second for the full
//! three-class fit of 4000-pixel spectra (one thread and all threads), and
//! the FFT fast path against the direct oracle for χ²(z).
//!
//! Run: `cargo bench --no-default-features --bench fit`
use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use zvet::fit::synth::{simulate, SimSpec};
use zvet::fit::{Engine, FitConfig};
use zvet::{ObjectClass, Spectrum};

/// Simulated spectra from the built-in templates: classes in turn, random z, S/N 3–20.
fn spectra(n: usize) -> Vec<Spectrum> {
    let set = zvet::templates::builtin();
    let mut rng = ChaCha8Rng::seed_from_u64(42);
    let mut out = Vec::new();
    while out.len() < n {
        let class = ObjectClass::ALL[out.len() % 3];
        let z = match class {
            ObjectClass::Galaxy => rng.random_range(0.0..1.2),
            ObjectClass::Quasar => rng.random_range(0.3..4.0),
            ObjectClass::Star => rng.random_range(-0.001..0.001),
        };
        let spec = SimSpec {
            class,
            z,
            snr: rng.random_range(3.0..20.0),
            ..SimSpec::default()
        };
        if let Some((s, _)) = simulate(set, &spec, &mut rng) {
            out.push(s);
        }
    }
    out
}

fn full_fit(c: &mut Criterion) {
    let engine = Engine::new(zvet::templates::builtin(), FitConfig::default()).unwrap();
    let batch = spectra(24);
    // warm the template-transform cache once, as a long run would
    engine.fit(&batch[0]).unwrap();
    let mut g = c.benchmark_group("full_fit_4000px");
    g.sample_size(10);
    g.throughput(Throughput::Elements(batch.len() as u64));
    g.bench_function("one_thread", |b| {
        b.iter(|| {
            for s in &batch {
                std::hint::black_box(engine.fit(s).unwrap());
            }
        })
    });
    g.bench_function(format!("all_threads_{}", rayon::current_num_threads()), |b| {
        b.iter(|| {
            batch.par_iter().for_each(|s| {
                std::hint::black_box(engine.fit(s).unwrap());
            })
        })
    });
    // the same with a throughput-tilt term per template (`zvet fit --tilt-terms`)
    let tilted = Engine::new(
        zvet::templates::builtin(),
        FitConfig {
            throughput_terms: true,
            ..FitConfig::default()
        },
    )
    .unwrap();
    tilted.fit(&batch[0]).unwrap();
    g.bench_function(
        format!("all_threads_{}_tilt_terms", rayon::current_num_threads()),
        |b| {
            b.iter(|| {
                batch.par_iter().for_each(|s| {
                    std::hint::black_box(tilted.fit(s).unwrap());
                })
            })
        },
    );
    g.finish();
}

fn fast_vs_oracle(c: &mut Criterion) {
    let engine = Engine::new(zvet::templates::builtin(), FitConfig::default()).unwrap();
    let s = &spectra(1)[0];
    engine.chi2_curves_fast(s).unwrap();
    let mut g = c.benchmark_group("chi2_curves_all_classes");
    g.sample_size(10);
    g.bench_function("fft_fast_path", |b| {
        b.iter(|| std::hint::black_box(engine.chi2_curves_fast(s).unwrap()))
    });
    g.bench_function("direct_oracle", |b| {
        b.iter(|| std::hint::black_box(engine.chi2_curves_oracle(s).unwrap()))
    });
    g.finish();
}

criterion_group!(benches, full_fit, fast_vs_oracle);
criterion_main!(benches);
