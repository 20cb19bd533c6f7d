/*!
The [`Engine`]: templates prepared once, then for each spectrum χ²(z) of every
unit by the fast path, candidate minima per class, refinement, the class
decision and the warning bits.

Definition of χ² (shared by the fast path and the oracle): over **every good
pixel** of the spectrum on the engine grid; model = Σ a_k T_k(λ/(1+z)) +
Σ b_j P_j(λ) with the templates taken as zero where they do not cover, so
that χ² at every trial z and for every class is summed over the same pixels
and can be compared directly (where a template does not reach, only the
polynomial is left to fit and χ² grows).
*/
// Index loops here mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::config::{FitConfig, FitError, Method};
use super::fast::{self, CorrPlan, DataCache, FftCache};
use super::method::{
    finish, plausible_star, shift_range, too_fast_star, velocity_sep_kms, FitMethod, Setup, Solution,
    STAR_VMAX_KMS,
};
use super::prep::{legendre, Prepared};
use super::refine::{grid_parabola, refine};
use super::result::{Candidate, Chi2Curve, FitResult};
use super::sums::{fit_from_sums, sums_fit, thresholds};
use super::units::{build_units, Unit};
use super::xcorr::{XCorr, XCorrPeak};
use crate::constants::C_KMS;
use crate::spectrum::Spectrum;
use crate::templates::{TemplateKind, TemplateSet};
use crate::ObjectClass;
use std::sync::OnceLock;

/// Minima whose grid χ² is more than this above the lowest are not refined
/// by Brent's method (except each class's best); their sub-pixel z and σ_z
/// come from a parabola through the grid χ² (saves time, changes nothing
/// that could reorder the leading solutions).
pub const REFINE_DCHI2: f64 = 50.0;
/// Relative round-off allowed between a constrained fit from the fast
/// path's template sums and the curve's unconstrained χ² at the same shift
/// (see the re-ranking in [`Chi2`]).
const SUMS_ROUNDOFF: f64 = 1e-9;

/// Legendre continuum terms of the second χ² fit of a spectrum whose first
/// fit is poor (see [`Engine::fit`]): enough to follow the response of a
/// spectrum whose relative flux calibration is off by factors across its
/// range (as merged echelle orders often are), which the default three
/// terms cannot; kept only when the Bayesian information criterion prefers
/// it.
pub const POOR_FIT_POLY_TERMS: usize = 10;

/// The redshift engine. `Send + Sync`: share one engine across threads.
#[derive(Debug)]
pub struct Engine {
    config: FitConfig,
    units: Vec<Unit>,
    cache: FftCache,
    reach: (f64, f64),
    /// Engines whose templates are seen through a broader instrument, each
    /// with the instrumental σ (km/s) it stands for, narrowest first (see
    /// [`COARSE_INSTRUMENT_KMS`]); empty for a set of unknown resolution.
    /// Each is built the first time a spectrum needs it.
    coarse: Vec<CoarseCopy>,
    /// The templates the copies are made from (the built-in set only).
    source: Option<TemplateSet>,
    /// The templates are the built-in set (or a broadened copy of it), whose
    /// M dwarfs have a stated accuracy that `poor_fit` allows for
    /// ([`crate::templates::stars_cool::known_accuracy`]); a user's or
    /// trained set's templates have none, whatever their names.
    stated_accuracy: bool,
}

/// A copy of the engine for spectra sampled more coarsely than the
/// templates' resolution, made on first use: most surveys never need one,
/// and making all of them costs a quarter of a second and 25 MiB at start.
#[derive(Debug)]
struct CoarseCopy {
    /// Instrumental σ (km/s) of its templates.
    sigma: f64,
    /// The engine, once made (`None` if it could not be: the spectrum is then
    /// fitted with the templates as they are).
    engine: OnceLock<Option<Engine>>,
}

/// Instrumental dispersions (km/s) of the built-in set's coarser copies.
/// The built-in templates are smoothed to σ = 60 km/s
/// ([`INSTRUMENT_SIGMA_KMS`](crate::templates::stars::INSTRUMENT_SIGMA_KMS));
/// a spectrum sampled more coarsely cannot resolve lines that sharp: with
/// at least two pixels per resolution element (Nyquist sampling, common
/// practice) its line-spread function has σ ≥ 2 pixels / 2.3548. Such a
/// spectrum is fitted with the copy of the highest dispersion its sampling
/// allows ([`sampling_sigma_kms`]), every class broadened alike. Steps of
/// about 25 %. Without it an A star observed at R ≈ 500 matched an A-rich
/// galaxy population at rest (its lines broadened by 180 km/s) better than
/// the A-star templates with their sharp Balmer cores.
pub const COARSE_INSTRUMENT_KMS: [f64; 7] = [80.0, 100.0, 125.0, 155.0, 190.0, 235.0, 290.0];

/// A grid minimum of one unit.
#[derive(Debug, Clone, Copy)]
struct Minimum {
    unit: usize,
    shift: i64,
    chi2: f64,
    edge: bool,
}

impl Engine {
    /// Prepare `templates` for `config` (resampling them onto the engine step).
    pub fn new(templates: &TemplateSet, config: FitConfig) -> Result<Engine, FitError> {
        let mut engine = Self::at_resolution(templates, config)?;
        // only the built-in set's resolution is known; a user's or trained
        // set is fitted as it is
        if templates.name == crate::templates::BUILTIN_NAME {
            engine.source = Some(templates.clone());
            engine.coarse = COARSE_INSTRUMENT_KMS
                .iter()
                .map(|&sigma| CoarseCopy {
                    sigma,
                    engine: OnceLock::new(),
                })
                .collect();
        }
        Ok(engine)
    }

