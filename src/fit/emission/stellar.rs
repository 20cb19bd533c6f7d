/*!
The stellar absorption basis under the emission lines: the three stellar
populations of the built-in galaxy templates **without** their nebular lines
(passive, post-starburst and young, made by our own generator in
[`crate::templates::galaxies`]) and two single hot-star populations (A and
late-B stars). Their Balmer absorption ranges from weak
(passive) to strong (A-star dominated), so a non-negative combination plus a
low-order polynomial reproduces the absorption trough under each Balmer
emission line.

Unlike the fit's galaxy templates (stars moving at 90–180 km/s), the basis is
made with the stars at rest, seen only through their own lines' width and the
instrument's, on pixels four times finer than the fit's; [`bases`] broadens it
to a ladder of galaxy dispersions. A dwarf galaxy's Balmer cores are sharper
than any population at 180 km/s, and an emission line measured in a trough
too broad and too shallow comes out low.
*/
use crate::templates::galaxies;
use crate::templates::profiles::Grid;
use std::sync::OnceLock;

/// Rest-frame grid of the basis: the built-in galaxy grid's range
/// (891–12023 Å) at a quarter of its step (17 km/s pixels), so that the
/// sharpest troughs (72 km/s: the stars' 40 and the instrument's 60 in
/// quadrature) are not smoothed by the interpolation onto the data's pixels.
const GRID: (f64, f64, f64) = (2.95, 4.08, 2.5e-5);

/// The basis: log10 λ of the first pixel, step, and one flux array per population.
pub struct Basis {
    pub(crate) grid: Grid,
    /// Flux of each population on the grid (normalised at 5400–5600 Å).
    pub flux: Vec<Vec<f64>>,
}

impl Basis {
    /// Number of populations.
    pub fn len(&self) -> usize {
        self.flux.len()
    }

    /// True when the basis holds no population.
    pub fn is_empty(&self) -> bool {
        self.flux.is_empty()
    }

    /// Rest wavelength range covered (Å).
    pub fn range(&self) -> (f64, f64) {
        (self.grid.wave(0.0), self.grid.wave((self.grid.n - 1) as f64))
    }

    /// A basis of other populations, given on a rest-frame log10-λ grid:
    /// `flux[k][i]` is population `k` at 10^(`loglam0` + i·`dloglam`) Å
    /// (vacuum). For comparisons with other population libraries (the
    /// product always uses [`basis`]). Errors on an empty or ragged set, a
    /// grid of fewer than two pixels, a bad step or non-finite values.
    pub fn on_log_grid(loglam0: f64, dloglam: f64, flux: Vec<Vec<f64>>) -> Result<Basis, String> {
        let n = flux.first().map_or(0, |f| f.len());
        if flux.is_empty() || n < 2 {
            return Err("a basis needs at least one population of two or more pixels".into());
        }
        if flux.iter().any(|f| f.len() != n) {
            return Err("the populations of a basis must share one grid".into());
        }
        if !(dloglam > 0.0 && dloglam.is_finite() && loglam0.is_finite()) {
            return Err(format!("bad log10-λ grid: start {loglam0}, step {dloglam}"));
        }
        if flux.iter().flatten().any(|v| !v.is_finite()) {
            return Err("non-finite flux in a basis population".into());
        }
        Ok(Basis {
            grid: Grid { loglam0, dloglam, n },
            flux,
        })
    }

    /// Values of every population at rest wavelength `lam` (linear
    /// interpolation in log λ) into `out`; `false` outside the grid.
    pub fn at(&self, lam: f64, out: &mut [f64]) -> bool {
        let x = self.grid.pixel(lam);
        if !(x >= 0.0 && x <= (self.grid.n - 1) as f64) {
            return false;
        }
        let i = (x.floor() as usize).min(self.grid.n - 2);
        let t = x - i as f64;
        for (o, f) in out.iter_mut().zip(&self.flux) {
            *o = f[i] * (1.0 - t) + f[i + 1] * t;
        }
        true
    }
}

/// Stellar velocity dispersions (km/s) of [`bases`]: the basis as made
/// (stars at rest) and broadened to galaxies whose stars move at 60 to 250
/// km/s, so that the measurement can choose the stellar dispersion of a
/// galaxy (a dwarf's stars move at tens of km/s, a massive galaxy's at
/// 200–300, common practice). The steps grow with σ: the troughs' total
/// widths (with the 72 km/s of [`basis`]) are 72, 94, 131, 184 and 260 km/s,
/// about 1.4 times apart.
pub const EXTRA_SIGMA_KMS: [f64; 5] = [0.0, 60.0, 110.0, 170.0, 250.0];

/// The basis at each of [`EXTRA_SIGMA_KMS`] (generated once; the first is
/// [`basis`]).
pub fn bases() -> &'static [Basis] {
    static B: OnceLock<Vec<Basis>> = OnceLock::new();
    B.get_or_init(|| {
        let b = at_rest();
        let broadened: Vec<Basis> = EXTRA_SIGMA_KMS
            .iter()
            .filter(|&&extra| extra > 0.0)
            .map(|&extra| Basis {
                grid: b.grid,
                flux: b
                    .flux
                    .iter()
                    .map(|f| crate::templates::profiles::convolve_velocity(f, &b.grid, extra))
                    .collect(),
            })
            .collect();
        std::iter::once(b).chain(broadened).collect()
    })
}

/// The shared basis, the stars at rest (generated once).
pub fn basis() -> &'static Basis {
    &bases()[0]
}

/// The basis as made: the populations with their stars at rest.
fn at_rest() -> Basis {
    let grid = Grid::new(GRID.0, GRID.1, GRID.2);
    Basis {
        grid,
        flux: vec![
            galaxies::old_at(&grid, 0.0),
            galaxies::intermediate_at(&grid, 0.0),
            galaxies::young_continuum_at(&grid, 0.0),
            // single hot-star populations: the deepest and the broadest
            // Balmer troughs
            galaxies::population(&grid, &[("star-A", 1.0)], 0.0),
            galaxies::population(&grid, &[("star-B8", 1.0)], 0.0),
        ],
    }
}
