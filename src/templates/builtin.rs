/*!
The built-in template set: generated in code at first use (deterministic,
cached), the same data `zvet templates build` writes to `templates-spectra/`.

Values are rounded to single precision so that the set read back from the
committed FITS files (stored as 32-bit floats) equals this one exactly.
*/
use super::profiles::Grid;
use super::{
    galaxies, quasars, stars, stars_cool, stars_hot, ClassTemplates, FitMode, Template, TemplateKind,
    TemplateSet,
};
use crate::ObjectClass;
use serde::Serialize;
use std::sync::OnceLock;

/// Step in log10 λ of every built-in template (≈ 69 km/s per pixel).
pub const DLOGLAM: f64 = 1e-4;

/// Rest-frame grid of the galaxy bases: 891–12023 Å.
pub const GALAXY_GRID: (f64, f64) = (2.95, 4.08);
/// Rest-frame grid of the quasar bases: 708–11220 Å.
pub const QUASAR_GRID: (f64, f64) = (2.85, 4.05);
/// Rest-frame grid of the stars: 2884–11749 Å.
pub const STAR_GRID: (f64, f64) = (3.46, 4.07);

/// Folder (relative to the crate root) holding the committed built-in set.
pub const DEFAULT_DIR: &str = "templates-spectra";

/// Name of the built-in set.
pub const NAME: &str = "builtin";

/// The built-in set (generated once, then shared).
pub fn builtin() -> &'static TemplateSet {
    static SET: OnceLock<TemplateSet> = OnceLock::new();
    SET.get_or_init(generate)
}

fn grid((a, b): (f64, f64)) -> Grid {
    Grid::new(a, b, DLOGLAM)
}

fn template(name: &str, class: ObjectClass, kind: TemplateKind, g: &Grid, flux: Vec<f64>) -> Template {
    Template {
        name: name.to_string(),
        class,
        kind,
        loglam0: g.loglam0,
        dloglam: g.dloglam,
        // Single precision, as stored on disk.
        flux: flux.into_iter().map(|x| f64::from(x as f32)).collect(),
    }
}

/// Generate the built-in set from scratch (what [`builtin`] caches).
pub fn generate() -> TemplateSet {
    use ObjectClass::{Galaxy, Quasar, Star};
    use TemplateKind::{Absorption, Emission};

    let gg = grid(GALAXY_GRID);
    let galaxy = ClassTemplates {
        class: Galaxy,
        mode: FitMode::Basis,
        templates: vec![
            template("galaxy-old", Galaxy, Absorption, &gg, galaxies::old(&gg)),
            template(
                "galaxy-intermediate",
                Galaxy,
                Absorption,
                &gg,
                galaxies::intermediate(&gg),
            ),
            template("galaxy-young", Galaxy, Emission, &gg, galaxies::young(&gg)),
            template(
                "galaxy-emission",
                Galaxy,
                Emission,
                &gg,
                galaxies::emission_only(&gg),
            ),
        ],
    };

    let qg = grid(QUASAR_GRID);
    let quasar = ClassTemplates {
        class: Quasar,
        mode: FitMode::Basis,
        templates: vec![
            template("qso-continuum", Quasar, Emission, &qg, quasars::continuum(&qg)),
            template(
                "qso-uv-lines",
                Quasar,
                Emission,
                &qg,
                quasars::lines(&qg, quasars::UV_LINES),
            ),
            template(
                "qso-balmer",
                Quasar,
                Emission,
                &qg,
                quasars::lines(&qg, quasars::BALMER_LINES),
            ),
            template("qso-red", Quasar, Emission, &qg, quasars::red_continuum(&qg)),
        ],
    };

    let sg = grid(STAR_GRID);
    let star = ClassTemplates {
        class: Star,
        mode: FitMode::EachAlone,
        templates: star_templates(&sg),
    };

    TemplateSet {
        name: NAME.to_string(),
        provenance: provenance(),
        classes: vec![galaxy, quasar, star],
    }
}

