/*!
Emission lines measured on top of the stellar continuum, after the method of
Sarzi et al. (2006, MNRAS 366, 1151): the stellar populations (with their
Balmer absorption), a low-order polynomial and Gaussian emission lines are
fitted **together**; at fixed line kinematics the model is linear (stellar
amplitudes kept non-negative, line fluxes free in sign), and the kinematics —
one velocity offset and one width per kind of line (permitted, forbidden) —
are found by Nelder–Mead (argmin) on the profiled χ².

- Lines that share pixels sit in one window and are fitted together (Hα with
  the [N II] doublet and [S II], Hε with [Ne III] 3969, Hγ with [O III] 4364,
  the [O II] doublet, …); doublets whose ratio atomic physics fixes are one
  column with that ratio ([`table`]).
- Galaxies: all windows share the two sets of kinematics (the same gas);
  quasars: each window has its own (broad lines differ in width and shift).
- A kind with no line detected at [`DETECT_SNR`] at the start kinematics is
  not searched for (a width fitted to noise runs away): it takes the other
  kind's kinematics (galaxies) or the start values, and its lines report
  `width_fitted = false`.
- Stars: the kinematics are not searched; their lines (chromospheric, or
  of a nebula around the star) are unresolved and at the star's velocity,
  so they are fitted at the start width and no offset (`width_fitted =
  false`). This also keeps a star's absorption-line mismatch from sending
  the search to the width bounds.
- Widths are bounded per class and kind ([`table::limits`]).
- An undetected line keeps its measured flux and error and is reported with
  a 3σ upper limit ([`LineMeasurement::upper_limit`]).
- Equivalent widths are against the fitted continuum under the line (stellar
  absorption included); for Balmer lines the stellar absorption equivalent
  width of that continuum is reported as well ([`balmer_absorption_ew`]).
*/
pub mod stellar;
pub mod table;
mod whole;
mod window;

use crate::fit::result::LineMeasurement;
use crate::fit::C_KMS;
use crate::spectrum::Spectrum;
use crate::ObjectClass;
use argmin::core::{CostFunction, Error, Executor};
use argmin::solver::neldermead::NelderMead;
use table::{limits, lines_for, margin_rest, LineKind, LineSpec};
use window::{Column, Comp, Kin, TroughColumn, TroughShape, Window};

/// S/N at or above which a line counts as detected (common practice).
pub const DETECT_SNR: f64 = 3.0;
/// Central band of the Balmer absorption equivalent width: ± this (rest Å)
/// around the line; the pseudo-continuum comes from the bands between this
/// and twice this on each side (our own definition).
pub const ABS_BAND_REST: f64 = 20.0;
/// σ (rest Å) of the broad Gaussian trough fitted under each Balmer line
/// with the stellar populations (the width of an A star's Balmer core, from
/// memory).
pub const BROAD_TROUGH_REST: f64 = 10.0;
/// Most Nelder–Mead iterations of the kinematics search.
const MAX_ITERS: u64 = 300;
/// The kinematics search stops when the χ² values at the simplex's corners
/// differ by less than this (standard deviation): a thousandth of the Δχ² = 1
/// that marks one σ, so stopping moves no line parameter by more than a
/// few per cent of its own error.
const NM_TOLERANCE: f64 = 1e-3;

/// Measure the emission lines of `class`'s line list in `s` at redshift `z`.
/// A galaxy's or a star's lines are measured on the stellar populations at
/// the dispersion the spectrum asks for ([`choose_dispersion`]).
pub fn measure(s: &Spectrum, z: f64, class: ObjectClass) -> Vec<LineMeasurement> {
    let troughs = [Trough::Gaussian(BROAD_TROUGH_REST)];
    if class == ObjectClass::Quasar {
        return measure_windows(&windows_for(s, z, class, None, &troughs), class);
    }
    choose_dispersion(s, z, class, &troughs).map_or_else(Vec::new, |d| measure_windows(&d.windows, class))
}