    /// The engine for `s`: itself, or the coarser copy whose instrumental
    /// dispersion is the highest that `s`'s sampling allows.
    fn matched(&self, s: &Spectrum) -> &Engine {
        let Some(limit) = sampling_sigma_kms(s, self.reach) else {
            return self;
        };
        match self.coarse.iter().rposition(|c| c.sigma <= limit) {
            Some(i) => self.copy(i),
            None => self,
        }
    }

    /// Coarser copy `i` of [`COARSE_INSTRUMENT_KMS`], made now if it was not
    /// yet: the source templates broadened by the extra dispersion.
    fn copy(&self, i: usize) -> &Engine {
        let (Some(c), Some(src)) = (self.coarse.get(i), self.source.as_ref()) else {
            return self;
        };
        c.engine
            .get_or_init(|| {
                let inst = crate::templates::stars::INSTRUMENT_SIGMA_KMS;
                let extra = (c.sigma * c.sigma - inst * inst).sqrt();
                let mut set = src.clone();
                for t in set.classes.iter_mut().flat_map(|c| c.templates.iter_mut()) {
                    t.flux = crate::templates::profiles::convolve_velocity(&t.flux, &t.grid(), extra);
                }
                Self::at_resolution(&set, self.config.clone()).ok()
            })
            .as_ref()
            .unwrap_or(self)
    }

    /// [`Engine::new`] for templates as they are.
    fn at_resolution(templates: &TemplateSet, config: FitConfig) -> Result<Engine, FitError> {
        if !(config.dloglam > 0.0 && config.dloglam < 0.01) {
            return Err(FitError::InvalidConfig(format!(
                "dloglam {} must be in (0, 0.01)",
                config.dloglam
            )));
        }
        if config.classes.is_empty() {
            return Err(FitError::InvalidConfig("no class to fit".into()));
        }
        if !(config.sys_floor >= 0.0 && config.sys_floor < 1.0) {
            return Err(FitError::InvalidConfig(format!(
                "systematic floor {} must be in [0, 1)",
                config.sys_floor
            )));
        }
        if config.poly_terms > 10 {
            return Err(FitError::InvalidConfig("at most 10 polynomial terms".into()));
        }
        for c in &config.classes {
            let (a, b) = config.z_range(*c);
            if !(a > -1.0 && b >= a && b.is_finite()) {
                return Err(FitError::InvalidConfig(format!(
                    "redshift range {a}…{b} for {c} is not valid"
                )));
            }
        }
        let mut units = build_units(templates, &config.classes, config.dloglam)?;
        for u in &mut units {
            u.groups = config.groups_of(u.class);
        }
        if let Some(u) = units.iter().find(|u| u.cols() + config.poly_terms > 32) {
            return Err(FitError::InvalidConfig(format!(
                "{} has {} templates; with {} polynomial terms (and throughput terms if set) that exceeds 32 columns",
                u.name,
                u.k(),
                config.poly_terms
            )));
        }
        let reach = reach(&units, &config);
        if reach.1.is_nan() || reach.0.is_nan() || reach.1 <= reach.0 {
            return Err(FitError::BadTemplates(
                "the classes' templates share no observed wavelength range".into(),
            ));
        }
        Ok(Engine {
            reach,
            config: FitConfig {
                n_candidates: config.n_candidates.max(1),
                ..config
            },
            units,
            cache: FftCache::default(),
            coarse: Vec::new(),
            source: None,
            stated_accuracy: templates.name == crate::templates::BUILTIN_NAME,
        })
    }

    /// The settings.
    pub fn config(&self) -> &FitConfig {
        &self.config
    }

    /// Classes that have templates in this engine.
    pub fn classes(&self) -> Vec<ObjectClass> {
        self.setup().classes()
    }

    /// Every configured class with its whole redshift range in grid shifts.
    fn full_ranges(&self) -> Vec<(ObjectClass, (i64, i64))> {
        self.classes()
            .into_iter()
            .map(|c| (c, shift_range(self.config.z_range(c), self.config.dloglam)))
            .collect()
    }

    /// The prepared fit units (used by the oracle tests and the benches).
    pub fn units(&self) -> &[Unit] {
        &self.units
    }

    /// Fit every configured class over its whole redshift range.
    pub fn fit(&self, s: &Spectrum) -> Result<FitResult, FitError> {
        let ranges = self.full_ranges();
        match self.config.method {
            Method::Chi2 => self.run_chi2(s, &ranges),
            Method::XCorr => self.run(&self.config, &XCorr, s, &ranges),
        }
    }

