/*!
Building blocks of the template generator: the log10 λ grid, the Planck law,
pixel-integrated Gaussian emission lines and optical-depth profiles of
absorption lines and molecular bands.

Emission lines are integrated over each pixel (difference of error functions),
so the sum of flux density × pixel width over a line is exactly its flux — the
line ratios the generator asks for are the ratios found in the templates.
*/

use crate::constants::C_KMS;

/// A rest-frame grid uniform in log10 λ.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Grid {
    /// log10 of the first pixel centre (Å).
    pub loglam0: f64,
    /// Step in log10 λ.
    pub dloglam: f64,
    /// Number of pixels.
    pub n: usize,
}

impl Grid {
    /// Grid from `loglam0` to `loglam1` inclusive with step `dloglam`.
    pub fn new(loglam0: f64, loglam1: f64, dloglam: f64) -> Grid {
        let n = ((loglam1 - loglam0) / dloglam).round() as usize + 1;
        Grid { loglam0, dloglam, n }
    }

    /// Pixel-centre wavelengths (Å).
    pub fn waves(&self) -> Vec<f64> {
        (0..self.n).map(|i| self.wave(i as f64)).collect()
    }

    /// Wavelength at fractional pixel `x` (pixel edges are at x ± 0.5).
    pub fn wave(&self, x: f64) -> f64 {
        10f64.powf(self.loglam0 + x * self.dloglam)
    }

    /// Fractional pixel of wavelength `lam`.
    pub fn pixel(&self, lam: f64) -> f64 {
        (lam.log10() - self.loglam0) / self.dloglam
    }

    /// Pixel index range `[lo, hi)` covering `[lam_lo, lam_hi]`, clipped to the grid.
    pub fn range(&self, lam_lo: f64, lam_hi: f64) -> std::ops::Range<usize> {
        let lo = self.pixel(lam_lo).floor().max(0.0) as usize;
        let hi = (self.pixel(lam_hi).ceil() + 1.0).clamp(0.0, self.n as f64) as usize;
        lo.min(hi)..hi
    }

    /// Velocity width of one pixel (km/s).
    pub fn pixel_kms(&self) -> f64 {
        C_KMS * self.dloglam * std::f64::consts::LN_10
    }
}

/// Planck's law B_λ(T) in units of 10¹⁰ W m⁻³ sr⁻¹… scaled so values stay
/// moderate; only shapes matter here. `lam` in Å, `t` in K.
///
/// Constants: CODATA 2018 h, c, k (exact): hc/k = 1.438776877e-2 m·K.
pub fn planck(lam: f64, t: f64) -> f64 {
    const HC_K_ANG: f64 = 1.438_776_877e8; // hc/k in Å·K
    let x = HC_K_ANG / (lam * t);
    if x > 700.0 {
        return 0.0;
    }
    let l5 = (lam / 1e4).powi(5);
    1.0 / (l5 * x.exp_m1())
}

/// The error function, |error| < 1.2e-7 (Chebyshev fit of erfc, Numerical
/// Recipes 2nd ed. §6.2), deterministic on every platform that has `exp`.
pub fn erf(x: f64) -> f64 {
    let z = x.abs();
    let t = 1.0 / (1.0 + 0.5 * z);
    let poly = -z * z - 1.265_512_23
        + t * (1.000_023_68
            + t * (0.374_091_96
                + t * (0.096_784_18
                    + t * (-0.186_288_06
                        + t * (0.278_868_07
                            + t * (-1.135_203_98
                                + t * (1.488_515_87 + t * (-0.822_152_23 + t * 0.170_872_77))))))));
    let erfc = t * poly.exp();
    if x >= 0.0 {
        1.0 - erfc
    } else {
        erfc - 1.0
    }
}

/// Add a Gaussian emission line of total `flux` (flux density × Å), centred at
/// `center` Å with velocity dispersion `sigma_kms`, integrated over each pixel.
pub fn add_gaussian(flux_density: &mut [f64], grid: &Grid, center: f64, sigma_kms: f64, flux: f64) {
    let sigma = center * sigma_kms / C_KMS;
    let range = grid.range(center - 8.0 * sigma, center + 8.0 * sigma);
    let s2 = sigma * std::f64::consts::SQRT_2;
    for i in range {
        let a = grid.wave(i as f64 - 0.5);
        let b = grid.wave(i as f64 + 0.5);
        let frac = 0.5 * (erf((b - center) / s2) - erf((a - center) / s2));
        flux_density[i] += flux * frac / (b - a);
    }
}