/// The dispersion [`choose_dispersion`] took.
struct Dispersion {
    /// Its index in [`stellar::bases`] and [`stellar::EXTRA_SIGMA_KMS`]
    /// (read by the tests).
    #[cfg_attr(not(test), allow(dead_code))]
    index: usize,
    /// The windows on that basis.
    windows: Vec<Window<'static>>,
    /// The lines' kinematics it was chosen at (read by the tests).
    #[cfg_attr(not(test), allow(dead_code))]
    kin: [Kin; 2],
}

/// The stellar dispersion of a galaxy or star: of the basis as made and
/// broadened ([`stellar::EXTRA_SIGMA_KMS`]), the one whose windows fit best
/// at the lines' own kinematics (a Balmer core of the wrong width leaves a
/// residual under the emission line). The kinematics are fitted first on the
/// middle of the ladder: chosen at the lines' start width instead, a line
/// narrower than its start was taken for a broader trough (a real dwarf
/// galaxy's 75 km/s lines chose troughs of 131 km/s and lost a fifth of
/// Hβ). `None` when no window can be made.
fn choose_dispersion(s: &Spectrum, z: f64, class: ObjectClass, troughs: &[Trough]) -> Option<Dispersion> {
    let bases = stellar::bases();
    let mid = bases.len() / 2;
    let lines = line_waves(z, class);
    let first = windows_for(s, z, class, Some(&bases[mid]), troughs);
    let set: Vec<&Window> = first.iter().collect();
    let kin = match fit_kinematics(&set, class) {
        Some((kin, _)) => kin,
        None => LineKind::ALL.map(|k| Kin {
            v: 0.0,
            sigma: limits(class, k).sigma_start,
        }),
    };
    let mut first = Some(first);
    bases
        .iter()
        .enumerate()
        .map(|(index, b)| {
            let mut windows = match first.take().filter(|_| index == mid) {
                Some(w) => w,
                None => windows_for(s, z, class, Some(b), troughs),
            };
            restrict(&mut windows, whole::support(s, z, b, &lines).as_deref(), &kin);
            let chi2: f64 = windows.iter().filter_map(|w| w.chi2(&kin)).sum();
            (chi2, Dispersion { index, windows, kin })
        })
        .filter(|(_, d)| !d.windows.is_empty())
        .min_by(|a, b| a.0.total_cmp(&b.0))
        .map(|(_, d)| d)
}

/// A trough column fitted with the stellar populations under each Balmer
/// line (widths in rest Å).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Trough {
    /// A Gaussian of σ (rest Å), free in sign: the product's, at
    /// [`BROAD_TROUGH_REST`].
    Gaussian(f64),
    /// A Stark-broadened hydrogen-line shape of core half-width w (rest
    /// Å), wings ∝ Δλ^{−5/2}, absorption only (see
    /// `window::TroughShape::Stark`); its core is rounded over the σ of the
    /// galaxies' start line width (100 km/s).
    Stark(f64),
}

/// [`measure`] on the stellar populations of `basis` in place of ours, with
/// the columns of `troughs` under each Balmer line (none when empty): for comparisons with
/// other population libraries and trough models (tests fit a real galaxy
/// this way). The product uses [`measure`].
pub fn measure_with_basis(
    s: &Spectrum,
    z: f64,
    class: ObjectClass,
    basis: &stellar::Basis,
    troughs: &[Trough],
) -> Vec<LineMeasurement> {
    let mut windows = windows_for(s, z, class, Some(basis), troughs);
    let set: Vec<&Window> = windows.iter().collect();
    if let Some((kin, _)) = fit_kinematics(&set, class) {
        let support = whole::support(s, z, basis, &line_waves(z, class));
        restrict(&mut windows, support.as_deref(), &kin);
    }
    measure_windows(&windows, class)
}

/// Each window keeps to the populations of `support` (those the whole
/// spectrum holds) unless the others are needed at the lines' kinematics
/// `kin` ([`Window::restrict`]); all populations without a support.
fn restrict(windows: &mut [Window], support: Option<&[bool]>, kin: &[Kin; 2]) {
    if let Some(sup) = support {
        for w in windows {
            w.restrict(sup, kin);
        }
    }
}