/// The star class: the main sequence O–K and the DA white dwarf
/// ([`stars::SEQUENCE`], whose M0 and M4 serve the galaxy populations and
/// are replaced here by the calibrated M dwarfs), the cool stars
/// ([`stars_cool::COOL`]) and the hot and peculiar stars ([`stars_hot::HOT`]).
fn star_templates(sg: &Grid) -> Vec<Template> {
    use ObjectClass::Star;
    use TemplateKind::{Absorption, Emission};
    let cool_names: Vec<&str> = stars_cool::COOL.iter().map(|c| c.name).collect();
    let inst = stars::INSTRUMENT_SIGMA_KMS;
    let mut out: Vec<Template> = stars::SEQUENCE
        .iter()
        .filter(|st| !cool_names.contains(&st.name))
        .map(|st| template(st.name, Star, Absorption, sg, stars::star(st, sg, inst)))
        .collect();
    out.extend(stars_cool::COOL.iter().map(|st| {
        let kind = if st.family == stars_cool::Family::EmissionDwarf {
            Emission
        } else {
            Absorption
        };
        template(st.name, Star, kind, sg, stars_cool::cool_star(st, sg, inst))
    }));
    out.extend(stars_hot::HOT.iter().map(|st| {
        let kind = if matches!(
            st.kind,
            stars_hot::HotKind::WolfRayetN | stars_hot::HotKind::WolfRayetC
        ) {
            Emission
        } else {
            Absorption
        };
        template(st.name, Star, kind, sg, stars_hot::hot_star(st, sg, inst))
    }));
    out
}

/// Free-text provenance of the built-in set.
pub fn provenance() -> String {
    format!(
        "Generated by zvet {} (src/templates/) from physics: Milne-Eddington stellar \
         continua (Planck law, hydrogen bound-free and grey opacities), hydrogen \
         lines from the Rydberg formula and the zvet line list (NIST vacuum wavelengths), \
         optical-depth line profiles, light-weighted stellar populations, Case-B \
         recombination ratios, power-law quasar continua with a mean Lyα-forest \
         transmission. No template data copied from elsewhere. Rest frame, vacuum, \
         log10 λ step {DLOGLAM}.",
        env!("CARGO_PKG_VERSION")
    )
}

/// Everything the generator was run with, for the descriptor file.
#[derive(Debug, Serialize)]
pub struct Parameters {
    dloglam: f64,
    galaxy_loglam: (f64, f64),
    quasar_loglam: (f64, f64),
    star_loglam: (f64, f64),
    star_sigma_kms: f64,
    instrument_sigma_kms: f64,
    stars: &'static [stars::StarType],
    cool_stars: &'static [stars_cool::CoolType],
    hot_stars: &'static [stars_hot::HotType],
    galaxies: galaxies::Parameters,
    quasars: quasars::Parameters,
}

/// The generator parameters of the built-in set.
pub fn parameters() -> Parameters {
    Parameters {
        dloglam: DLOGLAM,
        galaxy_loglam: GALAXY_GRID,
        quasar_loglam: QUASAR_GRID,
        star_loglam: STAR_GRID,
        star_sigma_kms: stars::STAR_SIGMA_KMS,
        instrument_sigma_kms: stars::INSTRUMENT_SIGMA_KMS,
        stars: stars::SEQUENCE,
        cool_stars: stars_cool::COOL,
        hot_stars: stars_hot::HOT,
        galaxies: galaxies::parameters(),
        quasars: quasars::parameters(),
    }
}

/// Generate the built-in set and write it with its generator parameters to `dir`.
pub fn write_builtin(dir: &std::path::Path) -> Result<(), super::TemplateError> {
    let params = serde_json::to_value(parameters()).map_err(|e| super::TemplateError::BadSet {
        name: NAME.to_string(),
        message: e.to_string(),
    })?;
    super::write_set_with(builtin(), dir, Some(params))
}