/// An absorption line as an optical-depth profile: a Gaussian core of
/// velocity dispersion `sigma_kms` (pixel width added in quadrature so narrow
/// lines are not lost between pixel centres) plus Lorentzian (damping/Stark)
/// wings of half width `gamma` Å carrying fraction `eta` of the central depth.
/// The wing shape is (1 + (x/γ)²)^−p: p = 1 is a Lorentzian (radiation and
/// collisional damping), p = 1.25 falls off as x^−5/2 like the quasi-static
/// (Holtsmark) Stark wings of hydrogen lines (from memory).
#[derive(Debug, Clone, Copy)]
pub struct Absorber {
    /// Line centre (Å).
    pub center: f64,
    /// Central optical depth.
    pub tau0: f64,
    /// Gaussian dispersion (km/s).
    pub sigma_kms: f64,
    /// Lorentzian half width at half maximum (Å).
    pub gamma: f64,
    /// Weight of the wing part (0–1).
    pub eta: f64,
    /// Exponent p of the wing profile (1 = Lorentzian).
    pub wing: f64,
}

impl Absorber {
    /// Add this line's optical depth to `tau`.
    pub fn add_to(&self, tau: &mut [f64], grid: &Grid) {
        if self.tau0 <= 0.0 {
            return;
        }
        let pix = self.center * grid.pixel_kms() / C_KMS;
        let sig_v = self.center * self.sigma_kms / C_KMS;
        let sigma = (sig_v * sig_v + pix * pix / 12.0).sqrt();
        // Wings: out to where the Lorentzian drops to ~1e-3 of the centre.
        let half = (8.0 * sigma).max(if self.eta > 0.0 { 30.0 * self.gamma } else { 0.0 });
        for i in grid.range(self.center - half, self.center + half) {
            let x = grid.wave(i as f64) - self.center;
            let g = (-0.5 * (x / sigma).powi(2)).exp();
            let l = if self.eta > 0.0 && self.gamma > 0.0 {
                let u = 1.0 + (x / self.gamma).powi(2);
                if (self.wing - 1.0).abs() < 1e-12 {
                    1.0 / u
                } else {
                    u.powf(-self.wing)
                }
            } else {
                0.0
            };
            tau[i] += self.tau0 * ((1.0 - self.eta) * g + self.eta * l);
        }
    }
}

/// A molecular band: optical depth rising sharply at the band head and decaying
/// redward with e-folding length `length` Å (bands degraded to the red, as the
/// TiO bands of cool stars are).
pub fn add_band(tau: &mut [f64], grid: &Grid, head: f64, tau0: f64, length: f64) {
    if tau0 <= 0.0 {
        return;
    }
    for i in grid.range(head - 15.0, head + 8.0 * length) {
        let x = grid.wave(i as f64) - head;
        let shape = if x >= 0.0 {
            (-x / length).exp()
        } else {
            (-(x / 3.0).powi(2)).exp()
        };
        tau[i] += tau0 * shape;
    }
}

/// Multiply `flux` by exp(−τ).
pub fn apply_tau(flux: &mut [f64], tau: &[f64]) {
    for (f, t) in flux.iter_mut().zip(tau) {
        *f *= (-t).exp();
    }
}

/// Convolve `flux` with a Gaussian line-of-sight velocity distribution of
/// dispersion `sigma_kms` (a Gaussian in pixels on a log-λ grid). Ends are
/// extended with their edge values so the result keeps the grid's length.
pub fn convolve_velocity(flux: &[f64], grid: &Grid, sigma_kms: f64) -> Vec<f64> {
    let s = sigma_kms / grid.pixel_kms();
    if s < 0.05 || flux.is_empty() {
        return flux.to_vec();
    }
    let half = (5.0 * s).ceil() as isize;
    let kernel: Vec<f64> = (-half..=half)
        .map(|j| (-0.5 * (j as f64 / s).powi(2)).exp())
        .collect();
    let norm: f64 = kernel.iter().sum();
    let last = flux.len() as isize - 1;
    (0..flux.len() as isize)
        .map(|i| {
            kernel
                .iter()
                .enumerate()
                .map(|(k, w)| w * flux[(i + k as isize - half).clamp(0, last) as usize])
                .sum::<f64>()
                / norm
        })
        .collect()
}

/// Logistic step going from 0 (x ≪ 0) to 1 (x ≫ 0).
pub fn sigmoid(x: f64) -> f64 {
    1.0 / (1.0 + (-x).exp())
}

/// Median of the finite values of `v` over the pixels covering `[lo, hi]` Å.
pub fn median_in(v: &[f64], grid: &Grid, lo: f64, hi: f64) -> f64 {
    let mut w: Vec<f64> = v[grid.range(lo, hi)]
        .iter()
        .copied()
        .filter(|x| x.is_finite())
        .collect();
    if w.is_empty() {
        return f64::NAN;
    }
    w.sort_by(f64::total_cmp);
    w[w.len() / 2]
}

/// Hydrogen line wavelength (vacuum Å) for lower level `n1`, upper `n2` from the
/// Rydberg formula with the reduced-mass Rydberg constant R_H (CODATA R∞ and
/// mₚ/mₑ); within 0.1 Å of the NIST fine-structure centroids.
pub fn hydrogen_wave(n1: u32, n2: u32) -> f64 {
    let r_h = 109_737.315_68 / (1.0 + 1.0 / 1_836.152_673); // cm⁻¹
    let (a, b) = (f64::from(n1), f64::from(n2));
    1e8 / (r_h * (1.0 / (a * a) - 1.0 / (b * b)))
}

