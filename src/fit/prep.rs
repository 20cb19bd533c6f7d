/*!
A spectrum made ready for the engine: resampled onto the log10 λ grid, noise
scaled for correlated pixels, and the Legendre polynomials of the continuum
evaluated with their redshift-independent normal-equation sums.
*/
use super::config::FitError;
use crate::spectrum::{LogGrid, Spectrum};
use nalgebra::{DMatrix, DVector};

/// Fewest good grid pixels the engine accepts.
pub const MIN_PIXELS: usize = 20;

/// A spectrum on the engine grid.
#[derive(Debug, Clone)]
pub struct Prepared {
    /// The grid.
    pub grid: LogGrid,
    /// Global index of grid pixel 0 (`grid.index0()`).
    pub g0: i64,
    /// Flux (0 where bad).
    pub flux: Vec<f64>,
    /// Weights = inverse variance / oversampling (0 where bad).
    pub w: Vec<f64>,
    /// Indices of pixels with w > 0.
    pub good: Vec<usize>,
    /// Legendre polynomials P_j at each grid pixel.
    pub p: Vec<Vec<f64>>,
    /// Σ w f².
    pub fww: f64,
    /// Σ w P_i P_j (row-major J×J).
    pub pp: Vec<f64>,
    /// Σ w f P_j.
    pub pf: Vec<f64>,
    /// The resampler's oversampling factor the weights were divided by.
    pub oversampling: f64,
}

/// Legendre polynomials P_0..P_{j-1} at x ∈ [−1, 1] (Bonnet's recursion).
pub fn legendre(j: usize, x: f64) -> Vec<f64> {
    let mut out = Vec::with_capacity(j);
    for k in 0..j {
        let v = match k {
            0 => 1.0,
            1 => x,
            _ => {
                let kf = k as f64;
                ((2.0 * kf - 1.0) * x * out[k - 1] - (kf - 1.0) * out[k - 2]) / kf
            }
        };
        out.push(v);
    }
    out
}

impl Prepared {
    /// Resample `s` onto its grid of step `dll` and prepare the sums.
    pub fn new(s: &Spectrum, dll: f64, poly_terms: usize) -> Result<Prepared, FitError> {
        let grid = s.log_grid(dll);
        let r = s.resample(&grid);
        let os = if r.oversampling.is_finite() && r.oversampling >= 1.0 {
            r.oversampling
        } else {
            1.0
        };
        let n = grid.n;
        let mut w = vec![0.0; n];
        let mut flux = vec![0.0; n];
        let mut good = Vec::new();
        for i in 0..n {
            if r.ivar[i] > 0.0 && r.ivar[i].is_finite() && r.flux[i].is_finite() {
                w[i] = r.ivar[i] / os;
                flux[i] = r.flux[i];
                good.push(i);
            }
        }
        let needed = MIN_PIXELS.max(poly_terms + 2);
        if good.len() < needed {
            return Err(FitError::TooFewPixels {
                good: good.len(),
                needed,
            });
        }
        let (l0, l1) = (grid.wave(0), grid.wave(n - 1));
        let mut p = vec![vec![0.0; n]; poly_terms];
        for i in 0..n {
            let x = 2.0 * (grid.wave(i) - l0) / (l1 - l0) - 1.0;
            for (j, v) in legendre(poly_terms, x).into_iter().enumerate() {
                p[j][i] = v;
            }
        }
        let j = poly_terms;
        let mut pp = vec![0.0; j * j];
        let mut pf = vec![0.0; j];
        let mut fww = 0.0;
        for &i in &good {
            fww += w[i] * flux[i] * flux[i];
            for a in 0..j {
                pf[a] += w[i] * flux[i] * p[a][i];
                for b in 0..j {
                    pp[a * j + b] += w[i] * p[a][i] * p[b][i];
                }
            }
        }
        Ok(Prepared {
            grid,
            g0: grid.index0(),
            flux,
            w,
            good,
            p,
            fww,
            pp,
            pf,
            oversampling: os,
        })
    }

    /// Number of good pixels.
    pub fn n_good(&self) -> usize {
        self.good.len()
    }

    /// Number of polynomial terms.
    pub fn j(&self) -> usize {
        self.p.len()
    }
}

/// Solve the symmetric normal equations `a c = b` (row-major `dim × dim`).
/// Columns with `active[i] == false` get coefficient 0 and are left out.
/// The system is scaled to unit diagonal, solved by Cholesky, and by a
/// truncated SVD when Cholesky fails (singular or nearly so).
pub fn solve_normal(a: &[f64], b: &[f64], active: &[bool]) -> Vec<f64> {
    let dim = b.len();
    let idx: Vec<usize> = (0..dim).filter(|&i| active[i] && a[i * dim + i] > 0.0).collect();
    let mut c = vec![0.0; dim];
    let k = idx.len();
    if k == 0 {
        return c;
    }
    let d: Vec<f64> = idx.iter().map(|&i| a[i * dim + i].sqrt()).collect();
    let m = DMatrix::from_fn(k, k, |r, s| a[idx[r] * dim + idx[s]] / (d[r] * d[s]));
    let v = DVector::from_fn(k, |r, _| b[idx[r]] / d[r]);
    let x = match m.clone().cholesky() {
        Some(ch) => ch.solve(&v),
        None => {
            let svd = m.svd(true, true);
            match svd.solve(&v, 1e-12) {
                Ok(x) => x,
                Err(_) => DVector::zeros(k),
            }
        }
    };
    for r in 0..k {
        c[idx[r]] = x[r] / d[r];
    }
    c
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn legendre_matches_closed_forms() {
        // P2 = (3x²−1)/2, P3 = (5x³−3x)/2 (closed forms, common practice).
        for &x in &[-1.0, -0.3, 0.0, 0.7, 1.0] {
            let p = legendre(4, x);
            assert_relative_eq!(p[2], 0.5 * (3.0 * x * x - 1.0), epsilon = 1e-14);
            assert_relative_eq!(p[3], 0.5 * (5.0 * x * x * x - 3.0 * x), epsilon = 1e-14);
        }
    }

    #[test]
    fn singular_system_falls_back() {
        // two identical columns: any split of the coefficient fits; the sum must be right
        let a = [2.0, 2.0, 2.0, 2.0];
        let b = [4.0, 4.0];
        let c = solve_normal(&a, &b, &[true, true]);
        assert_relative_eq!(c[0] + c[1], 2.0, epsilon = 1e-9);
    }
}
