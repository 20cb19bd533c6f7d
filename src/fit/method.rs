/*!
The engine's methods behind one small trait, and what they share.

A [`FitMethod`] turns a prepared spectrum into ranked candidates (the χ²
template fit in [`super::engine`], the classic cross-correlation in
[`super::xcorr`]); [`finish`] then assembles the one [`FitResult`] both hand
on: Δχ² to the runner-up, reduced χ², the warning bits and the emission
lines. A method sees the engine only through [`Setup`] (settings, prepared
templates, transform cache), so no method calls back into the engine.
*/
use super::config::{FitConfig, FitError};
use super::fast::FftCache;
use super::prep::Prepared;
use super::result::{Candidate, Chi2Curve, ClassSolution, FitResult, Warnings};
use super::units::Unit;
use crate::constants::C_KMS;
use crate::spectrum::Spectrum;
use crate::ObjectClass;

/// Δχ² below which the answer is called ambiguous: 9 is Δχ² for 3σ with one
/// free parameter (common practice for a redshift-confusion cut).
pub const AMBIGUOUS_DCHI2: f64 = 9.0;
/// Fastest heliocentric velocity (km/s) accepted for a star as the best
/// solution: the Galaxy's escape speed near the Sun (≈ 550 km/s) plus the
/// Sun's own orbital speed (≈ 250 km/s), both from memory. A star solution
/// beyond it stays among the candidates but ranks after every other class
/// (a passive galaxy at cz ≈ 1200 km/s otherwise can look like a G star).
pub const STAR_VMAX_KMS: f64 = 800.0;
/// Fewer good grid pixels than this set [`Warnings::FEW_PIXELS`].
pub const FEW_PIXELS: usize = 100;
/// `fit_quality` (the reduced χ² with the winning template's stated
/// accuracy allowed for) above this sets [`Warnings::POOR_FIT`].
pub const POOR_FIT_CHI2R: f64 = 2.0;
/// Δχ² between the best star and the best solution of another class below
/// which [`Warnings::CLASS_CLOSE`] is set (before the mismatch scaling of
/// [`mismatch_scale`]). Calibrated on the recovery run (README, "Warnings").
pub const CLASS_CLOSE_DCHI2: f64 = 25.0;

/// Median S/N per pixel below which the continuum is taken to carry no
/// redshift of its own, so that the emission lines alone decide it (our
/// choice, set on the demo; the default recovery run passes with it: README, "Warnings").
pub const FAINT_CONTINUUM_SNR: f64 = 2.0;
/// S/N at which an emission line counts as evidence for the redshift (a 5σ
/// detection, common practice).
pub const LINE_EVIDENCE_SNR: f64 = 5.0;
/// Detected lines closer than this fraction of their wavelength form one
/// feature (a doublet or blend fitted with tied ratios: [O II], [O III]
/// 4960/5008, Hα + [N II], [S II]); Hβ and [O III] 4960 (2 % apart) stay two.
pub const ONE_FEATURE_FRACTION: f64 = 0.015;

/// True when the redshift of a galaxy or quasar answer rests on one emission
/// feature over a continuum with no signal: every emission line detected at
/// [`LINE_EVIDENCE_SNR`] lies within one [`ONE_FEATURE_FRACTION`] group and
/// the median S/N is below [`FAINT_CONTINUUM_SNR`]. One line alone cannot tell
/// [O II] from [O III] from Hα from Lyα; the templates' fixed line ratios
/// decide among them, and template ratios are not the galaxy's.
pub fn rests_on_one_line(
    class: ObjectClass,
    lines: &[super::result::LineMeasurement],
    snr_median: f64,
) -> bool {
    let dark = snr_median < FAINT_CONTINUUM_SNR; // false for NaN: no answer, no warning
    if class == ObjectClass::Star || !dark {
        return false;
    }
    emission_features(lines) == 1
}