/// Observed wavelengths of `class`'s lines at `z` (the pixels the
/// whole-spectrum fit leaves out).
fn line_waves(z: f64, class: ObjectClass) -> Vec<f64> {
    lines_for(class)
        .iter()
        .map(|l| crate::lines::wave_of(l.name) * (1.0 + z))
        .collect()
}

/// The lines of `windows`: their kinematics, fluxes and errors.
fn measure_windows(windows: &[Window], class: ObjectClass) -> Vec<LineMeasurement> {
    let specs = lines_for(class);
    // kinematics: one set for all windows of a galaxy, one per window of a quasar
    let mut out: Vec<(usize, LineMeasurement)> = Vec::new();
    let sets: Vec<Vec<&Window>> = if class == ObjectClass::Quasar {
        windows.iter().map(|w| vec![w]).collect()
    } else {
        vec![windows.iter().collect()]
    };
    for set in sets {
        let Some((kin, fitted)) = fit_kinematics(&set, class) else {
            continue;
        };
        let extra = kinematic_variance(&set, &kin, fitted, class);
        for (w, ex) in set.iter().zip(&extra) {
            out.extend(report(w, &kin, fitted, specs, ex));
        }
    }
    out.sort_by_key(|(k, _)| *k);
    out.into_iter().map(|(_, m)| m).collect()
}

/// The fitting windows of `class`'s lines in `s` at `z`: lines whose
/// continuum margins overlap share one window.
fn windows_for<'b>(
    s: &Spectrum,
    z: f64,
    class: ObjectClass,
    basis: Option<&'b stellar::Basis>,
    troughs: &[Trough],
) -> Vec<Window<'b>> {
    if !(z > -1.0 && z.is_finite()) || s.len() < 2 {
        return Vec::new();
    }
    let specs = lines_for(class);
    let wave = s.wave();
    let (lo, hi) = (wave[0], wave[wave.len() - 1]);
    let start = [
        limits(class, LineKind::Permitted),
        limits(class, LineKind::Forbidden),
    ];
    // lines with a line core of good pixels and most of their margin inside
    let mut inside: Vec<(usize, f64, f64)> = Vec::new(); // (spec, centre, margin) observed Å
    for (k, l) in specs.iter().enumerate() {
        let rest = crate::lines::wave_of(l.name);
        let mu = rest * (1.0 + z);
        let margin = margin_rest(class, rest) * (1.0 + z);
        if mu - 0.5 * margin < lo || mu + 0.5 * margin > hi {
            continue;
        }
        let sl = mu * start[l.kind.index()].sigma_start / C_KMS;
        let a = wave.partition_point(|&x| x < mu - 2.0 * sl);
        let b = wave.partition_point(|&x| x <= mu + 2.0 * sl);
        if (a..b).filter(|&i| s.good()[i]).count() < 3 {
            continue;
        }
        inside.push((k, mu, margin));
    }
    // windows: lines whose margins overlap
    let mut groups: Vec<Vec<(usize, f64, f64)>> = Vec::new();
    for it in inside {
        match groups.last_mut() {
            Some(g) if it.1 - it.2 <= g.iter().map(|x| x.1 + x.2).fold(f64::MIN, f64::max) => g.push(it),
            _ => groups.push(vec![it]),
        }
    }
    let mut windows: Vec<Window<'b>> = Vec::new();
    for g in &groups {
        let a = g.iter().map(|x| x.1 - x.2).fold(f64::MAX, f64::min).max(lo);
        let b = g.iter().map(|x| x.1 + x.2).fold(f64::MIN, f64::max).min(hi);
        let mut cols: Vec<Column> = Vec::new();
        // free lines first, then tied lines join their parent's column
        for &(k, _, _) in g {
            let l = &specs[k];
            let parent_here = l
                .tie
                .is_some_and(|(p, _)| g.iter().any(|&(k2, _, _)| specs[k2].name == p));
            if !parent_here {
                cols.push(Column {
                    kind: l.kind,
                    comps: vec![Comp {
                        rest: crate::lines::wave_of(l.name),
                        weight: 1.0,
                    }],
                    lines: vec![k],
                });
            }
        }
        for &(k, _, _) in g {
            let l = &specs[k];
            if let Some((p, r)) = l.tie {
                if let Some(col) = cols.iter_mut().find(|c| specs[c.lines[0]].name == p) {
                    col.comps.push(Comp {
                        rest: crate::lines::wave_of(l.name),
                        weight: r,
                    });
                    col.lines.push(k);
                }
            }
        }
        let width_rest = (b - a) / (1.0 + z);
        let step = if basis.is_some() { 250.0 } else { 400.0 };
        let np = (2 + (width_rest / step) as usize).min(4);
        // a broad trough under each Balmer line: corrects the depth and
        // shape of the model populations' absorption where they differ
        // from the galaxy's own stars
        let broad: Vec<TroughColumn> = if basis.is_some() {
            g.iter()
                .filter(|&&(k, _, _)| specs[k].balmer)
                .flat_map(|&(_, mu, _)| troughs.iter().map(move |&t| (mu, t)))
                .map(|(mu, t)| match t {
                    Trough::Gaussian(sigma) => TroughColumn {
                        centre: mu,
                        shape: TroughShape::Gaussian {
                            sigma: sigma * (1.0 + z),
                        },
                        absorb: false,
                    },
                    Trough::Stark(w) => TroughColumn {
                        centre: mu,
                        shape: TroughShape::Stark {
                            w: w * (1.0 + z),
                            s: mu * start[0].sigma_start / C_KMS,
                        },
                        absorb: true,
                    },
                })
                .collect()
        } else {
            Vec::new()
        };
        if let Some(w) = Window::new(
            wave,
            s.flux(),
            s.ivar(),
            s.good(),
            z,
            (a, b),
            np,
            basis,
            broad,
            cols,
        ) {
            windows.push(w);
        }
    }
    windows
}

