/*!
The stellar populations fitted to the whole spectrum, the pixels of the
emission lines left out: which populations the galaxy holds, the set each
line window keeps to unless its own pixels ask for more
([`super::window::Window::restrict`]).

Fitted window by window from all five populations, the amplitudes of those
a galaxy lacks follow the noise at S/N 5–10; the non-negativity keeps only
their positive side, and as every population has Balmer absorption the
troughs came out too deep on average (simulated Hβ fluxes 3 % high; the
same fit without the constraint was unbiased but five times noisier in
variance). Fitted once to the few thousand pixels of the whole spectrum, as
the full-spectrum fits do (pPXF: Cappellari & Emsellem 2004), the
populations present are told from those absent by every absorption line at
once.
*/
use super::stellar::Basis;
use crate::fit::prep::{legendre_into, solve_nonneg_greedy, MAX_COLUMNS};
use crate::fit::C_KMS;
use crate::spectrum::Spectrum;

/// Half-width (km/s) of the pixels left out of the whole-spectrum fit around
/// each emission line: five times the σ of a galaxy's typical 120 km/s line
/// (our choice; the windows fit the lines and the continuum under them).
pub const LINE_MASK_KMS: f64 = 600.0;

/// Legendre terms of the additive polynomial fitted with the populations over
/// the whole spectrum (our choice: pPXF's default additive degree is 4, from
/// memory; a few more follow a flux calibration that bends over a spectrum
/// several thousand Å long). It soaks up broad shape only: each window fits
/// its own polynomial again.
pub const POLY_TERMS: usize = 8;

/// Least share of the mean |flux| that the populations must carry for a
/// mix to be returned (our choice): below it the continuum has no stellar
/// features to speak of, and the noise, not the stars, would pick the mix.
const MIN_SHARE: f64 = 1e-3;

/// Share of the populations' light below which an amplitude is taken for
/// the rounding of the solve, not a population.
const ROUNDING: f64 = 1e-9;

/// Fewest good pixels the whole-spectrum fit accepts, per column.
const PIXELS_PER_COLUMN: usize = 20;