    /// The χ² fit over `ranges`; when its best solution is a poor fit
    /// (`poor_fit`: the reduced χ², with the winning template's stated
    /// accuracy allowed for, above [`POOR_FIT_CHI2R`](super::POOR_FIT_CHI2R)) the fit is
    /// repeated with [`POOR_FIT_POLY_TERMS`] continuum terms and that one
    /// is kept when the Bayesian information criterion prefers it (Schwarz
    /// 1978: χ² + k ln N, N the good pixels, k the extra terms) and its best
    /// solution is of the same class, or of another class that beats the
    /// first class's best in the refit by more than the `class_close` cut
    /// ([`CLASS_CLOSE_DCHI2`](super::CLASS_CLOSE_DCHI2) × the mismatch
    /// scale). A kept refit's warnings are its own: `poor_fit` stays only if
    /// the refit, too, misses the spectrum by more than its noise (a spectrum
    /// whose flux calibration is off across its range is described once the
    /// continuum may follow it; `refit_kept` says so). Keeping the usual
    /// fit's `poor_fit` on every kept refit flagged the real M8 dwarf's
    /// mocks at S/N 10 and warned of no wrong answer in the real-star or
    /// synthetic runs (README, "Stars").
    fn run_chi2(&self, s: &Spectrum, ranges: &[(ObjectClass, (i64, i64))]) -> Result<FitResult, FitError> {
        let first = self.run(&self.config, &Chi2, s, ranges)?;
        let j = self.config.poly_terms;
        if !first.warnings.has(super::Warnings::POOR_FIT) || j >= POOR_FIT_POLY_TERMS {
            return Ok(first);
        }
        let flexible = FitConfig {
            poly_terms: POOR_FIT_POLY_TERMS,
            ..self.config.clone()
        };
        if self.units.iter().any(|u| u.cols() + POOR_FIT_POLY_TERMS > 32) {
            return Ok(first);
        }
        let Ok(second) = self.run(&flexible, &Chi2, s, ranges) else {
            return Ok(first);
        };
        let (Some(a), Some(b)) = (first.best(), second.best()) else {
            return Ok(first);
        };
        // the refit settles where the first fit's class sits; it changes the
        // class only when, with the same continuum freedom for every class,
        // its answer beats that class's best by far more than the class cut
        // (a star is told from galaxies and quasars largely by its continuum,
        // which the extra terms take over; a spectrum whose flux calibration
        // is off across its range is fitted, with three terms, best by a
        // star's tilted continuum, and its lines decide only with more)
        let price = (POOR_FIT_POLY_TERMS - j) as f64 * (second.n_good.max(2) as f64).ln();
        let same_class_in_refit = second.per_class.iter().find(|c| c.class == a.class);
        let class_clear = same_class_in_refit.is_some_and(|c| {
            c.chi2 - b.chi2 > super::CLASS_CLOSE_DCHI2 * super::mismatch_scale(second.chi2_reduced)
        });
        Ok(
            if (b.class == a.class || class_clear) && b.chi2 + price < a.chi2 {
                let mut second = second;
                second.refit_kept = true;
                second
            } else {
                first
            },
        )
    }

    /// The engine restricted to |Δv| ≤ `half_width_kms` around `z` (one class or all).
    pub fn refit_near(
        &self,
        s: &Spectrum,
        z: f64,
        class: Option<ObjectClass>,
        half_width_kms: f64,
    ) -> Result<FitResult, FitError> {
        if !(z > -1.0 && z.is_finite() && half_width_kms >= 0.0) {
            return Err(FitError::InvalidConfig(format!(
                "cannot refit near z = {z} ± {half_width_kms} km/s"
            )));
        }
        let dll = self.config.dloglam;
        let centre = (1.0 + z).log10() / dll;
        let half = (half_width_kms / C_KMS).ln_1p() / std::f64::consts::LN_10 / dll;
        let range = ((centre - half).ceil() as i64, (centre + half).floor() as i64);
        let range = if range.1 < range.0 {
            let r = centre.round() as i64;
            (r, r)
        } else {
            range
        };
        let ranges: Vec<(ObjectClass, (i64, i64))> = self
            .classes()
            .into_iter()
            .filter(|c| class.is_none_or(|k| k == *c))
            .map(|c| (c, range))
            .collect();
        if ranges.is_empty() {
            return Err(FitError::NoCoverage);
        }
        // a refit near a hand-placed z is always the χ² fit (a cross-correlation
        // peak needs the whole range to judge its height against)
        self.run_chi2(s, &ranges)
    }

    /// Model flux at `s.wave()` for candidate `c` (NaN where the template
    /// does not cover and outside [`Engine::fit_range`]).
    pub fn model(&self, s: &Spectrum, c: &Candidate) -> Vec<f64> {
        let e = self.matched(s);
        match e
            .units
            .iter()
            .find(|u| u.class == c.class && u.name == c.template)
        {
            Some(unit) => e.model_of(unit, s, c),
            None => vec![f64::NAN; s.len()],
        }
    }

    /// [`Engine::model`] with the unit given (also a unit made for an overlay).
    pub(crate) fn model_of(&self, unit: &Unit, s: &Spectrum, c: &Candidate) -> Vec<f64> {
        let dll = self.config.dloglam;
        let nanv = vec![f64::NAN; s.len()];
        let k = unit.k();
        let g = unit.groups;
        let kc = k * g;
        // the configured continuum terms, or those of a poor fit's refit
        let j = c.coeffs.len().saturating_sub(kc);
        if c.coeffs.len() < kc
            || (j != self.config.poly_terms && j != POOR_FIT_POLY_TERMS)
            || c.z.is_nan()
            || c.z <= -1.0
        {
            return nanv;
        }
        let w = s.wave();
        let grid =
            crate::spectrum::LogGrid::covering(w[0].max(self.reach.0), w[w.len() - 1].min(self.reach.1), dll);
        let (l0, l1) = (grid.wave(0), grid.wave(grid.n - 1));
        let shift = (1.0 + c.z).log10() / dll;
        s.wave()
            .iter()
            .map(|&lam| {
                let x = lam.log10() / dll - shift - unit.t0 as f64;
                // outside the fitted range the polynomial is not constrained
                if x < 0.0 || x > (unit.m() - 1) as f64 || lam < l0 || lam > l1 {
                    return f64::NAN;
                }
                let mut v = 0.0;
                let xl = 2.0 * (lam - l0) / (l1 - l0) - 1.0;
                for a in 0..k {
                    // template amplitude, times (1 + tilt·x) with throughput terms
                    let amp = if g == 2 {
                        c.coeffs[a] + c.coeffs[k + a] * xl
                    } else {
                        c.coeffs[a]
                    };
                    v += amp * unit.interp(a, x);
                }
                let p = legendre(j, xl);
                for q in 0..j {
                    v += c.coeffs[kc + q] * p[q];
                }
                v
            })
            .collect()
    }