/// The profiled χ² of a set of windows as a function of the free kinematics.
struct Profiled<'a> {
    wins: &'a [&'a Window<'a>],
    class: ObjectClass,
    free: [bool; 2],
}

impl Profiled<'_> {
    /// Kinematics of both kinds from the free parameters (v, ln σ per free
    /// kind); a kind that is not free follows the other (galaxies) or keeps
    /// its start values. Returns the penalty for leaving the allowed box.
    fn kin(&self, p: &[f64]) -> ([Kin; 2], f64) {
        let mut kin = [Kin { v: 0.0, sigma: 0.0 }; 2];
        let mut pen = 0.0;
        let mut q = 0;
        for k in LineKind::ALL {
            let lim = limits(self.class, k);
            let i = k.index();
            if self.free[i] {
                let (v, s) = (p[q], p[q + 1].exp());
                q += 2;
                if v.abs() > lim.vmax {
                    pen += 1e3 * (v.abs() / lim.vmax - 1.0) + 1e3;
                }
                if s < lim.sigma_min {
                    pen += 1e3 * (lim.sigma_min / s - 1.0) + 1e3;
                } else if s > lim.sigma_max {
                    pen += 1e3 * (s / lim.sigma_max - 1.0) + 1e3;
                }
                kin[i] = Kin {
                    v: v.clamp(-lim.vmax, lim.vmax),
                    sigma: s.clamp(lim.sigma_min, lim.sigma_max),
                };
            } else {
                kin[i] = Kin {
                    v: 0.0,
                    sigma: lim.sigma_start,
                };
            }
        }
        if self.class != ObjectClass::Quasar {
            for k in LineKind::ALL {
                let (i, o) = (k.index(), 1 - k.index());
                if !self.free[i] && self.free[o] {
                    kin[i] = kin[o];
                }
            }
        }
        (kin, pen)
    }

    fn chi2(&self, kin: &[Kin; 2]) -> f64 {
        let mut sum = 0.0;
        for w in self.wins {
            match w.chi2(kin) {
                Some(c) => sum += c,
                None => return f64::MAX,
            }
        }
        sum
    }
}