/// The number of emission features detected at [`LINE_EVIDENCE_SNR`]
/// (positive flux), lines closer than [`ONE_FEATURE_FRACTION`] of their
/// wavelength counting as one (a tied doublet or blend).
fn emission_features(lines: &[super::result::LineMeasurement]) -> usize {
    let mut waves: Vec<f64> = lines
        .iter()
        .filter(|m| m.flux > 0.0 && m.snr >= LINE_EVIDENCE_SNR && m.obs_wave.is_finite())
        .map(|m| m.obs_wave)
        .collect();
    waves.sort_by(f64::total_cmp);
    waves
        .windows(2)
        .filter(|w| w[1] - w[0] > ONE_FEATURE_FRACTION * w[0])
        .count()
        + usize::from(!waves.is_empty())
}

/// True when a quasar answer rests on fewer than two emission features
/// ([`emission_features`]): a quasar is known by its broad emission lines,
/// and one broad "line" can take up a mismatch of the continuum's shape, so
/// with one feature or none the class rests on the continuum, which a
/// featureless star shares (a real DC white dwarf is fitted better by a
/// quasar continuum at z ≈ 2.2, with a 2300 km/s-wide "Lyα" at S/N 10, than
/// by the blackbody template: README, "Stars").
pub fn has_few_lines(class: ObjectClass, lines: &[super::result::LineMeasurement]) -> bool {
    class == ObjectClass::Quasar && emission_features(lines) < 2
}

/// Factor by which the Δχ² cuts grow with template mismatch: the reduced χ²
/// of the best fit, at least 1. Where no template matches to the noise
/// (χ²_r > 1) every χ² difference is inflated by roughly that factor, so a
/// plain Δχ² cut would be overconfident (common practice: errors rescaled
/// by √χ²_r).
pub fn mismatch_scale(chi2_reduced: f64) -> f64 {
    if chi2_reduced.is_finite() {
        chi2_reduced.max(1.0)
    } else {
        1.0
    }
}

/// The best star against the best solution of a non-star class: true when
/// their χ² differ by less than [`CLASS_CLOSE_DCHI2`] × `scale`, whichever
/// of them is the better. `cands` is best first. When a star is the answer,
/// galaxy and quasar solutions inside the star window are left out
/// ([`star_shadow`]).
fn class_close(cands: &[Candidate], scale: f64) -> bool {
    let Some(best) = cands.first() else {
        return false;
    };
    let star = cands.iter().find(|c| c.class == ObjectClass::Star);
    let other = cands
        .iter()
        .find(|c| c.class != ObjectClass::Star && !star_shadow(best, c));
    match (star, other) {
        (Some(s), Some(o)) => (s.chi2 - o.chi2).abs() < CLASS_CLOSE_DCHI2 * scale,
        _ => false,
    }
}

/// True when `best` is a star and `c` a galaxy or quasar solution within
/// [`STAR_VMAX_KMS`] of rest: there a class basis takes up the star's own
/// light (the galaxy basis holds that of A stars), and such a solution, had
/// it won, would itself be doubted (`near_rest`). It is the star seen through
/// another basis, not another interpretation, so it does not make a star
/// answer's class close.
fn star_shadow(best: &Candidate, c: &Candidate) -> bool {
    best.class == ObjectClass::Star
        && c.class != ObjectClass::Star
        && velocity_sep_kms(c.z, 0.0) <= STAR_VMAX_KMS
}

/// What a method may use of the engine.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Setup<'a> {
    /// The settings.
    pub config: &'a FitConfig,
    /// The prepared templates.
    pub units: &'a [Unit],
    /// Cached template transforms.
    pub cache: &'a FftCache,
}

impl Setup<'_> {
    /// Classes that have templates, in unit order.
    pub fn classes(&self) -> Vec<ObjectClass> {
        let mut v: Vec<ObjectClass> = self.units.iter().map(|u| u.class).collect();
        v.dedup();
        v
    }

    /// The minimum separation of distinct solutions, in grid pixels.
    pub fn min_sep_pixels(&self) -> f64 {
        (self.config.min_separation_kms / C_KMS).ln_1p() / std::f64::consts::LN_10 / self.config.dloglam
    }
}