    /// Prepare a spectrum as the engine sees it (resampled, masked if configured).
    pub(crate) fn prepare(&self, s: &Spectrum) -> Result<Prepared, FitError> {
        self.prepare_with(&self.config, s)
    }

    /// [`Engine::prepare`] with `config`'s continuum terms.
    fn prepare_with(&self, config: &FitConfig, s: &Spectrum) -> Result<Prepared, FitError> {
        let (dll, j) = (config.dloglam, config.poly_terms);
        let masked;
        let source = if self.config.mask_sky {
            let mut m = s.clone();
            super::sky::mask(&mut m);
            masked = m;
            &masked
        } else {
            s
        };
        let (floor, telluric) = (self.config.sys_floor, self.config.telluric_floor);
        let mut p = Prepared::with_floor(source, dll, j, self.reach, floor, telluric)?;
        p.nonneg = self.config.nonnegative;
        p.set_groups(self.units.iter().map(|u| u.groups).max().unwrap_or(1));
        Ok(p)
    }

    /// The observed range (Å) every configured class can reach: a spectrum
    /// is fitted only there, so that every class is judged on the same
    /// pixels and no class loses χ² merely because its templates stop short
    /// (e.g. stellar templates in the far UV or infrared).
    pub fn fit_range(&self) -> (f64, f64) {
        self.reach
    }

    /// χ² curves of every unit of the configured classes by the fast path
    /// (whole shifts over each class's range); for tests and benches.
    pub fn chi2_curves_fast(&self, s: &Spectrum) -> Result<Vec<Vec<f64>>, FitError> {
        self.chi2_curves_with(s, CorrPlan::Auto)
    }

    /// As [`Engine::chi2_curves_fast`] with the way the sums are computed forced.
    pub fn chi2_curves_with(&self, s: &Spectrum, plan: CorrPlan) -> Result<Vec<Vec<f64>>, FitError> {
        let prep = self.prepare(s)?;
        let mut data = DataCache::default();
        Ok(self
            .units
            .iter()
            .enumerate()
            .map(|(ui, u)| {
                let (lo, hi) = shift_range(self.config.z_range(u.class), self.config.dloglam);
                fast::chi2_curve(&self.cache, &mut data, &prep, ui, u, lo, hi, plan).0
            })
            .collect())
    }

    /// The same curves by the direct oracle ([`super::reference`]).
    pub fn chi2_curves_oracle(&self, s: &Spectrum) -> Result<Vec<Vec<f64>>, FitError> {
        let prep = self.prepare(s)?;
        Ok(self
            .units
            .iter()
            .map(|u| {
                let (lo, hi) = shift_range(self.config.z_range(u.class), self.config.dloglam);
                super::reference::chi2_curve(&prep, u, lo, hi)
            })
            .collect())
    }

    /// What the methods see of the engine.
    fn setup(&self) -> Setup<'_> {
        self.setup_with(&self.config)
    }

    /// [`Engine::setup`] with `config` (the same units and caches).
    fn setup_with<'a>(&'a self, config: &'a FitConfig) -> Setup<'a> {
        Setup {
            config,
            units: &self.units,
            cache: &self.cache,
        }
    }

    /// Prepare `s`, let `method` find its candidates over `ranges` with
    /// `config` (the engine's own, or its poor-fit variant), and assemble
    /// the result.
    fn run(
        &self,
        config: &FitConfig,
        method: &dyn FitMethod,
        s: &Spectrum,
        ranges: &[(ObjectClass, (i64, i64))],
    ) -> Result<FitResult, FitError> {
        let e = self.matched(s);
        let prep = e.prepare_with(config, s)?;
        let solution = method.solve(e.setup_with(config), &prep, ranges)?;
        finish(s, &prep, config, solution, e.stated_accuracy)
    }

    /// Cross-correlate `s` with every template of the configured classes
    /// (only those of `kind` when given); peaks sorted by r, best first, up
    /// to `n_candidates` per class separated by the minimum velocity.
    pub fn xcorr(&self, s: &Spectrum, kind: Option<TemplateKind>) -> Result<Vec<XCorrPeak>, FitError> {
        let e = self.matched(s);
        let prep = e.prepare(s)?;
        Ok(super::xcorr::peaks(e.setup(), &prep, kind, &e.full_ranges()))
    }
}

/// The χ² template fit: χ²(z) of every unit by the fast path, the deepest
/// separated minima of each class, refinement, and the ranking rules.
pub(crate) struct Chi2;