impl CostFunction for Profiled<'_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, p: &Vec<f64>) -> Result<f64, Error> {
        let (kin, pen) = self.kin(p);
        Ok(self.chi2(&kin) + pen)
    }
}

/// Kinematics of both kinds for a set of windows sharing them, and whether
/// each kind's were fitted (else fixed).
fn fit_kinematics(wins: &[&Window], class: ObjectClass) -> Option<([Kin; 2], [bool; 2])> {
    if wins.is_empty() {
        return None;
    }
    let start = LineKind::ALL.map(|k| {
        let l = limits(class, k);
        Kin {
            v: 0.0,
            sigma: l.sigma_start,
        }
    });
    // a star's emission lines (chromospheric, or of a nebula around it) are
    // unresolved and at the star's own velocity: no kinematics search
    if class == ObjectClass::Star {
        let free = [false, false];
        return Some((Profiled { wins, class, free }.kin(&[]).0, free));
    }
    // detection probe at the start kinematics
    let mut best = [0.0f64; 2];
    for w in wins {
        let Some(sol) = w.solve(&start) else { continue };
        for (j, c) in w.cols.iter().enumerate() {
            let var = w.variance(&sol, j);
            if var > 0.0 && var.is_finite() {
                let snr = sol.coef[w.m() + j] / var.sqrt();
                let i = c.kind.index();
                best[i] = best[i].max(snr);
            }
        }
    }
    let free = [best[0] >= DETECT_SNR, best[1] >= DETECT_SNR];
    let prof = Profiled { wins, class, free };
    if !free[0] && !free[1] {
        return Some((prof.kin(&[]).0, free));
    }
    let mut p0 = Vec::new();
    let mut steps = Vec::new();
    for k in LineKind::ALL {
        if free[k.index()] {
            let l = limits(class, k);
            p0.extend([0.0, l.sigma_start.ln()]);
            steps.extend([0.4 * l.sigma_start, 0.4]);
        }
    }
    let mut simplex = vec![p0.clone()];
    for i in 0..p0.len() {
        let mut v = p0.clone();
        v[i] += steps[i];
        simplex.push(v);
    }
    let nm = NelderMead::new(simplex).with_sd_tolerance(NM_TOLERANCE).ok()?;
    let res = Executor::new(Profiled { wins, class, free }, nm)
        .configure(|st| st.max_iters(MAX_ITERS))
        .run()
        .ok()?;
    let p = res.state.best_param?;
    Some((prof.kin(&p).0, free))
}

/// Where each kind's kinematics come from: its own parameters when fitted,
/// the other kind's when it follows them (galaxies), none when fixed.
fn kin_sources(fitted: [bool; 2], class: ObjectClass) -> [Option<usize>; 2] {
    let mut src = [None; 2];
    for i in 0..2 {
        src[i] = if fitted[i] {
            Some(i)
        } else if fitted[1 - i] && class != ObjectClass::Quasar {
            Some(1 - i)
        } else {
            None
        };
    }
    src
}

