/*!
Estimates over a whole catalogue from a stratified random sample, with
confidence intervals.

Every quantity the audit reports is a ratio of two population totals,
R = Y / X, where each object contributes `y` (e.g. 1 if the photometric class
is star and the vetted class quasar) and `x` (1 if the object belongs to the
quantity's domain, e.g. every object for a confusion cell, or the objects
vetted as quasars for the completeness of quasars). A proportion over the
whole catalogue is the case x = 1.

- **Point estimate:** the stratified (Horvitz–Thompson) totals
  Ŷ = Σ_h N_h ȳ_h and X̂ = Σ_h N_h x̄_h over the vetted sample objects of
  each stratum h (N_h objects in the catalogue), R̂ = Ŷ / X̂ — the combined
  ratio estimator (Cochran 1977, *Sampling Techniques*, §6.11). Weighting each
  vetted object by N_h / n_h treats the sample objects not yet vetted as
  missing at random within their stratum.
- **Variance:** by linearisation, with d_i = y_i − R̂ x_i,
  V(R̂) = X̂⁻² Σ_h N_h² (1 − n_h/N_h) s²_{d,h} / n_h (Cochran 1977, eq. 6.49,
  stratified). A stratum with a single vetted object has no s²; it is given
  the largest variance an indicator can have, 1/4 (conservative).
- **Interval:** the Wilson score interval (Wilson 1927) evaluated at the
  effective sample size n* = R̂(1 − R̂) / Ṽ(R̂) — the approach of Korn &
  Graubard (1998, *Survey Methodology* 24, 193) for proportions estimated
  from complex samples. n* is not truncated at the sample size: a
  stratification that explains part of the variance (design effect < 1)
  legitimately narrows the interval, and the truncation made the intervals
  over-cover (97 % for a nominal 95 % in the coverage test). Ṽ is V with
  each stratum's residual variance smoothed by z² pseudo-objects at the
  pooled rate (`smoothed_s2`), so a stratum that drew no error does not
  claim certainty. When R̂ is 0 or 1 the domain's object count is used.
  Unlike R̂ ± 1.96·√V it stays inside [0, 1] and behaves near 0 and 1, where
  error rates live. Its coverage is checked by simulation in the tests.

Strata without any vetted object carry no information; they are left out
and the share of the catalogue they hold is reported beside the estimates
([`Estimate::coverage`]).
*/
use serde::Serialize;

/// The normal quantile for a two-sided 95 % interval.
pub const Z95: f64 = 1.959_963_984_540_054;

/// Wilson score interval for a proportion `p` observed on `n` trials at
/// normal quantile `z` (Wilson 1927, JASA 22, 209). `n` may be fractional
/// (an effective sample size). For `n ≤ 0` the interval is [0, 1].
pub fn wilson(p: f64, n: f64, z: f64) -> (f64, f64) {
    if n.is_nan() || n <= 0.0 || !p.is_finite() {
        return (0.0, 1.0);
    }
    let p = p.clamp(0.0, 1.0);
    let z2 = z * z;
    let denom = 1.0 + z2 / n;
    let centre = (p + z2 / (2.0 * n)) / denom;
    let half = z / denom * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    ((centre - half).max(0.0), (centre + half).min(1.0))
}

/// One vetted sample object's contribution to a ratio: its stratum, its
/// numerator value `y` and its domain value `x`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Obs {
    /// Index into the strata sizes.
    pub stratum: usize,
    /// Numerator value (an indicator for rates, a squared error for the Brier score).
    pub y: f64,
    /// Domain value (1 if the object belongs to the quantity's domain).
    pub x: f64,
}

/// An estimate with its 95 % interval.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Estimate {
    /// The estimate R̂ (NaN when the domain is empty).
    pub value: f64,
    /// Lower end of the 95 % interval.
    pub lo: f64,
    /// Upper end.
    pub hi: f64,
    /// Standard error from the linearised stratified variance.
    pub se: f64,
    /// Vetted objects in the domain (x > 0).
    pub n: usize,
    /// Effective sample size used for the interval.
    pub n_eff: f64,
    /// Share of the catalogue in strata that have at least one vetted object.
    pub coverage: f64,
}

impl Estimate {
    /// Width of the interval.
    pub fn width(&self) -> f64 {
        self.hi - self.lo
    }

    /// True when there was something to estimate from.
    pub fn is_defined(&self) -> bool {
        self.value.is_finite()
    }
}

/// Sums per stratum for the ratio estimator.
struct StratumSums {
    n: usize,
    sy: f64,
    sx: f64,
}