impl FitMethod for Chi2 {
    fn solve(
        &self,
        setup: Setup<'_>,
        prep: &Prepared,
        ranges: &[(ObjectClass, (i64, i64))],
    ) -> Result<Solution, FitError> {
        let dll = setup.config.dloglam;
        let mut data = DataCache::default();
        let mut curves_by_unit: Vec<Option<Vec<f64>>> = vec![None; setup.units.len()];
        // units with an unconstrained curve whose deepest minima are ranked
        // again with non-negative amplitudes, and their template sums at
        // whole shifts (the re-ranking reads them, not the pixels)
        let ranked_again = |u: &Unit| prep.nonneg && !fast::curve_constrained(prep, u);
        let mut sums_by_unit: Vec<Option<fast::ShiftSums>> = (0..setup.units.len()).map(|_| None).collect();
        let mut minima_by_class: Vec<(ObjectClass, Vec<Minimum>)> = Vec::new();
        for &(class, (lo, hi)) in ranges {
            let mut minima = Vec::new();
            for (ui, u) in setup.units.iter().enumerate().filter(|(_, u)| u.class == class) {
                let (chi2, sums) =
                    fast::chi2_curve(setup.cache, &mut data, prep, ui, u, lo, hi, CorrPlan::Auto);
                if ranked_again(u) {
                    sums_by_unit[ui] = Some(sums);
                }
                minima.extend(local_minima(&chi2).into_iter().map(|i| Minimum {
                    unit: ui,
                    shift: lo + i as i64,
                    chi2: chi2[i],
                    edge: i == 0 || i + 1 == chi2.len(),
                }));
                curves_by_unit[ui] = Some(chi2);
            }
            let min_sep = setup.min_sep_pixels();
            let n_cand = setup.config.n_candidates;
            // a star minimum faster than STAR_VMAX_KMS ranks after every other
            // class (below); it must not crowd out, by the separation rule, a
            // slightly worse minimum inside the plausible window (a
            // featureless white dwarf's flat χ²(v) has its lowest point
            // anywhere in the window, often beyond that speed)
            // (the class tested first: the other classes' thousands of
            // minima need no power of ten)
            let demoted = |m: &Minimum| {
                class == ObjectClass::Star && too_fast_star(class, 10f64.powf(m.shift as f64 * dll) - 1.0)
            };
            let mut kept = separated(minima, min_sep, 3 * n_cand, &demoted);
            for m in kept.iter_mut() {
                let u = &setup.units[m.unit];
                if ranked_again(u) {
                    // an unconstrained curve: rank its deepest minima again
                    // with non-negative template amplitudes, from the curve's
                    // own sums; a value below the curve's (the constraint can
                    // only raise χ²) or below 0 shows the sums' round-off,
                    // amplified by an ill-conditioned system (many polynomial
                    // terms): the pixels are summed again
                    let thr = thresholds(prep, u);
                    let from_sums = sums_by_unit[m.unit]
                        .as_ref()
                        .and_then(|s| s.row(m.shift))
                        .map(|row| fit_from_sums(prep, u, &row, &thr, true).chi2)
                        .filter(|&c| c >= 0.0 && c >= m.chi2 - SUMS_ROUNDOFF * m.chi2.abs());
                    m.chi2 = match from_sums {
                        Some(c) => c,
                        None => sums_fit(prep, u, m.shift as f64, &thr, true).chi2,
                    };
                }
            }
            minima_by_class.push((class, separated(kept, min_sep, n_cand, &demoted)));
        }
        // refine: Brent for each class's best minimum and for any minimum
        // within REFINE_DCHI2 of the lowest; the others from the grid parabola
        let lowest = minima_by_class
            .iter()
            .flat_map(|(_, k)| k.iter().map(|m| m.chi2))
            .fold(f64::INFINITY, f64::min);
        let mut cands: Vec<(Candidate, Minimum, f64)> = Vec::new();
        for (_, kept) in &minima_by_class {
            for (rank, m) in kept.iter().enumerate() {
                let u = &setup.units[m.unit];
                let thr = thresholds(prep, u);
                let r = if rank == 0 || m.chi2 - lowest < REFINE_DCHI2 {
                    refine(prep, u, &thr, m.shift)
                } else {
                    let curve = curves_by_unit[m.unit].as_deref().unwrap_or(&[]);
                    let lo = ranges.iter().find(|r| r.0 == u.class).map_or(m.shift, |r| r.1 .0);
                    grid_parabola(prep, u, &thr, m.shift, curve, lo)
                };
                let z = 10f64.powf(r.shift * dll) - 1.0;
                let dzdx = std::f64::consts::LN_10 * dll * (1.0 + z);
                cands.push((
                    Candidate {
                        class: u.class,
                        template: u.name.clone(),
                        z,
                        z_err: r.sigma_shift * dzdx,
                        chi2: r.fit.chi2,
                        coeffs: r.fit.coeffs,
                    },
                    *m,
                    r.shift,
                ));
            }
        }
        if cands.is_empty() {
            return Err(FitError::NoCoverage);
        }
        // rank by χ², except that a star faster than STAR_VMAX_KMS is not
        // allowed to win over a solution of another class
        let implausible = |c: &Candidate| too_fast_star(c.class, c.z);
        let any_other = cands.iter().any(|(c, _, _)| !implausible(c));
        cands.sort_by(|a, b| {
            let ka = any_other && implausible(&a.0);
            let kb = any_other && implausible(&b.0);
            ka.cmp(&kb).then(a.0.chi2.total_cmp(&b.0.chi2))
        });
        // a galaxy or quasar solution yields to a star solution whose χ² is
        // higher by less than the class basis's extra freedom is worth: inside
        // the star window a galaxy solution (FitConfig::star_window_prefers_stars),
        // anywhere either class (FitConfig::stars_priced_by_bic); the inverted
        // order leaves Δχ² < 0, so the answer is flagged ambiguous for the inspector
        let config = setup.config;
        let yields = |c: &Candidate| {
            c.class != ObjectClass::Star
                && (config.stars_priced_by_bic
                    || (config.star_window_prefers_stars
                        && c.class == ObjectClass::Galaxy
                        && velocity_sep_kms(c.z, 0.0) <= STAR_VMAX_KMS))
        };
        if yields(&cands[0].0) {
            let basis_cols = setup.units[cands[0].1.unit].cols();
            if let Some(i) = cands.iter().position(|(c, m, _)| {
                plausible_star(c)
                    && c.chi2 - cands[0].0.chi2
                        <= bic_star_allowance(prep, basis_cols, setup.units[m.unit].cols())
            }) {
                let star = cands.remove(i);
                cands.insert(0, star);
            }
        }
        let (best, best_min, best_shift) = cands[0].clone();
        let ordered: Vec<Candidate> = cands.iter().map(|(c, _, _)| c.clone()).collect();
        let best_unit = &setup.units[best_min.unit];
        // curves: one per class (stars: the unit of the class's best candidate)
        let mut curves = Vec::new();
        for &(class, (lo, _)) in ranges {
            let unit = cands
                .iter()
                .find(|(c, _, _)| c.class == class)
                .map(|(_, m, _)| m.unit);
            if let Some(ui) = unit {
                if let Some(chi2) = &curves_by_unit[ui] {
                    curves.push(Chi2Curve {
                        class,
                        template: setup.units[ui].name.clone(),
                        z: (0..chi2.len())
                            .map(|i| 10f64.powf((lo + i as i64) as f64 * dll) - 1.0)
                            .collect(),
                        chi2: chi2.clone(),
                    });
                }
            }
        }
        Ok(Solution {
            ambiguous: false,
            dchi2_cut: true,
            candidates: ordered,
            n_par: best_unit.cols() + prep.j(),
            at_edge: best_min.edge,
            negative_template: template_part_mean(prep, best_unit, best_shift, &best.coeffs) < 0.0,
            curves,
        })
    }
}