/// A method's answer before the shared assembly.
#[derive(Debug, Clone)]
pub(crate) struct Solution {
    /// Candidates, best first.
    pub candidates: Vec<Candidate>,
    /// Fitted columns of the best candidate (templates and polynomials), for
    /// the degrees of freedom.
    pub n_par: usize,
    /// The method's own judgement that the answer is not clear-cut.
    pub ambiguous: bool,
    /// Also call the answer ambiguous when Δχ² to the runner-up is below
    /// [`AMBIGUOUS_DCHI2`] scaled by [`mismatch_scale`] (the χ² method).
    pub dchi2_cut: bool,
    /// The best minimum sits at an edge of the redshift grid.
    pub at_edge: bool,
    /// The best fit's template part is negative.
    pub negative_template: bool,
    /// χ²(z) curves (none for methods without them).
    pub curves: Vec<Chi2Curve>,
}

/// A way of finding candidates for a prepared spectrum.
pub(crate) trait FitMethod {
    /// Candidates over `ranges` (whole shifts per class).
    fn solve(
        &self,
        setup: Setup<'_>,
        prep: &Prepared,
        ranges: &[(ObjectClass, (i64, i64))],
    ) -> Result<Solution, FitError>;
}

/// Whole-shift range for a redshift interval.
pub(crate) fn shift_range(z: (f64, f64), dll: f64) -> (i64, i64) {
    let lo = ((1.0 + z.0).max(1e-6).log10() / dll).ceil() as i64;
    let hi = ((1.0 + z.1).max(1e-6).log10() / dll).floor() as i64;
    (lo, hi.max(lo))
}

/// |Δv| between two redshifts in km/s (relativistic-free, c·|Δln(1+z)|).
pub fn velocity_sep_kms(z1: f64, z2: f64) -> f64 {
    C_KMS * ((1.0 + z1) / (1.0 + z2)).ln().abs()
}

/// A star solution too fast to be a star of the Galaxy ([`STAR_VMAX_KMS`]).
pub(crate) fn too_fast_star(class: ObjectClass, z: f64) -> bool {
    class == ObjectClass::Star && velocity_sep_kms(z, 0.0) > STAR_VMAX_KMS
}

/// A star solution inside the star window (not [`too_fast_star`]).
pub(crate) fn plausible_star(c: &Candidate) -> bool {
    c.class == ObjectClass::Star && !too_fast_star(c.class, c.z)
}

/// χ² of the runner-up distinct solution (another class, or at least the
/// minimum separation away) minus the best; `f64::MAX` when there is none.
/// Negative when a lower-χ² solution was ranked after the best. For a star
/// answer, another star solution inside the star window is not a distinct
/// solution but the same answer, a star of the Galaxy, at another velocity:
/// the answer's σ_z takes it up instead ([`star_velocity_spread`]); nor is a
/// galaxy or quasar solution inside the star window, the star's own light
/// taken up by a class basis ([`star_shadow`], as for `class_close`).
pub(crate) fn delta_chi2(cands: &[Candidate], min_separation_kms: f64) -> f64 {
    let Some(best) = cands.first() else {
        return f64::MAX;
    };
    cands
        .iter()
        .skip(1)
        .find(|c| distinct(best, c, min_separation_kms))
        .map_or(f64::MAX, |c| c.chi2 - best.chi2)
}

/// Whether `c` is another answer than `best` (see [`delta_chi2`]).
fn distinct(best: &Candidate, c: &Candidate, min_separation_kms: f64) -> bool {
    if best.class == ObjectClass::Star && (plausible_star(c) || star_shadow(best, c)) {
        return false;
    }
    c.class != best.class || velocity_sep_kms(c.z, best.z) >= min_separation_kms
}

/// For a star answer, the largest |Δz| to another star solution inside the
/// star window whose χ² is within `cut` of the best: the velocities the data
/// cannot tell apart (a featureless white dwarf's χ²(v) is flat across the
/// window). 0 for other answers.
fn star_velocity_spread(cands: &[Candidate], cut: f64) -> f64 {
    let Some(best) = cands.first().filter(|b| b.class == ObjectClass::Star) else {
        return 0.0;
    };
    cands
        .iter()
        .skip(1)
        .filter(|c| plausible_star(c) && c.chi2 - best.chi2 < cut)
        .map(|c| (c.z - best.z).abs())
        .fold(0.0, f64::max)
}