/// He II line wavelength (vacuum Å) for lower level `n1`, upper `n2`: the
/// Rydberg formula for a nuclear charge of 2 (1/λ = 4 R_He (1/n1² − 1/n2²))
/// with the reduced-mass constant of ⁴He (CODATA R∞ and m_α/mₑ =
/// 7294.2995, from memory); fine structure (≲ 0.1 Å in the optical) ignored.
pub fn helium_ii_wave(n1: u32, n2: u32) -> f64 {
    let r_he = 109_737.315_68 / (1.0 + 1.0 / 7_294.299_5); // cm⁻¹
    let (a, b) = (f64::from(n1), f64::from(n2));
    1e8 / (4.0 * r_he * (1.0 / (a * a) - 1.0 / (b * b)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn erf_matches_tabulated_values() {
        // Abramowitz & Stegun, Table 7.1: erf(0.5) = 0.5204998778, erf(1) = 0.8427007929,
        // erf(2) = 0.9953222650.
        assert_abs_diff_eq!(erf(0.5), 0.520_499_877_8, epsilon = 2e-7);
        assert_abs_diff_eq!(erf(1.0), 0.842_700_792_9, epsilon = 2e-7);
        assert_abs_diff_eq!(erf(-2.0), -0.995_322_265_0, epsilon = 2e-7);
        assert_abs_diff_eq!(erf(0.0), 0.0, epsilon = 2e-7);
    }

    #[test]
    fn helium_ii_lines_fall_on_their_published_wavelengths() {
        // air wavelengths of He II λ4686 and the Pickering lines n = 6, 7, 8,
        // 9, 10 (NIST Atomic Spectra Database, from memory)
        let published = [
            (3, 4, 4685.71),
            (4, 6, 6560.10),
            (4, 7, 5411.52),
            (4, 8, 4859.32),
            (4, 9, 4541.59),
            (4, 10, 4338.67),
        ];
        for (n1, n2, air) in published {
            let vac = crate::templates::stars_cool::air_to_vacuum(air);
            assert_abs_diff_eq!(helium_ii_wave(n1, n2), vac, epsilon = 0.15);
        }
    }

    #[test]
    fn gaussian_line_conserves_flux() {
        let g = Grid::new(3.6, 3.7, 1e-4);
        let mut f = vec![0.0; g.n];
        add_gaussian(&mut f, &g, 4500.0, 30.0, 7.0); // narrower than a pixel
        let total: f64 = (0..g.n)
            .map(|i| f[i] * (g.wave(i as f64 + 0.5) - g.wave(i as f64 - 0.5)))
            .sum();
        assert_abs_diff_eq!(total, 7.0, epsilon = 1e-6);
    }

    #[test]
    fn velocity_convolution_conserves_equivalent_width() {
        // Broadening moves flux around but keeps ∫(1 − f) dλ (definition of
        // the equivalent width).
        let g = Grid::new(3.6, 3.7, 1e-4);
        let mut tau = vec![0.0; g.n];
        Absorber {
            center: 4500.0,
            tau0: 2.0,
            sigma_kms: 30.0,
            gamma: 0.0,
            eta: 0.0,
            wing: 1.0,
        }
        .add_to(&mut tau, &g);
        let mut f = vec![1.0; g.n];
        apply_tau(&mut f, &tau);
        let b = convolve_velocity(&f, &g, 200.0);
        let ew = |v: &[f64]| -> f64 {
            (0..g.n)
                .map(|i| (1.0 - v[i]) * (g.wave(i as f64 + 0.5) - g.wave(i as f64 - 0.5)))
                .sum()
        };
        assert_abs_diff_eq!(ew(&f), ew(&b), epsilon = 1e-3 * ew(&f));
        assert!(
            b.iter().copied().fold(f64::INFINITY, f64::min) > f.iter().copied().fold(f64::INFINITY, f64::min)
        );
    }

    #[test]
    fn planck_peak_follows_wien() {
        // Wien's displacement law, b = 2.897771955e-3 m·K (CODATA 2018).
        for t in [3000.0, 5800.0, 10000.0] {
            let g = Grid::new(3.0, 4.5, 1e-5);
            let w = g.waves();
            let (imax, _) = w
                .iter()
                .map(|&l| planck(l, t))
                .enumerate()
                .fold((0, 0.0), |a, (i, v)| if v > a.1 { (i, v) } else { a });
            let peak = 2.897_771_955e7 / t; // Å
            assert!(
                (w[imax] - peak).abs() / peak < 2e-4,
                "T={t}: {} vs {peak}",
                w[imax]
            );
        }
    }
}