/// Widest redshift window, as ln((1 + z_hi)/(1 + z_lo)), of a class whose
/// templates must cover the whole fitted range at **every** trial redshift
/// (see [`reach`]): 0.02 ≈ ±3000 km/s, which holds the default star window
/// (±0.005) and leaves out the galaxy and quasar ranges.
pub const NARROW_WINDOW: f64 = 0.02;

/// Intersection over classes of the observed range (Å) the class's
/// templates reach at some trial redshift of its range; for a class with a
/// narrow window ([`NARROW_WINDOW`], the stars), the range its templates
/// reach at every trial redshift.
///
/// Templates are zero where they do not cover, so a trial redshift that
/// moves a template's edge across good pixels gains (or loses) the χ² those
/// pixels are fitted by the template rather than the polynomial alone. At
/// high S/N that coverage term outweighs the lines: a star window whose edges
/// sat inside the fitted range pulled an A0V standard by −100 km/s. Over a
/// narrow window the cut costs at most 1 % of the range on each side; over
/// the galaxy and quasar ranges it would cost most of the spectrum, and
/// there the term is what lets a class be judged on the same pixels as the
/// others.
fn reach(units: &[Unit], config: &FitConfig) -> (f64, f64) {
    let dll = config.dloglam;
    let mut lo = 0.0f64;
    let mut hi = f64::INFINITY;
    let mut classes: Vec<ObjectClass> = units.iter().map(|u| u.class).collect();
    classes.dedup();
    for c in classes {
        let (z0, z1) = config.z_range(c);
        let us = units.iter().filter(|u| u.class == c);
        let rest_lo = us
            .clone()
            .map(|u| u.t0 as f64 * dll)
            .fold(f64::INFINITY, f64::min);
        let rest_hi = us
            .map(|u| (u.t0 + u.m() as i64 - 1) as f64 * dll)
            .fold(f64::NEG_INFINITY, f64::max);
        let narrow = ((1.0 + z1) / (1.0 + z0)).ln() <= NARROW_WINDOW;
        let (z_lo_edge, z_hi_edge) = if narrow { (z1, z0) } else { (z0, z1) };
        lo = lo.max(10f64.powf(rest_lo) * (1.0 + z_lo_edge));
        hi = hi.min(10f64.powf(rest_hi) * (1.0 + z_hi_edge));
    }
    (lo, hi)
}