/// The within-stratum variance of the residuals d = y − r·x with z²·x̄_h
/// pseudo-objects added, a share r of them with y = 1 (d = 1 − r) and the
/// rest with y = 0 (d = −r) — the Agresti–Coull idea (Agresti & Coull 1998,
/// *Am. Stat.* 52, 119) of adding z² pseudo-trials, centred here on the
/// pooled estimate instead of 1/2 so that a rare error does not get an
/// error rate of several per cent in every stratum. A stratum whose draw
/// holds no error (or no success) then no longer claims zero variance, and
/// a stratum with few draws does not understate it. Used only for the
/// effective sample size; the reported standard error is the plain
/// linearised one.
fn smoothed_s2(obs: &[Obs], h: usize, r: f64, s: &StratumSums) -> f64 {
    // z² pseudo-objects of the stratum's domain share, split as the pooled
    // estimate r: z²·r with y = 1, z²·(1 − r) with y = 0.
    let c = Z95 * Z95 * (s.sx / s.n as f64);
    let (c1, c0) = (c * r, c * (1.0 - r));
    let w = s.n as f64 + c;
    let sum_d: f64 = s.sy - r * s.sx + c1 * (1.0 - r) - c0 * r;
    let m = sum_d / w;
    let mut ss = c1 * (1.0 - r - m).powi(2) + c0 * (-r - m).powi(2);
    for o in obs.iter().filter(|o| o.stratum == h) {
        ss += (o.y - r * o.x - m).powi(2);
    }
    if w > 1.0 {
        ss / (w - 1.0)
    } else {
        0.25
    }
}

/// How the interval is drawn around the ratio.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IntervalKind {
    /// Wilson at the effective sample size: for proportions and rates in [0, 1].
    Wilson,
    /// R̂ ± z·se, for means that are not proportions (the Brier score), clipped at 0.
    Normal,
}

/// What one pass over the vetted objects gives: per-stratum sums, the
/// totals Ŷ and X̂, the ratio and each stratum's plain residual variance s².
struct Pass {
    sums: Vec<StratumSums>,
    x_hat: f64,
    /// R̂ (NaN when X̂ is not positive).
    r: f64,
    /// s²_{d,h} per stratum (1/4 for a stratum with one object, 0 for none).
    s2: Vec<f64>,
}

fn pass(sizes: &[usize], obs: &[Obs]) -> Pass {
    let mut sums: Vec<StratumSums> = sizes
        .iter()
        .map(|_| StratumSums {
            n: 0,
            sy: 0.0,
            sx: 0.0,
        })
        .collect();
    for o in obs {
        if let Some(s) = sums.get_mut(o.stratum) {
            s.n += 1;
            s.sy += o.y;
            s.sx += o.x;
        }
    }
    let (mut y_hat, mut x_hat) = (0.0, 0.0);
    for (&big_n, s) in sizes.iter().zip(&sums) {
        if s.n > 0 {
            y_hat += big_n as f64 * s.sy / s.n as f64;
            x_hat += big_n as f64 * s.sx / s.n as f64;
        }
    }
    if x_hat.is_nan() || x_hat <= 0.0 {
        let s2 = vec![0.0; sizes.len()];
        return Pass {
            sums,
            x_hat,
            r: f64::NAN,
            s2,
        };
    }
    let r = y_hat / x_hat;
    // Linearised variance: residuals d = y − r·x, their variance within each stratum.
    let mut ss = vec![0.0; sizes.len()];
    for o in obs {
        if let (Some(s), Some(acc)) = (sums.get(o.stratum), ss.get_mut(o.stratum)) {
            let mean_d = (s.sy - r * s.sx) / s.n as f64;
            *acc += (o.y - r * o.x - mean_d).powi(2);
        }
    }
    let s2 = sums
        .iter()
        .zip(&ss)
        .map(|(s, &acc)| match s.n {
            0 => 0.0,
            1 => 0.25,
            n => acc / (n as f64 - 1.0),
        })
        .collect();
    Pass { sums, x_hat, r, s2 }
}

/// Stratified combined-ratio estimate of Σy / Σx over the catalogue.
/// `sizes[h]` is N_h, the number of catalogue objects in stratum h; `obs`
/// are the vetted sample objects.
pub fn ratio(sizes: &[usize], obs: &[Obs], kind: IntervalKind) -> Estimate {
    let Pass { sums, x_hat, r, s2 } = pass(sizes, obs);
    let total: f64 = sizes.iter().map(|&n| n as f64).sum();
    let covered: f64 = sizes
        .iter()
        .zip(&sums)
        .filter(|(_, s)| s.n > 0)
        .map(|(&n, _)| n as f64)
        .sum();
    let n_domain = obs.iter().filter(|o| o.x > 0.0).count();
    let coverage = if total > 0.0 { covered / total } else { 0.0 };
    if r.is_nan() {
        return Estimate {
            value: f64::NAN,
            lo: 0.0,
            hi: 1.0,
            se: f64::NAN,
            n: n_domain,
            n_eff: 0.0,
            coverage,
        };
    }
    let mut var = 0.0;
    // The same sum with each stratum's residuals smoothed by pseudo-objects
    // (see `smoothed_s2`), used only for the effective sample size.
    let mut var_smooth = 0.0;
    for (h, ((&big_n, s), &s2)) in sizes.iter().zip(&sums).zip(&s2).enumerate() {
        if s.n == 0 {
            continue;
        }
        let n = s.n as f64;
        let fpc = (1.0 - n / big_n as f64).max(0.0);
        var += (big_n as f64).powi(2) * fpc * s2 / n;
        var_smooth += (big_n as f64).powi(2) * fpc * smoothed_s2(obs, h, r, s) / n;
    }
    var /= x_hat * x_hat;
    var_smooth /= x_hat * x_hat;
    let se = var.sqrt();
    let (lo, hi, n_eff) = match kind {
        IntervalKind::Wilson => {
            let n_dom = n_domain as f64;
            let n_eff = if var_smooth > 0.0 && r * (1.0 - r) > 0.0 {
                r * (1.0 - r) / var_smooth
            } else {
                n_dom
            };
            let (lo, hi) = wilson(r, n_eff, Z95);
            (lo, hi, n_eff)
        }
        IntervalKind::Normal => ((r - Z95 * se).max(0.0), r + Z95 * se, n_domain as f64),
    };
    Estimate {
        value: r,
        lo,
        hi,
        se,
        n: n_domain,
        n_eff,
        coverage,
    }
}