/// Extra variance of each line column's flux from the uncertainty of the
/// fitted kinematics (shared by the windows of `set`): the Schur complement
/// of the linearised χ² Hessian, var += xᵀ S⁻¹ x with x = A⁻¹B's row and
/// S = D − Σ Bᵀ A⁻¹ B over the fitted parameters. Without it the errors
/// are those at fixed kinematics, too small for lines that set the width.
fn kinematic_variance(
    set: &[&Window],
    kin: &[Kin; 2],
    fitted: [bool; 2],
    class: ObjectClass,
) -> Vec<Vec<f64>> {
    let zeros = || set.iter().map(|w| vec![0.0; w.cols.len()]).collect::<Vec<_>>();
    let src = kin_sources(fitted, class);
    let free: Vec<usize> = (0..4).filter(|&a| fitted[a / 2]).collect();
    if free.is_empty() {
        return zeros();
    }
    let nf = free.len();
    let mut s = nalgebra::DMatrix::<f64>::zeros(nf, nf);
    let mut xs = Vec::new();
    for w in set {
        let Some(sol) = w.solve(kin) else {
            xs.push(None);
            continue;
        };
        let (b, d) = w.kin_blocks(&sol, kin, src);
        let x = w.inverse_times(&sol, &b);
        let dim = sol.coef.len();
        for (r, &a) in free.iter().enumerate() {
            for (c, &e) in free.iter().enumerate() {
                let btx: f64 = (0..dim).map(|p| b[p * 4 + a] * x[p * 4 + e]).sum();
                s[(r, c)] += d[a * 4 + e] - btx;
            }
        }
        xs.push(Some((x, w.m())));
    }
    let Some(sinv) = s.try_inverse() else {
        return zeros();
    };
    set.iter()
        .zip(xs)
        .map(|(w, x)| {
            let Some((x, m)) = x else {
                return vec![0.0; w.cols.len()];
            };
            (0..w.cols.len())
                .map(|j| {
                    let row: Vec<f64> = free.iter().map(|&a| x[(m + j) * 4 + a]).collect();
                    let mut v = 0.0;
                    for r in 0..nf {
                        for c in 0..nf {
                            v += row[r] * sinv[(r, c)] * row[c];
                        }
                    }
                    if v.is_finite() && v > 0.0 {
                        v
                    } else {
                        0.0
                    }
                })
                .collect()
        })
        .collect()
}

/// The measurements of one window at its final kinematics, keyed by their
/// index in the measured list.
fn report(
    w: &Window,
    kin: &[Kin; 2],
    fitted: [bool; 2],
    specs: &[LineSpec],
    extra: &[f64],
) -> Vec<(usize, LineMeasurement)> {
    let Some(sol) = w.solve(kin) else {
        return Vec::new();
    };
    let z = w.z();
    let scale = w.mismatch_scale(&sol);
    let mut out = Vec::new();
    for (j, col) in w.cols.iter().enumerate() {
        let var = scale * (w.variance(&sol, j) + extra.get(j).copied().unwrap_or(0.0));
        if !(var > 0.0 && var.is_finite()) {
            continue;
        }
        let (coef, err) = (sol.coef[w.m() + j], var.sqrt());
        let k = kin[col.kind.index()];
        for (c, &li) in col.comps.iter().zip(&col.lines) {
            let (mu, _) = w.centre_sigma(c.rest, k);
            let flux = coef * c.weight;
            let flux_err = err * c.weight;
            let cont = w.continuum(&sol, mu);
            let ew_rest = if cont > 0.0 {
                flux / (cont * (1.0 + z))
            } else {
                f64::NAN
            };
            let spec = &specs[li];
            let abs_ew_rest = if spec.balmer && w.has_stars() {
                balmer_absorption_ew(w, &sol, c.rest)
            } else {
                None
            };
            out.push((
                li,
                LineMeasurement {
                    name: spec.name.to_string(),
                    rest_wave: c.rest,
                    obs_wave: mu,
                    flux,
                    flux_err,
                    sigma_kms: k.sigma,
                    ew_rest,
                    snr: flux / flux_err,
                    width_fitted: fitted[col.kind.index()],
                    continuum: cont,
                    abs_ew_rest,
                },
            ));
        }
    }
    out
}

/// Rest-frame equivalent width (Å, positive for absorption) of the fitted
/// stellar continuum around a Balmer line at rest `rest`: ∫ (1 − C/P) dλ over
/// ± [`ABS_BAND_REST`], with P the straight line through the mean continuum
/// of the two side bands (our own definition, in the spirit of the Lick
/// Balmer indices). `None` when the window does not hold the bands.
pub fn balmer_absorption_ew_of(cont: impl Fn(f64) -> f64, rest: f64, z: f64) -> Option<f64> {
    const STEPS: usize = 80;
    let b = ABS_BAND_REST;
    let dl = b / STEPS as f64;
    let mean = |from: f64| -> f64 {
        (0..STEPS)
            .map(|i| cont((rest + from + (i as f64 + 0.5) * dl) * (1.0 + z)))
            .sum::<f64>()
            / STEPS as f64
    };
    let (blue, red) = (mean(-2.0 * b), mean(b));
    let (xb, xr) = (-1.5 * b, 1.5 * b);
    if !(blue > 0.0 && red > 0.0) {
        return None;
    }
    let mut ew = 0.0;
    for i in 0..2 * STEPS {
        let x = -b + (i as f64 + 0.5) * dl;
        let p = blue + (red - blue) * (x - xb) / (xr - xb);
        ew += (1.0 - cont((rest + x) * (1.0 + z)) / p) * dl;
    }
    ew.is_finite().then_some(ew)
}

