/*!
The invented demo survey the window opens on when given nothing else.

The scenario is ours: the *Saltmarsh pilot survey* points the (fictional)
*Tern* 400-fibre spectrograph at the (fictional) *Eelgrass field*
(RA 213.4°, Dec +21.8°). Its 500 targets are galaxies (passive, star-forming,
a few at z > 1), quasars at z 0.3–4 (some with broad absorption troughs) and
stars of every built-in type — plus the cases people struggle with: faint
spectra, sky-subtraction residuals, a lone emission line that could be [O II],
Hα or Lyα, a star–galaxy blend, dead fibres, and spectra made to mislead the
automatic fit. A photometric catalogue (u g r i z, positions) comes with the
labels of an invented photometric classifier that is wrong on about one object
in ten.

Everything is generated from the built-in templates and a seed (rand_chacha):
the same seed gives the same survey, in well under a second. No fits are
attached; the window fits in the background.
*/
mod build;
mod photometry;
mod plan;
mod scaled;
mod synth;
mod write;

pub use plan::DemoKind;
pub use scaled::{write_scaled, ScaleOptions, DEFAULT_CHUNK, SPECTRA_EXTNAME};
pub use synth::{N_PIX, WAVE_MAX, WAVE_MIN};
pub use write::{write, write_survey, DemoError, Written};

use crate::campaign::SurveyObject;
use crate::ObjectClass;
use serde::{Deserialize, Serialize};

/// The seed of the survey the window opens on.
pub const DEFAULT_SEED: u64 = 4_211_977;

/// Name of the invented survey.
pub const SURVEY_NAME: &str = "Saltmarsh pilot survey — Tern spectrograph, Eelgrass field";

/// What an object of the demo really is (the generator's truth).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DemoTruth {
    /// Object id.
    pub id: String,
    /// True class (None for a dead fibre: nothing to classify).
    pub class: Option<ObjectClass>,
    /// True redshift (0 for a dead fibre).
    pub z: f64,
    /// The kind of object or hard case.
    pub kind: DemoKind,
    /// True when the invented photometric classifier got the class wrong.
    pub phot_wrong: bool,
    /// What a careful inspector should notice.
    pub note: String,
}

/// The demo survey: objects (spectrum + catalogue row, no fit) and the truth.
#[derive(Debug, Clone)]
pub struct DemoSurvey {
    /// Name for the title bar.
    pub name: String,
    /// The objects.
    pub objects: Vec<SurveyObject>,
    /// The truth, in the same order.
    pub truth: Vec<DemoTruth>,
}

/// The full 500-object survey for `seed`.
pub fn generate(seed: u64) -> DemoSurvey {
    generate_n(seed, plan::full_size())
}

/// The first `n` objects of the survey for `seed` (object k is the same
/// whatever `n`; the hard cases come early, so a short survey has them).
/// Past 500 the cast repeats block after block, each shuffled anew; for
/// large `n` write the survey with [`write_scaled`] instead, which never
/// holds more than a batch of spectra.
pub fn generate_n(seed: u64, n: usize) -> DemoSurvey {
    let wave = synth::wave_grid();
    let sky = synth::sky_profile(&wave);
    let (objects, truth) = plan::cast(seed)
        .take(n)
        .map(|(i, kind, ordinal)| {
            let mut rng = plan::object_rng(seed, i);
            build::object(i, kind, ordinal, &wave, &sky, &mut rng)
        })
        .unzip();
    DemoSurvey {
        name: SURVEY_NAME.to_string(),
        objects,
        truth,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn survey_is_deterministic_and_complete() {
        let a = generate_n(7, 60);
        let b = generate_n(7, 60);
        assert_eq!(a.objects.len(), 60);
        for (x, y) in a.objects.iter().zip(&b.objects) {
            assert_eq!(x.spectrum, y.spectrum);
            assert_eq!(x.catalog, y.catalog);
        }
        // Object k does not depend on the survey size.
        let c = generate_n(7, 10);
        assert_eq!(c.objects[9].spectrum, a.objects[9].spectrum);
        for (o, t) in a.objects.iter().zip(&a.truth) {
            assert_eq!(o.id(), t.id);
            assert_eq!(o.spectrum.len(), N_PIX);
            assert!(o.catalog.is_some());
            assert!(o.fit.is_none());
        }
    }

    #[test]
    fn full_survey_mix() {
        let s = generate(DEFAULT_SEED);
        assert_eq!(s.objects.len(), 500);
        let count = |c: ObjectClass| s.truth.iter().filter(|t| t.class == Some(c)).count();
        assert!(count(ObjectClass::Galaxy) > 200);
        assert!(count(ObjectClass::Quasar) > 80);
        assert!(count(ObjectClass::Star) > 100);
        let wrong = s.truth.iter().filter(|t| t.phot_wrong).count();
        assert!((30..=75).contains(&wrong), "classifier wrong on {wrong} of 500");
        // Quasars span z 0.3–4.
        let qz: Vec<f64> = s
            .truth
            .iter()
            .filter(|t| t.kind == DemoKind::Quasar)
            .map(|t| t.z)
            .collect();
        assert!(qz.iter().all(|z| (0.3..=4.0).contains(z)));
        // Catalogue disagreements are exactly the classifier's mistakes.
        for (o, t) in s.objects.iter().zip(&s.truth) {
            if let (Some(c), Some(row)) = (t.class, &o.catalog) {
                assert_eq!(row.phot_class != Some(c), t.phot_wrong, "{}", t.id);
            }
        }
    }
}
