/*!
One demo object of a given kind: its noise-free model, its observed spectrum
with the defects of its hard case, its catalogue row and its truth.
*/
use crate::campaign::SurveyObject;
use crate::spectrum::SpectrumMeta;
use crate::templates::TemplateKind;
use crate::{ObjectClass, Spectrum};
use rand::Rng;
use rand_distr::{Distribution, Normal};

use super::photometry;
use super::plan::DemoKind;
use super::synth::{self, Component, Model, ARM_JOIN, NOISE_FLOOR};
use super::DemoTruth;
use crate::constants::C_KMS;

/// Centre of the invented field (RA, Dec in degrees) and its radius.
const FIELD: (f64, f64, f64) = (213.4, 21.8, 0.75);

/// Rest vacuum wavelengths (Å) used to place hand-made lines; values as in
/// the common line lists (from memory): [O II] doublet, Hα, [N II], Lyα,
/// and the quasar lines whose troughs a broad-absorption quasar shows.
const OII: (f64, f64) = (3727.09, 3729.88);
const HALPHA: f64 = 6564.61;
const NII: f64 = 6585.27;
const LYA: f64 = 1215.67;
const CIV: f64 = 1549.06;
const SIIV: f64 = 1396.75;
const NV: f64 = 1240.14;

/// A component of the built-in set by template name (the quasar and galaxy
/// bases are physical parts: populations, continua, line sets).
fn part(class: ObjectClass, name: &str, kind: TemplateKind, weight: f64, z: f64, tilt: f64) -> Component {
    Component {
        class,
        template: synth::template_of(class, name, kind),
        weight,
        z,
        tilt,
    }
}

/// A galaxy: `old` and `young` are light fractions at 5500 Å of the passive
/// and star-forming populations (the galaxy templates are normalised there).
fn galaxy(z: f64, young: f64, old: f64, rng: &mut impl Rng) -> Model {
    use ObjectClass::Galaxy;
    use TemplateKind::{Absorption, Emission};
    let tilt = Normal::new(0.0, 0.12).map(|d| d.sample(rng)).unwrap_or(0.0);
    let mut components = vec![
        part(Galaxy, "galaxy-old", Absorption, old, z, tilt),
        part(
            Galaxy,
            "galaxy-intermediate",
            Absorption,
            rng.random_range(0.0..0.3),
            z,
            tilt,
        ),
    ];
    if young > 0.0 {
        components.push(part(Galaxy, "galaxy-young", Emission, young, z, tilt));
        let extra = young * rng.random_range(0.0..0.4);
        components.push(part(Galaxy, "galaxy-emission", Emission, extra, z, tilt));
    }
    Model {
        components,
        scale: 1.0,
        ..Default::default()
    }
}

/// A quasar from the continuum and line parts, each scaled a little differently.
fn quasar(z: f64, rng: &mut impl Rng) -> Model {
    use ObjectClass::Quasar;
    use TemplateKind::Emission;
    let tilt = Normal::new(0.0, 0.25).map(|d| d.sample(rng)).unwrap_or(0.0);
    Model {
        components: vec![
            part(Quasar, "qso-continuum", Emission, 1.0, z, tilt),
            part(
                Quasar,
                "qso-uv-lines",
                Emission,
                rng.random_range(0.6..1.4),
                z,
                tilt,
            ),
            part(
                Quasar,
                "qso-balmer",
                Emission,
                rng.random_range(0.6..1.4),
                z,
                tilt,
            ),
            part(Quasar, "qso-red", Emission, rng.random_range(0.0..0.3), z, tilt),
        ],
        trough_z: Some(z),
        scale: 1.0,
        ..Default::default()
    }
}

fn star(template: usize, z: f64) -> Model {
    Model {
        components: vec![Component {
            class: ObjectClass::Star,
            template,
            weight: 1.0,
            z,
            tilt: 0.0,
        }],
        scale: 1.0,
        ..Default::default()
    }
}