/// Which of `basis`'s populations the whole spectrum holds: those with a
/// positive amplitude in the non-negative fit of the populations and an
/// additive polynomial ([`POLY_TERMS`]) to `s` at redshift `z`, leaving out
/// the pixels within [`LINE_MASK_KMS`] of each observed wavelength in
/// `lines`. `None` when too few pixels remain, or when the populations
/// carry almost none of the light (a continuum with no stellar features:
/// the windows then use every population).
pub fn support(s: &Spectrum, z: f64, basis: &Basis, lines: &[f64]) -> Option<Vec<bool>> {
    let nt = basis.len();
    let m = nt + POLY_TERMS;
    if m > MAX_COLUMNS || !(z > -1.0 && z.is_finite()) {
        return None;
    }
    let (r0, r1) = basis.range();
    let half = LINE_MASK_KMS / C_KMS;
    let masked = |lam: f64| lines.iter().any(|&c| (lam - c).abs() <= half * c);
    let wave = s.wave();
    let idx: Vec<usize> = (0..s.len())
        .filter(|&i| {
            let lam = wave[i];
            let rest = lam / (1.0 + z);
            s.good()[i]
                && s.ivar()[i] > 0.0
                && s.ivar()[i].is_finite()
                && s.flux()[i].is_finite()
                && rest >= r0
                && rest <= r1
                && !masked(lam)
        })
        .collect();
    if idx.len() < PIXELS_PER_COLUMN * m {
        return None;
    }
    let (lo, hi) = (wave[idx[0]], wave[idx[idx.len() - 1]]);
    let (mid, halfw) = (0.5 * (lo + hi), 0.5 * (hi - lo));
    if halfw.is_nan() || halfw <= 0.0 {
        return None;
    }
    let mut ata = vec![0.0; m * m];
    let mut atb = vec![0.0; m];
    let mut row = vec![0.0; m];
    // mean of each population and of |flux| over the pixels: the
    // populations' share of the light
    let mut mean = vec![0.0; nt];
    let mut mean_abs = 0.0;
    for &i in &idx {
        let lam = wave[i];
        if !basis.at(lam / (1.0 + z), &mut row[..nt]) {
            return None;
        }
        legendre_into((lam - mid) / halfw, &mut row[nt..]);
        let (w, f) = (s.ivar()[i], s.flux()[i]);
        for (a, r) in mean.iter_mut().zip(&row) {
            *a += r;
        }
        mean_abs += f.abs();
        for p in 0..m {
            let wp = w * row[p];
            atb[p] += wp * f;
            for (q, r) in row.iter().enumerate().take(p + 1) {
                ata[p * m + q] += wp * r;
            }
        }
    }
    for p in 0..m {
        for q in p + 1..m {
            ata[p * m + q] = ata[q * m + p];
        }
    }
    // non-negative population amplitudes, dropped greedily (as in the windows)
    let mut active = vec![true; m];
    let mut coef = vec![0.0; m];
    solve_nonneg_greedy(
        &ata,
        &atb,
        &mut active,
        &mut coef,
        &mut Vec::new(),
        |p| p < nt,
        nt,
    );
    let amp: Vec<f64> = coef[..nt].iter().map(|&c| c.max(0.0)).collect();
    let total: f64 = amp.iter().sum();
    let light: f64 = amp.iter().zip(&mean).map(|(a, m)| a * m).sum();
    if !(total > 0.0 && total.is_finite() && light > MIN_SHARE * mean_abs) {
        return None;
    }
    // the populations the whole spectrum holds: a share of the light above
    // the rounding of the solve
    Some(
        amp.iter()
            .zip(&mean)
            .map(|(a, m)| a * m > ROUNDING * light)
            .collect(),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spectrum::SpectrumMeta;

    /// `basis`'s populations mixed by `amp` at redshift `z` on log-λ pixels
    /// (69 km/s), plus `extra(λ)`, ivar 1e4, no noise.
    fn mixed(basis: &Basis, amp: &[f64], z: f64, extra: impl Fn(f64) -> f64) -> Spectrum {
        let wave: Vec<f64> = (0..3500).map(|i| 10f64.powf(3.58 + 1e-4 * i as f64)).collect();
        let mut row = vec![0.0; basis.len()];
        let flux = wave
            .iter()
            .map(|&l| {
                assert!(basis.at(l / (1.0 + z), &mut row));
                row.iter().zip(amp).map(|(r, a)| r * a).sum::<f64>() + extra(l)
            })
            .collect();
        let n = wave.len();
        Spectrum::new(wave, flux, Some(vec![1e4; n]), None, SpectrumMeta::default()).unwrap()
    }

    #[test]
    fn each_population_alone_is_held_under_a_smooth_added_continuum() {
        // each population alone, under a tilt that the additive polynomial
        // takes and an emission line that the mask keeps out: the support
        // holds it (others may join with small amplitudes: the populations
        // are near-collinear, and the solve drops small singular values)
        let b = super::super::stellar::basis();
        let z = 0.1;
        let hb = crate::lines::wave_of("Hβ") * (1.0 + z);
        for k in 0..b.len() {
            let mut amp = [0.0; 5];
            amp[k] = 1.0;
            let s = mixed(b, &amp, z, |l| {
                0.2 * (l - 6000.0) / 3000.0 + 5.0 * (-0.5 * ((l - hb) / 1.5).powi(2)).exp()
            });
            let held = support(&s, z, b, &[hb]).expect("a support");
            assert!(held[k], "population {k}: {held:?}");
        }
    }

    #[test]
    fn a_featureless_continuum_or_a_short_spectrum_gives_no_mix() {
        let b = super::super::stellar::basis();
        // a straight line: the polynomial takes it all, no population is left
        let flat = mixed(b, &[0.0; 5], 0.05, |l| 1.0 + 1e-4 * (l - 5000.0));
        assert!(support(&flat, 0.05, b, &[]).is_none());
        let short = Spectrum::new(
            vec![5000.0, 5001.0, 5002.0],
            vec![1.0; 3],
            None,
            None,
            SpectrumMeta::default(),
        )
        .unwrap();
        assert!(support(&short, 0.0, b, &[]).is_none());
        assert!(support(&flat, f64::NAN, b, &[]).is_none());
    }
}