/// The sample size in one stratum that would bring the variance of an
/// estimate to `target_var` if only that stratum grew, given the present
/// per-stratum variance contributions `parts` (summing to the present
/// variance) and present sizes `n`. `None` when growing that stratum alone
/// cannot get there.
pub fn grow_one_stratum(parts: &[f64], n: &[usize], h: usize, target_var: f64) -> Option<usize> {
    let total: f64 = parts.iter().sum();
    let (c, nh) = (*parts.get(h)?, *n.get(h)? as f64);
    let rest = total - c;
    let room = target_var - rest;
    if room.is_nan() || room <= 0.0 || c.is_nan() || c <= 0.0 || nh < 1.0 {
        return None;
    }
    // c·n_h/(n_h + m) ≤ room  ⇔  m ≥ n_h (c/room − 1)
    let m = (nh * (c / room - 1.0)).ceil().max(0.0);
    Some(m as usize)
}

/// Per-stratum variance contributions of the ratio estimate (the terms of
/// the variance sum in [`ratio`], without the finite-population factor, for
/// planning).
pub fn variance_parts(sizes: &[usize], obs: &[Obs]) -> (Vec<f64>, Vec<usize>) {
    let Pass { sums, x_hat, r, s2 } = pass(sizes, obs);
    let n: Vec<usize> = sums.iter().map(|s| s.n).collect();
    if r.is_nan() {
        return (vec![0.0; sizes.len()], n);
    }
    let parts = sizes
        .iter()
        .zip(&n)
        .zip(&s2)
        .map(|((&big_n, &nh), &s2)| {
            if nh == 0 {
                0.0
            } else {
                (big_n as f64).powi(2) * s2 / nh as f64 / (x_hat * x_hat)
            }
        })
        .collect();
    (parts, n)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_simple_random_sample_is_the_plain_proportion() {
        // One stratum, no finite-population correction to speak of: the
        // estimate is k/n and its standard error √(p(1−p)/(n−1)) (s² taken
        // with n − 1). The z² pseudo-objects at the pooled rate add z²·p(1−p)
        // to the sum of squares and z² to the count, so
        // n* = n (n + z² − 1)/(n + z²) = 39.09 for n = 40, and the interval is
        // Wilson's at that n*.
        let obs: Vec<Obs> = (0..40)
            .map(|i| Obs {
                stratum: 0,
                y: f64::from(u8::from(i < 10)),
                x: 1.0,
            })
            .collect();
        let e = ratio(&[1_000_000_000], &obs, IntervalKind::Wilson);
        assert!((e.value - 0.25).abs() < 1e-12);
        assert!(
            (e.se - (0.25f64 * 0.75 / 39.0).sqrt()).abs() < 1e-8,
            "se = {}",
            e.se
        );
        let z2 = Z95 * Z95;
        let n_star = 40.0 * (40.0 + z2 - 1.0) / (40.0 + z2);
        assert!((e.n_eff - n_star).abs() < 1e-4, "n* = {} vs {n_star}", e.n_eff);
        let (lo, hi) = wilson(0.25, n_star, Z95);
        assert!((e.lo - lo).abs() < 1e-6 && (e.hi - hi).abs() < 1e-6);
    }

    #[test]
    fn empty_domains_and_unvetted_strata_are_reported_not_invented() {
        let obs = [Obs {
            stratum: 0,
            y: 0.0,
            x: 0.0,
        }];
        let e = ratio(&[10, 30], &obs, IntervalKind::Wilson);
        assert!(!e.is_defined());
        assert!((e.coverage - 0.25).abs() < 1e-12);
    }

    #[test]
    fn growing_a_stratum_reaches_the_target_variance() {
        let parts = [4.0, 1.0];
        let n = [10, 10];
        // target 2.5 → stratum 0 must fall from 4 to 1.5: 10·4/(10+m) ≤ 1.5 → m ≥ 16.67
        assert_eq!(grow_one_stratum(&parts, &n, 0, 2.5), Some(17));
        // stratum 1 alone cannot bring 5 down to 2.5
        assert_eq!(grow_one_stratum(&parts, &n, 1, 2.5), None);
    }
}