fn balmer_absorption_ew(w: &Window, sol: &window::Solution, rest: f64) -> Option<f64> {
    let z = w.z();
    let b = 2.0 * ABS_BAND_REST;
    if !w.covers((rest - b) * (1.0 + z), (rest + b) * (1.0 + z)) {
        return None;
    }
    balmer_absorption_ew_of(|lam| w.continuum(sol, lam), rest, z)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spectrum::SpectrumMeta;
    use approx::assert_relative_eq;

    /// A log-λ spectrum (69 km/s pixels) of `cont(λ)` plus unit-area
    /// Gaussians (centre, σ km/s, flux), no noise, ivar 100.
    fn spectrum(cont: impl Fn(f64) -> f64, lines: &[(f64, f64, f64)]) -> Spectrum {
        let wave: Vec<f64> = (0..4000).map(|i| 10f64.powf(3.57 + 1e-4 * i as f64)).collect();
        let flux = wave
            .iter()
            .map(|&l| {
                cont(l)
                    + lines
                        .iter()
                        .map(|&(c, s, f)| {
                            let sl = c * s / C_KMS;
                            f / ((2.0 * std::f64::consts::PI).sqrt() * sl)
                                * (-0.5 * ((l - c) / sl).powi(2)).exp()
                        })
                        .sum::<f64>()
            })
            .collect();
        let n = wave.len();
        Spectrum::new(wave, flux, Some(vec![100.0; n]), None, SpectrumMeta::default()).unwrap()
    }

    #[test]
    fn tied_doublets_and_shared_kinematics_recover_the_input_fluxes() {
        // flat continuum 2 (the stellar amplitudes go to zero, the polynomial
        // takes it); [O III] 5008 flux 30 with 4960 at 30/2.98, Hβ 12, σ 90 km/s,
        // everything moved by +25 km/s from z
        let z = 0.05;
        let dv = 1.0 + 25.0 / C_KMS;
        let at = |name: &str| crate::lines::wave_of(name) * (1.0 + z) * dv;
        let s = spectrum(
            |_| 2.0,
            &[
                (at("[O III] 5008"), 90.0, 30.0),
                (at("[O III] 4960"), 90.0, 30.0 / table::OIII_5008_4960),
                (at("Hβ"), 90.0, 12.0),
            ],
        );
        let m = measure(&s, z, ObjectClass::Galaxy);
        let get = |n: &str| m.iter().find(|l| l.name == n).unwrap();
        assert_relative_eq!(get("[O III] 5008").flux, 30.0, max_relative = 2e-3);
        assert_relative_eq!(get("[O III] 4960").flux, 30.0 / 2.98, max_relative = 2e-3);
        assert_relative_eq!(get("Hβ").flux, 12.0, max_relative = 5e-3);
        assert_relative_eq!(get("[O III] 5008").sigma_kms, 90.0, max_relative = 5e-3);
        assert_relative_eq!(
            get("[O III] 5008").obs_wave,
            at("[O III] 5008"),
            max_relative = 2e-6
        );
        // EW_rest = F / (C (1+z)) against the continuum under the line
        assert_relative_eq!(
            get("[O III] 5008").ew_rest,
            30.0 / (2.0 * 1.05),
            max_relative = 3e-3
        );
        assert!(get("Hβ").width_fitted && get("Hβ").detected());
        // an absent line: flux near zero, not detected, a 3σ upper limit
        // (Hγ's error, 0.4, is about twice the pixel noise's alone: the
        // emission Gaussian shares its pixels with the stellar Balmer core)
        let hg = get("Hγ");
        assert!(
            !hg.detected() && hg.upper_limit().is_some_and(|u| u > 0.0 && u < 1.5),
            "{hg:?}"
        );
    }

    #[test]
    fn no_line_at_all_fixes_the_widths_and_gives_upper_limits() {
        let s = spectrum(|l| 1.0 + 1e-4 * (l - 5000.0), &[]);
        let m = measure(&s, 0.1, ObjectClass::Galaxy);
        assert!(!m.is_empty());
        for l in &m {
            assert!(!l.width_fitted && l.upper_limit().is_some(), "{l:?}");
        }
    }

    #[test]
    fn stellar_balmer_absorption_is_not_negative_emission() {
        // the intermediate-age population alone (deep Balmer absorption), no
        // emission: Hβ must not come out as a significant negative line, and
        // its absorption EW is reported
        let b = stellar::basis();
        let z = 0.02;
        let s = spectrum(
            |l| {
                let mut row = vec![0.0; b.len()];
                b.at(l / (1.0 + z), &mut row);
                row[1]
            },
            &[],
        );
        let m = measure(&s, z, ObjectClass::Galaxy);
        let hb = m.iter().find(|l| l.name == "Hβ").unwrap();
        assert!(hb.flux.abs() < 3.0 * hb.flux_err + 1e-3 * hb.continuum, "{hb:?}");
        assert!(hb.abs_ew_rest.is_some_and(|e| e > 1.0), "{hb:?}");
    }

    #[test]
    fn bad_redshifts_and_tiny_spectra_give_nothing_not_a_panic() {
        let s = spectrum(|_| 1.0, &[]);
        for z in [f64::NAN, -1.0, -2.0, f64::INFINITY, 50.0] {
            assert!(measure(&s, z, ObjectClass::Galaxy).is_empty(), "z = {z}");
        }
        let tiny = Spectrum::new(
            vec![5000.0, 5001.0],
            vec![1.0, 1.0],
            None,
            None,
            SpectrumMeta::default(),
        )
        .unwrap();
        for c in ObjectClass::ALL {
            assert!(measure(&tiny, 0.0, c).is_empty());
        }
    }

    #[test]
    fn the_stellar_dispersion_chosen_is_the_one_the_spectrum_has() {
        // a galaxy made of the basis's own post-starburst population (strong
        // Balmer troughs) at each dispersion of the ladder, with Hβ and
        // [O III] in emission narrower (80 km/s) and broader (130 km/s) than
        // their start width (100): the choice, made at the lines' fitted
        // kinematics, finds the dispersion. (Made at the start width, it took
        // +0 for a +90 km/s galaxy with 80 km/s lines.)
        let z = 0.05;
        for line_sigma in [80.0, 130.0] {
            for (i, (b, extra)) in stellar::bases().iter().zip(stellar::EXTRA_SIGMA_KMS).enumerate() {
                let rest =
                    stellar::Basis::on_log_grid(b.grid.loglam0, b.grid.dloglam, vec![b.flux[1].clone()])
                        .unwrap();
                let at = |name: &str| crate::lines::wave_of(name) * (1.0 + z);
                let s = spectrum(
                    |l| {
                        let mut one = [0.0];
                        rest.at(l / (1.0 + z), &mut one);
                        one[0]
                    },
                    &[(at("Hβ"), line_sigma, 3.0), (at("[O III] 5008"), line_sigma, 5.0)],
                );
                let d = choose_dispersion(&s, z, ObjectClass::Galaxy, &[Trough::Gaussian(BROAD_TROUGH_REST)])
                    .expect("windows");
                assert_eq!(
                    d.index,
                    i,
                    "made with {extra} km/s, lines at {line_sigma}: chose {} km/s",
                    stellar::EXTRA_SIGMA_KMS[d.index]
                );
                assert!((d.kin[1].sigma / line_sigma - 1.0).abs() < 0.1, "{:?}", d.kin);
            }
        }
    }
}