/// The reduced χ² that `poor_fit` judges: the best χ² over what the noise
/// and the winning template's known small-scale accuracy e (for the
/// built-in set [`crate::templates::stars_cool::known_accuracy`], else 0)
/// would give,
/// dof + (e² − sys_floor²)₊ · Σ w m², m the model (a template error added to
/// the noise in quadrature, as the template error function of Brammer, van
/// Dokkum & Coppi 2008, from memory; the part of e the `sys_floor` already
/// carries is not counted twice). For least squares the residual is
/// orthogonal to the model, so Σ w m² = Σ w f² − χ². For a template with no
/// measured accuracy (e = 0) this is χ²_r itself.
pub(crate) fn fit_quality(prep: &Prepared, config: &FitConfig, best: &Candidate, dof: f64, e: f64) -> f64 {
    let extra = (e * e - config.sys_floor * config.sys_floor).max(0.0);
    let model_power = (prep.fww - best.chi2).max(0.0);
    best.chi2 / (dof + extra * model_power)
}

/// The shared assembly: Δχ², reduced χ², warnings and line measurements.
/// `stated_accuracy`: the templates are the built-in set, whose M dwarfs' stated
/// accuracy `poor_fit` allows for ([`fit_quality`]).
pub(crate) fn finish(
    s: &Spectrum,
    prep: &Prepared,
    config: &FitConfig,
    mut sol: Solution,
    stated_accuracy: bool,
) -> Result<FitResult, FitError> {
    if sol.candidates.is_empty() {
        return Err(FitError::NoCoverage);
    }
    let delta_chi2 = delta_chi2(&sol.candidates, config.min_separation_kms);
    let n_good = prep.n_good();
    let dof = prep.dof(sol.n_par);
    if sol.dchi2_cut {
        // σ_z from the χ² curvature (Δχ² = 1) assumes the model fits to the
        // noise; where it does not, the residuals are wider than the errors
        // say and σ_z is rescaled by √χ²_r (common practice, as for the Δχ²
        // cuts below), each candidate by its own fit's
        for c in &mut sol.candidates {
            c.z_err *= mismatch_scale(c.chi2 / dof).sqrt();
        }
    }
    let chi2_reduced = sol.candidates[0].chi2 / dof;
    let scale = mismatch_scale(chi2_reduced);
    if sol.dchi2_cut {
        // star solutions the Δχ² cut cannot tell apart widen the velocity's σ
        // rather than make the answer ambiguous (see `delta_chi2`)
        let spread = star_velocity_spread(&sol.candidates, AMBIGUOUS_DCHI2 * scale);
        let b = &mut sol.candidates[0];
        b.z_err = b.z_err.max(spread);
    }
    let best = sol.candidates[0].clone();
    let per_class = ClassSolution::from_candidates(&sol.candidates);
    let mut warnings = Warnings::default();
    if sol.ambiguous || (sol.dchi2_cut && delta_chi2 < AMBIGUOUS_DCHI2 * scale) {
        warnings.set(Warnings::AMBIGUOUS);
    }
    if class_close(&sol.candidates, scale) {
        warnings.set(Warnings::CLASS_CLOSE);
    }
    if sol.at_edge {
        warnings.set(Warnings::AT_GRID_EDGE);
    }
    if sol.negative_template {
        warnings.set(Warnings::NEGATIVE_TEMPLATE);
    }
    if n_good < FEW_PIXELS {
        warnings.set(Warnings::FEW_PIXELS);
    }
    let accuracy = if stated_accuracy {
        crate::templates::stars_cool::known_accuracy(&best.template)
    } else {
        0.0
    };
    if fit_quality(prep, config, &best, dof, accuracy) > POOR_FIT_CHI2R {
        warnings.set(Warnings::POOR_FIT);
    }
    if s.meta.noise_estimated {
        warnings.set(Warnings::NOISE_ESTIMATED);
    }
    let lines = super::lines::measure(s, &best);
    let snr_median = s.median_snr();
    if rests_on_one_line(best.class, &lines, snr_median) {
        warnings.set(Warnings::SINGLE_LINE);
    }
    if has_few_lines(best.class, &lines) {
        warnings.set(Warnings::FEW_LINES);
    }
    if best.class != ObjectClass::Star && velocity_sep_kms(best.z, 0.0) <= STAR_VMAX_KMS {
        warnings.set(Warnings::NEAR_REST);
    }
    Ok(FitResult {
        object_id: s.meta.id.clone(),
        candidates: sol.candidates,
        delta_chi2,
        chi2_reduced,
        n_good,
        snr_median,
        warnings,
        curves: sol.curves,
        lines,
        per_class,
        refit_kept: false,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::result::LineMeasurement;

    /// A detected (or not) emission line of our list at redshift `z`.
    fn line(name: &str, z: f64, snr: f64) -> LineMeasurement {
        let rest = crate::lines::find(name)
            .unwrap_or_else(|| panic!("{name} in the line list"))
            .wave;
        LineMeasurement {
            name: name.to_string(),
            rest_wave: rest,
            obs_wave: rest * (1.0 + z),
            flux: snr,
            flux_err: 1.0,
            sigma_kms: 100.0,
            ew_rest: 10.0,
            snr,
            width_fitted: true,
            continuum: 0.0,
            abs_ew_rest: None,
        }
    }

    #[test]
    fn a_quasar_on_fewer_than_two_emission_features_is_flagged() {
        // Mg II and C III] at z = 1.2 (our line list): both at 5σ clear it,
        // one or none does not
        let z = 1.2;
        let both = vec![line("Mg II", z, 6.0), line("C III]", z, 5.0)];
        assert!(!has_few_lines(ObjectClass::Quasar, &both));
        let mut one = both.clone();
        one[1] = line("C III]", z, 4.9);
        assert!(has_few_lines(ObjectClass::Quasar, &one));
        assert!(has_few_lines(ObjectClass::Quasar, &[]));
        // absorption (negative flux) is no emission feature
        let mut neg = both.clone();
        neg[0].flux = -6.0;
        assert!(has_few_lines(ObjectClass::Quasar, &neg));
        // the two lines of a tied doublet (1 % apart) are one feature
        let doublet = vec![line("[O III] 4960", 0.3, 8.0), line("[O III] 5008", 0.3, 8.0)];
        assert!(has_few_lines(ObjectClass::Quasar, &doublet));
        // galaxies (passive ones have no line) and stars are not judged by it
        assert!(!has_few_lines(ObjectClass::Galaxy, &one));
        assert!(!has_few_lines(ObjectClass::Star, &one));
    }

    #[test]
    fn one_tied_doublet_over_a_dark_continuum_is_a_single_line() {
        // The [O III] pair (tied ratio, 1 % apart) is one feature.
        let z = 0.558;
        let pair = vec![
            line("[O III] 4960", z, 8.0),
            line("[O III] 5008", z, 8.0),
            line("Hβ", z, 1.0),
        ];
        assert!(rests_on_one_line(ObjectClass::Galaxy, &pair, 0.2));
        // Hβ detected as well (2 % bluer): two features, the redshift is pinned.
        let mut two = pair.clone();
        two[2] = line("Hβ", z, 6.0);
        assert!(!rests_on_one_line(ObjectClass::Galaxy, &two, 0.2));
        // A continuum with signal carries the redshift too.
        assert!(!rests_on_one_line(
            ObjectClass::Galaxy,
            &pair,
            FAINT_CONTINUUM_SNR
        ));
        // Stars are judged by their own rules; no line at all is not "one line".
        assert!(!rests_on_one_line(ObjectClass::Star, &pair, 0.2));
        assert!(!rests_on_one_line(
            ObjectClass::Galaxy,
            &[line("Hβ", z, 2.0)],
            0.2
        ));
    }

    #[test]
    fn a_blend_is_one_feature_and_lines_apart_are_two() {
        // Hα with [N II] 6585 (0.3 % apart) is one feature; [S II] 6718 (2.3 %
        // redder) is a second. A quasar with C IV and C III] is pinned.
        let z = 0.19;
        let blend = [line("Hα", z, 9.0), line("[N II] 6585", z, 5.0)];
        assert!(rests_on_one_line(ObjectClass::Galaxy, &blend, 0.5));
        let with_sii = [
            line("Hα", z, 9.0),
            line("[N II] 6585", z, 5.0),
            line("[S II] 6718", z, 5.0),
        ];
        assert!(!rests_on_one_line(ObjectClass::Galaxy, &with_sii, 0.5));
        let q = [line("C IV", 2.1, 12.0), line("C III]", 2.1, 6.0)];
        assert!(!rests_on_one_line(ObjectClass::Quasar, &q, 0.5));
        assert!(rests_on_one_line(ObjectClass::Quasar, &q[..1], 0.5));
    }

    fn cand(class: ObjectClass, z: f64, chi2: f64) -> Candidate {
        Candidate {
            class,
            template: class.to_string(),
            z,
            z_err: 1e-4,
            chi2,
            coeffs: Vec::new(),
        }
    }

    #[test]
    fn a_galaxy_at_rest_does_not_make_a_star_answer_class_close() {
        use ObjectClass::{Galaxy, Quasar, Star};
        // a star at −21 km/s; the galaxy basis takes up its light at rest,
        // 5 worse in χ² (as for a real A0 dwarf), and the next galaxy
        // solution, at z = 0.3, is far behind
        let star = cand(Star, -7e-5, 1000.0);
        let at_rest = cand(Galaxy, 1e-4, 1005.0);
        let far = cand(Galaxy, 0.3, 1100.0);
        assert!(!class_close(&[star.clone(), at_rest.clone(), far.clone()], 1.0));
        // a galaxy or quasar solution away from rest within the cut doubts it
        let near_in_chi2 = cand(Quasar, 2.1, 1010.0);
        assert!(class_close(&[star.clone(), at_rest.clone(), near_in_chi2], 1.0));
        // 800 km/s is the edge of the star window (cz of z = 0.0027 is 809 km/s)
        assert!(class_close(&[star.clone(), cand(Galaxy, 0.0027, 1005.0)], 1.0));
        // the scale widens the cut: 100 apart is close at χ²_r 5
        assert!(class_close(&[star.clone(), at_rest.clone(), far.clone()], 5.0));
        // a galaxy answer at rest is still judged against the best star
        assert!(class_close(&[at_rest, star], 1.0));
    }

    #[test]
    fn another_star_velocity_widens_sigma_instead_of_making_a_star_answer_ambiguous() {
        use ObjectClass::{Galaxy, Star};
        // a featureless star: its best velocity −300 km/s, another star
        // solution at +700 km/s (1000 km/s away) 2 worse in χ², a galaxy far
        // behind
        let best = cand(Star, -1e-3, 1000.0);
        let other_v = cand(Star, 2.33e-3, 1002.0);
        let galaxy = cand(Galaxy, 0.4, 1100.0);
        let cands = [best.clone(), other_v.clone(), galaxy.clone()];
        // Δχ² is to the galaxy, the next distinct answer
        assert!((delta_chi2(&cands, 1000.0) - 100.0).abs() < 1e-9);
        // the two velocities within the cut become the velocity's σ
        let spread = star_velocity_spread(&cands, AMBIGUOUS_DCHI2);
        assert!((spread - 3.33e-3).abs() < 1e-12, "{spread}");
        // beyond the cut they do not
        assert!(star_velocity_spread(&cands, 1.5).abs() < 1e-15);
        // a star solution faster than the star window is another answer
        let too_fast = cand(Star, 0.004, 1002.0);
        assert!((delta_chi2(&[best.clone(), too_fast.clone(), galaxy.clone()], 1000.0) - 2.0).abs() < 1e-9);
        assert!(star_velocity_spread(&[best, too_fast], AMBIGUOUS_DCHI2).abs() < 1e-15);
        // a galaxy answer keeps the old rule: another galaxy redshift 2 worse
        // is a distinct solution
        let g2 = cand(Galaxy, 0.5, 1102.0);
        assert!((delta_chi2(&[galaxy, g2, other_v], 1000.0) - 2.0).abs() < 1e-9);
    }
}