fn star_template_name(k: usize) -> String {
    crate::templates::builtin()
        .class(ObjectClass::Star)
        .and_then(|g| g.templates.get(k))
        .map_or_else(|| format!("star #{k}"), |t| t.name.clone())
}

/// A model of a "normal" object of `kind` with its truth (class, z, note).
fn normal(kind: DemoKind, ordinal: usize, rng: &mut impl Rng) -> (Model, ObjectClass, f64, String, f64) {
    match kind {
        DemoKind::StarForming => {
            let z = rng.random_range(0.02..0.9);
            let m = galaxy(z, rng.random_range(0.6..1.4), rng.random_range(0.1..0.6), rng);
            (
                m,
                ObjectClass::Galaxy,
                z,
                "star-forming galaxy".into(),
                rng.random_range(18.0..21.8),
            )
        }
        DemoKind::HighZGalaxy => {
            let z = rng.random_range(1.0..1.6);
            let m = galaxy(z, rng.random_range(0.8..1.5), rng.random_range(0.0..0.3), rng);
            let note = "galaxy at z > 1: [O II] near the red end".into();
            (m, ObjectClass::Galaxy, z, note, rng.random_range(20.8..22.0))
        }
        DemoKind::Quasar | DemoKind::BroadAbsorptionQuasar => {
            let bal = kind == DemoKind::BroadAbsorptionQuasar;
            let z = if bal {
                rng.random_range(1.7..3.8)
            } else {
                rng.random_range(0.3..4.0)
            };
            let mut m = quasar(z, rng);
            let mut note = "quasar".to_string();
            if bal {
                let v1 = rng.random_range(2000.0..5000.0);
                let v2 = v1 + rng.random_range(5000.0..15000.0);
                let depth = rng.random_range(0.45..0.85);
                for line in [CIV, SIIV, NV] {
                    m.troughs.push((line, v1, v2, depth));
                }
                note = format!("quasar with broad absorption {v1:.0}–{v2:.0} km/s blueward of C IV");
            }
            (m, ObjectClass::Quasar, z, note, rng.random_range(17.5..21.5))
        }
        DemoKind::Star => {
            let n = synth::template_count(ObjectClass::Star).max(1);
            let k = ordinal % n;
            let z = rng.random_range(-250.0..250.0) / C_KMS;
            let note = format!("star ({})", star_template_name(k));
            (
                star(k, z),
                ObjectClass::Star,
                z,
                note,
                rng.random_range(15.5..21.0),
            )
        }
        // Passive, and the base of anything else.
        _ => {
            let z = rng.random_range(0.05..0.75);
            let m = galaxy(z, 0.0, 1.0, rng);
            (
                m,
                ObjectClass::Galaxy,
                z,
                "passive galaxy".into(),
                rng.random_range(17.5..21.5),
            )
        }
    }
}

fn any_base(rng: &mut impl Rng) -> DemoKind {
    [
        DemoKind::Passive,
        DemoKind::StarForming,
        DemoKind::Quasar,
        DemoKind::Star,
    ][rng.random_range(0..4)]
}