/// The smallest instrumental dispersion (km/s) that `s`'s sampling allows:
/// two of its median good pixels inside `reach` (Å) per FWHM (Nyquist
/// sampling, common practice); `None` without two adjacent good pixels.
fn sampling_sigma_kms(s: &Spectrum, reach: (f64, f64)) -> Option<f64> {
    let (w, g) = (s.wave(), s.good());
    let mut widths: Vec<f64> = (1..w.len())
        .filter(|&i| g[i - 1] && g[i] && w[i - 1] >= reach.0 && w[i] <= reach.1)
        .map(|i| C_KMS * (w[i] - w[i - 1]) / (0.5 * (w[i] + w[i - 1])))
        .filter(|v| v.is_finite() && *v > 0.0)
        .collect();
    if widths.is_empty() {
        return None;
    }
    let mid = widths.len() / 2;
    let (_, median, _) = widths.select_nth_unstable_by(mid, f64::total_cmp);
    Some(2.0 * *median / (8.0 * std::f64::consts::LN_2).sqrt())
}

/// How much higher a star's χ² may be than a galaxy's or quasar's and still
/// rank first: the Schwarz (1978) Bayesian information criterion's price of
/// the class basis's extra parameters, Δk · ln N, with N the independent good
/// pixels. A galaxy that beats every star by more is a galaxy, however slow.
fn bic_star_allowance(prep: &Prepared, basis_cols: usize, star_cols: usize) -> f64 {
    let extra = basis_cols.saturating_sub(star_cols) as f64;
    let n = (prep.n_good() as f64 / prep.oversampling).max(2.0);
    extra * n.ln()
}

/// The lowest minima, at most `n`, each at least `min_sep` pixels from
/// every lower one; minima that `demoted` marks come after all others.
fn separated(
    minima: Vec<Minimum>,
    min_sep: f64,
    n: usize,
    demoted: &dyn Fn(&Minimum) -> bool,
) -> Vec<Minimum> {
    // the demotion judged once per minimum, not at every comparison
    let mut keyed: Vec<(bool, Minimum)> = minima.into_iter().map(|m| (demoted(&m), m)).collect();
    keyed.sort_by(|a, b| a.0.cmp(&b.0).then(a.1.chi2.total_cmp(&b.1.chi2)));
    let mut kept: Vec<Minimum> = Vec::new();
    for (_, m) in keyed {
        if kept.len() >= n {
            break;
        }
        if kept.iter().all(|k| (k.shift - m.shift).abs() as f64 >= min_sep) {
            kept.push(m);
        }
    }
    kept
}

/// Indices of local minima (plateaus give their first point; ends count).
fn local_minima(v: &[f64]) -> Vec<usize> {
    let n = v.len();
    (0..n)
        .filter(|&i| {
            let left = i == 0 || v[i] < v[i - 1];
            let right = i + 1 == n || v[i] <= v[i + 1];
            left && right && v[i].is_finite()
        })
        .collect()
}

/// Mean over good pixels of the template part Σ a_k T_k of the model.
fn template_part_mean(prep: &Prepared, u: &Unit, shift: f64, coeffs: &[f64]) -> f64 {
    let (x0i, wts) = super::units::shift_at(super::sums::offset(prep, u, shift));
    let mut sum = 0.0;
    let k = u.k();
    for &i in &prep.good {
        for a in 0..k {
            let amp = if u.groups == 2 {
                coeffs[a] + coeffs[k + a] * prep.x[i]
            } else {
                coeffs[a]
            };
            sum += amp * u.interp_with(a, i as i64 + x0i, &wts);
        }
    }
    sum / prep.good.len().max(1) as f64
}

