/*!
The cast of the demo survey: how many objects of each kind, in a shuffled
order, each with its own random stream so object k is the same whatever the
survey size asked for.
*/
use rand::seq::SliceRandom;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// What an object of the demo is meant to be (and which hard case it plays).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DemoKind {
    /// Galaxy with old stars only, absorption lines.
    Passive,
    /// Galaxy with young stars and nebular emission.
    StarForming,
    /// Star-forming galaxy at z 1.0–1.6 ([O II] near the red end).
    HighZGalaxy,
    /// Quasar, z 0.3–4.
    Quasar,
    /// Quasar with broad absorption troughs blueward of its high-ionisation lines.
    BroadAbsorptionQuasar,
    /// A star of our Galaxy.
    Star,
    /// Any class, so faint that features drown in noise.
    LowSignal,
    /// Any class, with sky-subtraction residuals at the strong sky lines.
    SkyResidual,
    /// Faint galaxy showing one emission line only ([O II], Hα or Lyα?).
    SingleLine,
    /// Light of a foreground star and a background galaxy in one fibre.
    Blend,
    /// A fibre that carried no light.
    DeadFibre,
    /// A faint galaxy with a bad column, a cosmic ray and a flux step between
    /// spectrograph arms, made to lead the automatic fit astray.
    Catastrophic,
}

impl DemoKind {
    /// Lower-case name.
    pub fn as_str(self) -> &'static str {
        match self {
            DemoKind::Passive => "passive",
            DemoKind::StarForming => "star_forming",
            DemoKind::HighZGalaxy => "high_z_galaxy",
            DemoKind::Quasar => "quasar",
            DemoKind::BroadAbsorptionQuasar => "broad_absorption_quasar",
            DemoKind::Star => "star",
            DemoKind::LowSignal => "low_signal",
            DemoKind::SkyResidual => "sky_residual",
            DemoKind::SingleLine => "single_line",
            DemoKind::Blend => "blend",
            DemoKind::DeadFibre => "dead_fibre",
            DemoKind::Catastrophic => "catastrophic",
        }
    }
}

/// How many of each kind make the full 500-object survey.
pub const CAST: [(DemoKind, usize); 12] = [
    (DemoKind::Passive, 110),
    (DemoKind::StarForming, 120),
    (DemoKind::HighZGalaxy, 12),
    (DemoKind::Quasar, 80),
    (DemoKind::BroadAbsorptionQuasar, 10),
    (DemoKind::Star, 116),
    (DemoKind::LowSignal, 25),
    (DemoKind::SkyResidual, 15),
    (DemoKind::SingleLine, 3),
    (DemoKind::Blend, 3),
    (DemoKind::DeadFibre, 3),
    (DemoKind::Catastrophic, 3),
];

/// Number of objects in the full survey.
pub fn full_size() -> usize {
    CAST.iter().map(|(_, n)| n).sum()
}

/// The kinds of the full survey in their shuffled order.
pub fn kinds(seed: u64) -> Vec<DemoKind> {
    let mut v: Vec<DemoKind> = CAST
        .iter()
        .flat_map(|&(k, n)| std::iter::repeat_n(k, n))
        .collect();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    v.shuffle(&mut rng);
    // The hard cases go near the front, so a short demo (tests) still has them
    // and a person meets them early: swap each first occurrence into the first 40.
    for (slot, k) in [
        DemoKind::SingleLine,
        DemoKind::Blend,
        DemoKind::DeadFibre,
        DemoKind::Catastrophic,
        DemoKind::BroadAbsorptionQuasar,
        DemoKind::SkyResidual,
        DemoKind::LowSignal,
    ]
    .into_iter()
    .enumerate()
    {
        let slot = (slot + 1) * 5;
        if let Some(p) = v.iter().position(|x| *x == k) {
            if p > slot {
                v.swap(p, slot);
            }
        }
    }
    v
}

/// The kinds of block `block` of a survey larger than the cast: block 0 is
/// the full survey of `seed` ([`kinds`]), every further block of
/// [`full_size`] objects is the same cast shuffled by its own seed, so a
/// survey of any size keeps the mix and object k is the same whatever the
/// size asked for.
pub fn block_kinds(seed: u64, block: usize) -> Vec<DemoKind> {
    if block == 0 {
        kinds(seed)
    } else {
        // splitmix64's increment (common practice) spreads the block seeds
        kinds(seed ^ (block as u64).wrapping_mul(0x9e37_79b9_7f4a_7c15))
    }
}

/// Object index, kind and ordinal (how many of that kind came before) of
/// every object of the survey for `seed`, in order, without end: the
/// survey's cast block after block.
pub fn cast(seed: u64) -> impl Iterator<Item = (usize, DemoKind, usize)> {
    let mut seen: std::collections::HashMap<DemoKind, usize> = std::collections::HashMap::new();
    let mut block: Vec<DemoKind> = Vec::new();
    (0usize..).map(move |i| {
        let n = full_size();
        if i % n == 0 {
            block = block_kinds(seed, i / n);
        }
        let kind = block[i % n];
        let ordinal = seen.entry(kind).or_insert(0);
        let out = (i, kind, *ordinal);
        *ordinal += 1;
        out
    })
}

/// The random stream of object `index` (independent of the survey size).
pub fn object_rng(seed: u64, index: usize) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x5eed_0bec7);
    rng.set_stream(index as u64 + 1);
    rng
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cast_is_the_full_survey_and_deterministic() {
        assert_eq!(full_size(), 500);
        let a = kinds(3);
        assert_eq!(a.len(), 500);
        assert_eq!(a, kinds(3));
        assert_ne!(a, kinds(4));
        for k in [DemoKind::SingleLine, DemoKind::DeadFibre, DemoKind::Catastrophic] {
            assert!(a[..40].contains(&k), "{k:?} not near the front");
        }
    }

    #[test]
    fn cast_goes_on_block_after_block_with_the_same_mix() {
        let first: Vec<DemoKind> = cast(3).take(500).map(|(_, k, _)| k).collect();
        assert_eq!(first, kinds(3));
        let two: Vec<(usize, DemoKind, usize)> = cast(3).take(1500).collect();
        let second: Vec<DemoKind> = two[500..1000].iter().map(|x| x.1).collect();
        assert_ne!(second, first, "each block is shuffled by its own seed");
        let count = |v: &[DemoKind], k: DemoKind| v.iter().filter(|x| **x == k).count();
        for (k, n) in CAST {
            assert_eq!(count(&second, k), n, "{k:?}");
        }
        // ordinals count each kind through the whole stream
        let stars: Vec<usize> = two
            .iter()
            .filter(|x| x.1 == DemoKind::Star)
            .map(|x| x.2)
            .collect();
        assert_eq!(stars, (0..stars.len()).collect::<Vec<_>>());
    }
}