/// Build object `index` of `kind` (`ordinal`: how many of this kind came before).
pub fn object(
    index: usize,
    kind: DemoKind,
    ordinal: usize,
    wave: &[f64],
    sky: &[f64],
    rng: &mut impl Rng,
) -> (SurveyObject, DemoTruth) {
    let id = format!("TERN-{:04}", index + 1);
    let (mut model, class, z, note, r) = match kind {
        DemoKind::LowSignal | DemoKind::SkyResidual => {
            let base = any_base(rng);
            let (m, c, z, n, r) = normal(base, ordinal, rng);
            if kind == DemoKind::LowSignal {
                (
                    m,
                    Some(c),
                    z,
                    format!("{n}, very faint"),
                    rng.random_range(22.8..23.6),
                )
            } else {
                (m, Some(c), z, format!("{n}, with sky residuals"), r)
            }
        }
        DemoKind::SingleLine => single_line(ordinal),
        DemoKind::Blend => blend(rng),
        DemoKind::DeadFibre => {
            let (m, _, _, _, r) = normal(DemoKind::Passive, ordinal, rng);
            (
                m,
                None,
                0.0,
                "dead fibre: no light reached the spectrograph".into(),
                r,
            )
        }
        DemoKind::Catastrophic => {
            let z = rng.random_range(0.4..0.8);
            let m = galaxy(z, 0.0, 1.0, rng);
            let note = "faint passive galaxy; two unmasked cosmic rays and an arm step mislead the fit";
            (
                m,
                Some(ObjectClass::Galaxy),
                z,
                note.into(),
                rng.random_range(22.0..22.5),
            )
        }
        _ => {
            let (m, c, z, n, r) = normal(kind, ordinal, rng);
            (m, Some(c), z, n, r)
        }
    };
    let true_mag = if kind == DemoKind::SingleLine || kind == DemoKind::Blend {
        // Built at their final brightness already.
        let g = photometry::band_grid();
        let f: Vec<f64> = g.iter().map(|&l| model.at(l)).collect();
        std::array::from_fn(|b| photometry::ab_mag(&g, &f, b))
    } else {
        model.normalise_to_r(r)
    };
    // The dead fibre's photometry is its target's; its spectrum has no light.
    if kind == DemoKind::DeadFibre {
        model.scale = 0.0;
    }
    let (mut flux, mut ivar, mut good) = synth::observe(&model, wave, sky, NOISE_FLOOR, rng);
    defects(kind, wave, &mut flux, &mut ivar, &mut good, rng);
    let (ra, dec) = position(rng);
    let observed = photometry::observe(true_mag, rng);
    let (pc, prob, pz, wrong) = photometry::classify(class, z, rng);
    let row = photometry::row(&id, (ra, dec), observed, (pc, prob, pz));
    let meta = SpectrumMeta {
        id: id.clone(),
        ra: Some(ra),
        dec: Some(dec),
        flux_unit: Some("1e-17 erg/s/cm2/Angstrom".into()),
        // The subtracted sky as the files carry it (invented scale: a faint
        // continuum plus the lines of the noise model).
        sky: Some(sky.iter().map(|k| 0.4 + 6.0 * k).collect()),
        ..Default::default()
    };
    // The grid is increasing and finite and most pixels are good, so this
    // cannot fail; the inputs are ours, not a user's file.
    let spectrum = Spectrum::new(wave.to_vec(), flux, Some(ivar), Some(good), meta)
        .expect("demo spectra satisfy the spectrum invariants");
    let truth = DemoTruth {
        id,
        class,
        z,
        kind,
        phot_wrong: class.is_some() && wrong,
        note,
    };
    let obj = SurveyObject {
        spectrum,
        catalog: Some(row),
        fit: None,
    };
    (obj, truth)
}

/// The lone-line galaxies: the same line near 7805 Å is [O II], Hα or Lyα.
fn single_line(ordinal: usize) -> (Model, Option<ObjectClass>, f64, String, f64) {
    let mut m = Model {
        constant: 0.04,
        scale: 1.0,
        ..Default::default()
    };
    match ordinal % 3 {
        0 => {
            let z = 7800.0 / (0.5 * (OII.0 + OII.1)) - 1.0;
            m.lines.push((OII.0 * (1.0 + z), 2.2, 1.4));
            m.lines.push((OII.1 * (1.0 + z), 2.2, 1.8));
            let note = "one line at 7800 Å: [O II] (slightly wide: the doublet)";
            (m, Some(ObjectClass::Galaxy), z, note.into(), 0.0)
        }
        1 => {
            let z = 7805.0 / HALPHA - 1.0;
            m.lines.push((HALPHA * (1.0 + z), 2.0, 2.6));
            m.lines.push((NII * (1.0 + z), 2.0, 0.35));
            let note = "one line at 7805 Å: Hα (faint [N II] beside it)";
            (m, Some(ObjectClass::Galaxy), z, note.into(), 0.0)
        }
        _ => {
            let z = 7810.0 / LYA - 1.0;
            // Lyα is asymmetric: a sharp blue edge, a red tail.
            m.lines.push((7810.0, 1.2, 1.6));
            m.lines.push((7814.0, 3.5, 1.0));
            let note = "one line at 7810 Å: Lyα (asymmetric, nothing blueward)";
            (m, Some(ObjectClass::Galaxy), z, note.into(), 0.0)
        }
    }
}