#[allow(dead_code)]
fn assert_send_sync() {
    fn is<T: Send + Sync>() {}
    is::<Engine>();
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A flat spectrum of `n` pixels linear in λ over 3600–9800 Å.
    fn linear(n: usize) -> Spectrum {
        let wave = (0..n)
            .map(|i| 3600.0 + 6200.0 * i as f64 / (n - 1) as f64)
            .collect();
        Spectrum::new(wave, vec![1.0; n], None, None, Default::default()).unwrap()
    }

    #[test]
    fn coarsely_sampled_spectra_are_fitted_with_broadened_templates() {
        let e = Engine::new(crate::templates::builtin(), FitConfig::default()).unwrap();
        assert_eq!(e.coarse.len(), COARSE_INSTRUMENT_KMS.len());
        // the copy a spectrum gets, by its instrumental σ (km/s); None = the
        // templates as made
        // none is made before a spectrum needs it
        assert!(e.coarse.iter().all(|c| c.engine.get().is_none()));
        let sigma_of = |s: &Spectrum| {
            let m = e.matched(s);
            e.coarse
                .iter()
                .find(|c| {
                    c.engine
                        .get()
                        .and_then(|x| x.as_ref())
                        .is_some_and(|x| std::ptr::eq(x, m))
                })
                .map(|c| c.sigma)
        };
        // by hand (Nyquist sampling, two pixels per FWHM: σ = 2 Δv / 2.3548):
        // 4000 pixels over 3600–9800 Å are 1.55 Å, 69.4 km/s at the median
        // pixel (≈ 6700 Å), σ ≥ 58.9 km/s: the templates' own 60 km/s
        assert_eq!(sigma_of(&linear(4000)), None);
        // 2000 pixels: 3.10 Å, 138.8 km/s, σ ≥ 117.9 km/s → the 100 km/s copy
        assert_eq!(sigma_of(&linear(2000)), Some(100.0));
        // 500 pixels: 12.4 Å, 555 km/s, σ ≥ 471 km/s → the broadest copy
        assert_eq!(sigma_of(&linear(500)), Some(290.0));
        let limit = sampling_sigma_kms(&linear(2000), e.reach).unwrap();
        assert!((limit - 117.9).abs() < 0.5, "{limit}");
        // a copy's templates are those of the engine, broadened: the same
        // units in the same order, the same light, shallower lines
        let c = e.copy(3);
        assert_eq!(c.units.len(), e.units.len());
        fn star_a(e: &Engine) -> &[f64] {
            &e.units.iter().find(|u| u.name == "star-A").unwrap().t[0]
        }
        let (sharp, broad) = (star_a(&e), star_a(c));
        let sum = |t: &[f64]| t.iter().sum::<f64>();
        let (ms, mb) = (sum(sharp), sum(broad));
        assert!((ms - mb).abs() < 1e-2 * ms, "{ms} {mb}");
        // a Gaussian smooths: less power in the second differences
        let rough = |t: &[f64]| {
            t.windows(3)
                .map(|w| (w[0] - 2.0 * w[1] + w[2]).powi(2))
                .sum::<f64>()
        };
        assert!(
            rough(broad) < 0.5 * rough(sharp),
            "{} {}",
            rough(broad),
            rough(sharp)
        );
        // a set of unknown resolution is fitted as it is
        let mut mine = crate::templates::builtin().clone();
        mine.name = "mine".into();
        let m = Engine::new(&mine, FitConfig::default()).unwrap();
        assert!(m.coarse.is_empty());
        assert!(std::ptr::eq(m.matched(&linear(500)), &m));
    }

    #[test]
    fn minima_found_and_separated() {
        let v = [3.0, 1.0, 2.0, 2.0, 0.5, 0.6];
        assert_eq!(local_minima(&v), vec![1, 4]);
    }

    #[test]
    fn star_templates_cover_the_fitted_range_at_every_trial_redshift() {
        let config = FitConfig::default();
        let e = Engine::new(crate::templates::builtin(), config.clone()).unwrap();
        let (lo, hi) = e.fit_range();
        let (z0, z1) = config.z_range(ObjectClass::Star);
        for u in e.units().iter().filter(|u| u.class == ObjectClass::Star) {
            let first = 10f64.powf(u.t0 as f64 * config.dloglam);
            let last = 10f64.powf((u.t0 + u.m() as i64 - 1) as f64 * config.dloglam);
            assert!(first * (1.0 + z1) <= lo * (1.0 + 1e-12), "{}: {first} Å", u.name);
            assert!(last * (1.0 + z0) >= hi * (1.0 - 1e-12), "{}: {last} Å", u.name);
        }
        // the wide classes keep the range they reach at some trial redshift
        let galaxies_only = Engine::new(
            crate::templates::builtin(),
            FitConfig {
                classes: vec![ObjectClass::Galaxy],
                ..FitConfig::default()
            },
        )
        .unwrap();
        assert!(galaxies_only.fit_range().0 < 1000.0);
    }

    #[test]
    fn fits_from_the_curves_sums_equal_fits_from_the_pixels() {
        // the re-ranking of a basis curve's minima reads the template sums
        // the fast path kept; at whole shifts they must give the pixel
        // pass's fit (sums_fit), constrained and not, and the curve's value
        use rand::SeedableRng;
        let e = Engine::new(crate::templates::builtin(), FitConfig::default()).unwrap();
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        for (class, z) in [(ObjectClass::Galaxy, 0.41), (ObjectClass::Quasar, 2.2)] {
            let spec = super::super::synth::SimSpec {
                class,
                z,
                snr: 8.0,
                ..Default::default()
            };
            let (s, _) = super::super::synth::simulate(crate::templates::builtin(), &spec, &mut rng).unwrap();
            let prep = e.prepare(&s).unwrap();
            let (ui, u) = e
                .units
                .iter()
                .enumerate()
                .find(|(_, u)| u.class == class)
                .unwrap();
            let (lo, hi) = shift_range(e.config.z_range(class), e.config.dloglam);
            let mut data = DataCache::default();
            let (curve, sums) = fast::chi2_curve(&e.cache, &mut data, &prep, ui, u, lo, hi, CorrPlan::Auto);
            let thr = thresholds(&prep, u);
            let best = lo
                + (0..curve.len())
                    .min_by(|&a, &b| curve[a].total_cmp(&curve[b]))
                    .unwrap() as i64;
            for shift in [best, best + 7, lo + 3, hi - 2] {
                let row = sums.row(shift).unwrap();
                let free = fit_from_sums(&prep, u, &row, &thr, false).chi2;
                assert!(
                    (free - curve[(shift - lo) as usize]).abs() <= 1e-8 * free.abs(),
                    "{class} {shift}"
                );
                for nonneg in [false, true] {
                    let a = fit_from_sums(&prep, u, &row, &thr, nonneg).chi2;
                    let b = sums_fit(&prep, u, shift as f64, &thr, nonneg).chi2;
                    assert!(
                        (a - b).abs() <= 1e-8 * b.abs(),
                        "{class} {shift} {nonneg}: {a} vs {b}"
                    );
                }
            }
            assert!(sums.row(lo - 1).is_none() && sums.row(hi + 1).is_none());
        }
    }

    #[test]
    fn shift_range_brackets_the_redshifts() {
        let (lo, hi) = shift_range((-0.005, 0.005), 1e-4);
        assert!((10f64.powf(lo as f64 * 1e-4) - 1.0) >= -0.005);
        assert!((10f64.powf(hi as f64 * 1e-4) - 1.0) <= 0.005);
        assert_eq!((lo, hi), (-21, 21));
    }
}
