//! The review queue at scale: sort and filter the summaries of a 50 000-object
//! campaign (id, class, z, Δχ², S/N, warnings, photometric class, verdict,
//! flags — what the window keeps per object to draw and order its list).
//! Target: ≤ 50 ms for a sort or a filter of all 50 000.
//!
//! The summaries are made up (a deterministic mix of classes, redshifts,
//! Δχ², S/N, disagreements, verdicts and flags); the queue's work does not
//! depend on where they came from.
//!
//! Run: `cargo bench --no-default-features --bench queue`
use criterion::{criterion_group, criterion_main, Criterion};
use std::hint::black_box;
use zvet::fit::Warnings;
use zvet::queue::{arrange, Filter, QueueItem, SortKey, StatusFilter};
use zvet::review::{Flag, VerdictClass};
use zvet::ObjectClass;

const N: usize = 50_000;

/// A small deterministic generator (SplitMix64), so the bench needs no seed crate.
struct Mix(u64);

impl Mix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

fn summaries() -> Vec<QueueItem> {
    let mut r = Mix(42);
    let classes = [ObjectClass::Galaxy, ObjectClass::Quasar, ObjectClass::Star];
    (0..N)
        .map(|i| {
            let class = classes[(r.next() % 3) as usize];
            let fitted = r.unit() > 0.02;
            let z = match class {
                ObjectClass::Galaxy => 1.5 * r.unit(),
                ObjectClass::Quasar => 0.3 + 3.7 * r.unit(),
                ObjectClass::Star => 0.001 * (r.unit() - 0.5),
            };
            let phot = (r.unit() > 0.1).then(|| {
                if r.unit() < 0.1 {
                    classes[(r.next() % 3) as usize]
                } else {
                    class
                }
            });
            let reviewed = r.unit() < 0.3;
            let flags = if reviewed && r.unit() < 0.1 {
                vec![Flag::ALL[(r.next() % Flag::ALL.len() as u64) as usize]]
            } else {
                Vec::new()
            };
            QueueItem {
                id: format!("SALT-{i:07}"),
                fit_class: fitted.then_some(class),
                fit_z: fitted.then_some(z),
                delta_chi2: fitted.then(|| 10f64.powf(4.0 * r.unit())),
                warnings: Warnings(if r.unit() < 0.15 { 1 } else { 0 }),
                snr: 0.5 + 20.0 * r.unit(),
                phot_class: phot,
                verdict_class: reviewed.then_some(VerdictClass::from(class)),
                verdict_z: reviewed.then_some(z),
                complete: reviewed,
                started: reviewed,
                flags,
                // one object in fifty drawn into an audit sample (the
                // "audit sample" and "vet next" orders sort on these)
                audit_order: (i % 50 == 0).then_some(i / 50),
                stratum_width: 0.1 + 0.5 * r.unit(),
            }
        })
        .collect()
}

fn queue(c: &mut Criterion) {
    let items = summaries();
    let mut g = c.benchmark_group("queue_50000");
    g.sample_size(20);
    for key in SortKey::ALL {
        g.bench_function(format!("sort by {}", key.label()), |b| {
            b.iter(|| black_box(arrange(&items, &Filter::default(), key).len()))
        });
    }
    let filter = Filter {
        class: Some(VerdictClass::Galaxy),
        status: StatusFilter::Unreviewed,
        min_snr: Some(2.0),
        max_delta_chi2: Some(100.0),
        ..Default::default()
    };
    g.bench_function(
        "filter (galaxy, to review, S/N ≥ 2, Δχ² ≤ 100) and sort by need",
        |b| b.iter(|| black_box(arrange(&items, &filter, SortKey::Attention).len())),
    );
    let disagree = Filter {
        disagreement: true,
        ..Default::default()
    };
    g.bench_function("filter (photometry disagrees) and sort by z", |b| {
        b.iter(|| black_box(arrange(&items, &disagree, SortKey::Redshift).len()))
    });
    g.finish();
}

criterion_group!(benches, queue);
criterion_main!(benches);