/// A foreground star and a background galaxy in one fibre.
fn blend(rng: &mut impl Rng) -> (Model, Option<ObjectClass>, f64, String, f64) {
    let n = synth::template_count(ObjectClass::Star).max(1);
    let k = rng.random_range(0..n);
    let mut s = star(k, rng.random_range(-100.0..100.0) / C_KMS);
    s.normalise_to_r(rng.random_range(19.4..20.4));
    let z = rng.random_range(0.08..0.4);
    let mut g = galaxy(z, rng.random_range(0.3..1.0), 1.0, rng);
    g.normalise_to_r(rng.random_range(19.4..20.4));
    let mut components = Vec::new();
    for m in [&s, &g] {
        for c in &m.components {
            let mut c = c.clone();
            c.weight *= m.scale;
            components.push(c);
        }
    }
    let m = Model {
        components,
        scale: 1.0,
        ..Default::default()
    };
    let note = format!(
        "galaxy at z {z:.3} blended with a foreground {}",
        star_template_name(k)
    );
    (m, Some(ObjectClass::Galaxy), z, note, 0.0)
}

fn defects(
    kind: DemoKind,
    wave: &[f64],
    flux: &mut [f64],
    ivar: &mut [f64],
    good: &mut [bool],
    rng: &mut impl Rng,
) {
    let n = wave.len();
    match kind {
        DemoKind::SkyResidual => synth::add_sky_residuals(flux, ivar, wave, rng),
        DemoKind::DeadFibre => {
            // Large stretches flagged bad by the reduction.
            for _ in 0..6 {
                let start = rng.random_range(0..n);
                synth::mask_run(good, start, rng.random_range(150..450));
            }
        }
        DemoKind::Catastrophic => {
            let sigma = |i: usize, iv: &[f64]| 1.0 / iv[i].max(1e-12).sqrt();
            // The red arm is calibrated 1.6× too bright.
            for i in 0..n {
                if wave[i] > ARM_JOIN {
                    flux[i] *= 1.6;
                }
            }
            // Two unmasked cosmic rays, each two pixels wide — narrower than
            // any real line, which is how a person tells them apart.
            for _ in 0..2 {
                let cr = rng.random_range(300..n - 300);
                for (k, i) in (cr..cr + 2).enumerate() {
                    flux[i] += (30.0 - 8.0 * k as f64) * sigma(i, ivar);
                }
            }
        }
        _ => {}
    }
    // One spectrum in five has a short bad column, masked.
    if rng.random::<f64>() < 0.2 {
        let start = rng.random_range(0..n - 20);
        synth::mask_run(good, start, rng.random_range(3..14));
    }
}

fn position(rng: &mut impl Rng) -> (f64, f64) {
    let (ra0, dec0, radius) = FIELD;
    let r = radius * rng.random::<f64>().sqrt();
    let t = rng.random_range(0.0..std::f64::consts::TAU);
    let dec = dec0 + r * t.sin();
    let ra = ra0 + r * t.cos() / dec0.to_radians().cos();
    ((ra * 1e6).round() / 1e6, (dec * 1e6).round() / 1e6)
}
