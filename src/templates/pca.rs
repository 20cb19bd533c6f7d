/*!
Weighted principal components of noisy, gappy spectra, and principal angles
between subspaces.

[`empca`] implements expectation-maximisation PCA with per-pixel weights as
published by Bailey (2012, PASP 124, 1015, "Principal Component Analysis with
Noisy and/or Missing Data", §3): starting from trial vectors φ_k it
alternates
- the E-step: per spectrum n, the coefficients c_n minimising
  Σ_j w_nj (x_nj − Σ_k c_nk φ_kj)² (weighted least squares);
- the M-step: per pixel j, the values φ_·j minimising Σ_n w_nj (x_nj −
  c_n·φ_·j)² — Bailey's update φ_kj = Σ_n w_nj c_nk x_nj / Σ_n w_nj c_nk²
  solved for all K components of the pixel jointly rather than one after
  the other on the residual; both minimise the same weighted χ², but when
  whole blocks of pixels are missing (rest-frame coverage that moves with
  redshift) the one-at-a-time update crawls (tests: 400 iterations still
  left a simulated basis 4–8° off), the joint one does not; then the
  vectors are orthonormalised (Gram–Schmidt).

After convergence the vectors are rotated within their span onto the
principal axes of the coefficients (eigenvectors of Σ_n c_n c_nᵀ, largest
first), so that they come in order of the power they carry.
A pixel with weight 0 (a gap, a masked pixel, no coverage) simply drops out of
both sums, and the weights (inverse variances) let good pixels count more than
noisy ones. The data are not mean-subtracted: the first vector takes the place
of the mean spectrum, so that a redshift fit with free amplitudes spans the
same space.

[`empca_clipped`] adds the outlier rejection: after each fit, every spectrum's
reduced χ² against its own reconstruction is compared with the median over
the kept spectra; spectra above median + κ·σ (σ = 1.4826 × the median
absolute deviation, a robust standard deviation — common practice) and above
twice the median are set aside and the basis is fitted again; every spectrum
is judged again against each new basis, until the kept set stops changing.

[`principal_angles`] measures how far two subspaces are apart (Björck & Golub
1973, Math. Comp. 27, 579): with orthonormal bases Q₁, Q₂ the cosines of the
angles are the singular values of Q₁ᵀQ₂; small angles are taken from the
sines, the singular values of Q₂ − Q₁Q₁ᵀQ₂, which keep their precision there
(Knyazev & Argentati 2002, SIAM J. Sci. Comput. 23, 2008).
*/
#![allow(clippy::needless_range_loop)]

use nalgebra::DMatrix;
use rand::{Rng, SeedableRng};

/// Why a PCA could not be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum PcaError {
    /// Data and weights do not have the same shape.
    #[error("data and weights differ in shape")]
    Shape,
    /// Fewer usable spectra than components.
    #[error("{spectra} usable spectra cannot determine {components} components")]
    TooFew {
        /// Spectra with any positive weight.
        spectra: usize,
        /// Components asked for.
        components: usize,
    },
    /// Zero components, or more pixels than data.
    #[error("{0}")]
    Invalid(String),
}

/// Settings of [`empca`].
#[derive(Debug, Clone, PartialEq)]
pub struct EmpcaOptions {
    /// Number of components K (≥ 1).
    pub components: usize,
    /// Most EM iterations.
    pub iterations: usize,
    /// Stop when every vector changes by less than this (1 − |φ_new·φ_old|).
    pub tolerance: f64,
    /// Seed of the random starting vectors (beyond the first).
    pub seed: u64,
    /// Starting vectors (K of P pixels) instead of the weighted mean and
    /// random vectors, e.g. the result of a previous fit; ignored unless the
    /// shape fits.
    pub start: Vec<Vec<f64>>,
}

impl Default for EmpcaOptions {
    fn default() -> Self {
        EmpcaOptions {
            components: 4,
            iterations: 60,
            tolerance: 1e-10,
            seed: 1,
            start: Vec::new(),
        }
    }
}

/// The outcome of [`empca`].
#[derive(Debug, Clone, PartialEq)]
pub struct Pca {
    /// K orthonormal vectors of P pixels each (unit Euclidean norm), in order
    /// of decreasing weighted power; each signed so that the mean coefficient
    /// is positive.
    pub vectors: Vec<Vec<f64>>,
    /// Coefficients per spectrum (N × K).
    pub coeffs: Vec<Vec<f64>>,
    /// Cumulative fraction of the weighted power Σ w x² reproduced by the
    /// first 1, 2, … K vectors (with the final coefficients).
    pub explained: Vec<f64>,
    /// χ² of each spectrum against its K-vector reconstruction.
    pub chi2: Vec<f64>,
    /// Pixels with positive weight, per spectrum.
    pub n_pix: Vec<usize>,
    /// EM iterations run.
    pub iterations: usize,
}

impl Pca {
    /// Reduced χ² of spectrum `n` (χ² over pixels − K, at least 1 degree of freedom).
    pub fn reduced_chi2(&self, n: usize) -> f64 {
        let dof = (self.n_pix[n] as f64 - self.vectors.len() as f64).max(1.0);
        self.chi2[n] / dof
    }
}

/// Index range holding every positive weight of a row (empty for none).
fn support(w: &[f64]) -> (usize, usize) {
    match w.iter().position(|v| *v > 0.0) {
        None => (0, 0),
        Some(a) => {
            let b = w.iter().rposition(|v| *v > 0.0).map_or(a, |b| b + 1);
            (a, b)
        }
    }
}

/// Weighted least-squares coefficients of `x` on `vectors` over `[lo, hi)`.
/// Plain loops and a Cholesky factorisation written out (nalgebra's generic
/// code runs at the caller's optimisation level, far too slow for this inner
/// loop in a debug build); a singular system is solved by nalgebra's SVD
/// with tiny singular values dropped.
fn solve_coeffs(x: &[f64], w: &[f64], vt: &[f64], k: usize, (lo, hi): (usize, usize), out: &mut [f64]) {
    let mut a = vec![0.0; k * k];
    let mut b = vec![0.0; k];
    for j in lo..hi {
        let wj = w[j];
        if wj <= 0.0 {
            continue;
        }
        let vj = &vt[j * k..(j + 1) * k];
        let xw = x[j] * wj;
        for p in 0..k {
            let vp = vj[p] * wj;
            b[p] += vj[p] * xw;
            let row = &mut a[p * k..p * k + p + 1];
            for (q, r) in row.iter_mut().enumerate() {
                *r += vp * vj[q];
            }
        }
    }
    for p in 0..k {
        for q in 0..p {
            a[q * k + p] = a[p * k + q];
        }
    }
    if cholesky_solve(&a, &b, k, out) {
        return;
    }
    let m = DMatrix::from_row_slice(k, k, &a);
    let eps = 1e-12 * m.diagonal().amax().max(f64::MIN_POSITIVE);
    let rhs = nalgebra::DVector::from_column_slice(&b);
    match m.svd(true, true).solve(&rhs, eps) {
        Ok(s) if s.iter().all(|v| v.is_finite()) => out.copy_from_slice(s.as_slice()),
        _ => out.fill(0.0),
    }
}

/// Solve the symmetric positive-definite `a c = b` (row-major k × k) by
/// Cholesky; false when a pivot is not clearly positive.
fn cholesky_solve(a: &[f64], b: &[f64], k: usize, out: &mut [f64]) -> bool {
    let mut l = vec![0.0; k * k];
    let scale = (0..k).map(|i| a[i * k + i]).fold(0.0f64, f64::max);
    if !(scale > 0.0 && scale.is_finite()) {
        return false;
    }
    for i in 0..k {
        for j in 0..=i {
            let mut s = a[i * k + j];
            for m in 0..j {
                s -= l[i * k + m] * l[j * k + m];
            }
            if i == j {
                if s <= 1e-13 * scale {
                    return false;
                }
                l[i * k + i] = s.sqrt();
            } else {
                l[i * k + j] = s / l[j * k + j];
            }
        }
    }
    let mut y = vec![0.0; k];
    for i in 0..k {
        let mut s = b[i];
        for m in 0..i {
            s -= l[i * k + m] * y[m];
        }
        y[i] = s / l[i * k + i];
    }
    for i in (0..k).rev() {
        let mut s = y[i];
        for m in i + 1..k {
            s -= l[m * k + i] * out[m];
        }
        out[i] = s / l[i * k + i];
    }
    out.iter().all(|v| v.is_finite())
}

/// The vectors pixel-major: element `j·K + p` is pixel j of vector p.
fn transpose(vectors: &[Vec<f64>]) -> Vec<f64> {
    let k = vectors.len();
    let p = vectors.first().map_or(0, Vec::len);
    let mut vt = vec![0.0; p * k];
    for (c, v) in vectors.iter().enumerate() {
        for (j, x) in v.iter().enumerate() {
            vt[j * k + c] = *x;
        }
    }
    vt
}

/// Gram–Schmidt in order; a vector that vanishes is replaced by a random one
/// orthogonal to the others.
fn orthonormalise(v: &mut [Vec<f64>], rng: &mut impl Rng) {
    let k = v.len();
    for i in 0..k {
        for _attempt in 0..3 {
            for j in 0..i {
                let d: f64 = v[i].iter().zip(&v[j]).map(|(a, b)| a * b).sum();
                let (head, tail) = v.split_at_mut(i);
                for (a, b) in tail[0].iter_mut().zip(&head[j]) {
                    *a -= d * b;
                }
            }
            let norm = v[i].iter().map(|a| a * a).sum::<f64>().sqrt();
            if norm > 1e-300 && norm.is_finite() {
                v[i].iter_mut().for_each(|a| *a /= norm);
                break;
            }
            v[i].iter_mut().for_each(|a| *a = rng.random::<f64>() - 0.5);
        }
    }
}

/// The starting vectors: `opts.start` when it has the right shape, else the
/// weighted mean spectrum followed by random vectors.
fn start_vectors(x: &[Vec<f64>], w: &[Vec<f64>], opts: &EmpcaOptions, rng: &mut impl Rng) -> Vec<Vec<f64>> {
    let k = opts.components;
    let p = x[0].len();
    if opts.start.len() == k
        && opts
            .start
            .iter()
            .all(|v| v.len() == p && v.iter().all(|x| x.is_finite()))
    {
        return opts.start.clone();
    }
    let mut vectors: Vec<Vec<f64>> = Vec::with_capacity(k);
    let mut mean = vec![0.0; p];
    let mut wsum = vec![0.0; p];
    for (xr, wr) in x.iter().zip(w) {
        for j in 0..p {
            if wr[j] > 0.0 {
                mean[j] += wr[j] * xr[j];
                wsum[j] += wr[j];
            }
        }
    }
    for j in 0..p {
        mean[j] = if wsum[j] > 0.0 { mean[j] / wsum[j] } else { 0.0 };
    }
    vectors.push(mean);
    for _ in 1..k {
        vectors.push((0..p).map(|_| rng.random::<f64>() - 0.5).collect());
    }

    vectors
}

/// Expectation-maximisation PCA with per-pixel weights (Bailey 2012; see the
/// module docs). `x` and `w` are N rows of P pixels; weights are inverse
/// variances (0 = missing). Rows without any positive weight get zero
/// coefficients and take no part.
pub fn empca(x: &[Vec<f64>], w: &[Vec<f64>], opts: &EmpcaOptions) -> Result<Pca, PcaError> {
    let n = x.len();
    let k = opts.components;
    if k == 0 {
        return Err(PcaError::Invalid("at least one component is needed".into()));
    }
    if w.len() != n {
        return Err(PcaError::Shape);
    }
    let p = x.first().map_or(0, Vec::len);
    if x.iter().zip(w).any(|(a, b)| a.len() != p || b.len() != p) {
        return Err(PcaError::Shape);
    }
    if p < k {
        return Err(PcaError::Invalid(format!(
            "{p} pixels cannot hold {k} components"
        )));
    }
    let supports: Vec<(usize, usize)> = w.iter().map(|r| support(r)).collect();
    let usable = supports.iter().filter(|(a, b)| b > a).count();
    if usable < k {
        return Err(PcaError::TooFew {
            spectra: usable,
            components: k,
        });
    }
    // Non-finite data at positive weight would poison every sum: treat as missing.
    let w: Vec<Vec<f64>> = x
        .iter()
        .zip(w)
        .map(|(xr, wr)| {
            xr.iter()
                .zip(wr)
                .map(|(xv, wv)| {
                    if xv.is_finite() && wv.is_finite() && *wv > 0.0 {
                        *wv
                    } else {
                        0.0
                    }
                })
                .collect()
        })
        .collect();

    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(opts.seed);
    let mut vectors = start_vectors(x, &w, opts, &mut rng);
    orthonormalise(&mut vectors, &mut rng);

    let mut coeffs = vec![vec![0.0; k]; n];
    let mut iterations = 0;
    for it in 0..opts.iterations.max(1) {
        iterations = it + 1;
        // E-step
        let vt = transpose(&vectors);
        for i in 0..n {
            solve_coeffs(&x[i], &w[i], &vt, k, supports[i], &mut coeffs[i]);
        }
        // M-step: per pixel j, the K values φ_·j minimising
        // Σ_n w_nj (x_nj − c_n·φ_·j)², all components jointly
        let old = vectors.clone();
        let kk = k * k;
        let mut am = vec![0.0; p * kk];
        let mut bm = vec![0.0; p * k];
        for i in 0..n {
            let ci = &coeffs[i];
            let (lo, hi) = supports[i];
            let (xi, wi) = (&x[i], &w[i]);
            for j in lo..hi {
                let wj = wi[j];
                if wj <= 0.0 {
                    continue;
                }
                let a = &mut am[j * kk..(j + 1) * kk];
                let b = &mut bm[j * k..(j + 1) * k];
                let xw = xi[j] * wj;
                for q in 0..k {
                    let cq = ci[q] * wj;
                    b[q] += ci[q] * xw;
                    for r in 0..=q {
                        a[q * k + r] += cq * ci[r];
                    }
                }
            }
        }
        let mut phi = vec![0.0; k];
        for j in 0..p {
            let a = &mut am[j * kk..(j + 1) * kk];
            for q in 0..k {
                for r in 0..q {
                    a[r * k + q] = a[q * k + r];
                }
            }
            if !cholesky_solve(a, &bm[j * k..(j + 1) * k], k, &mut phi) {
                phi.fill(0.0);
            }
            for c in 0..k {
                vectors[c][j] = phi[c];
            }
        }
        orthonormalise(&mut vectors, &mut rng);
        // change of the subspace: 1 − the squared length of each new vector's
        // projection on the old subspace, at worst
        let change = vectors
            .iter()
            .map(|v| {
                let proj: f64 = old
                    .iter()
                    .map(|o| v.iter().zip(o).map(|(a, b)| a * b).sum::<f64>().powi(2))
                    .sum();
                (1.0 - proj).abs()
            })
            .fold(0.0f64, f64::max);
        if change < opts.tolerance {
            break;
        }
    }
    let vt = transpose(&vectors);
    for i in 0..n {
        solve_coeffs(&x[i], &w[i], &vt, k, supports[i], &mut coeffs[i]);
    }
    // Principal axes within the subspace: eigenvectors of the coefficients'
    // second moment Σ_n c_n c_nᵀ, largest first (uncentred PCA order).
    {
        let mut m = DMatrix::<f64>::zeros(k, k);
        for c in &coeffs {
            for q in 0..k {
                for r in 0..k {
                    m[(q, r)] += c[q] * c[r];
                }
            }
        }
        let eig = m.symmetric_eigen();
        let mut order: Vec<usize> = (0..k).collect();
        order.sort_by(|&a, &b| eig.eigenvalues[b].total_cmp(&eig.eigenvalues[a]));
        let rotated: Vec<Vec<f64>> = order
            .iter()
            .map(|&e| {
                (0..p)
                    .map(|j| (0..k).map(|q| eig.eigenvectors[(q, e)] * vectors[q][j]).sum())
                    .collect()
            })
            .collect();
        vectors = rotated;
        orthonormalise(&mut vectors, &mut rng);
        let vt = transpose(&vectors);
        for i in 0..n {
            solve_coeffs(&x[i], &w[i], &vt, k, supports[i], &mut coeffs[i]);
        }
    }
    // Sign: mean coefficient positive.
    for c in 0..k {
        let s: f64 = coeffs.iter().map(|r| r[c]).sum();
        if s < 0.0 {
            vectors[c].iter_mut().for_each(|v| *v = -*v);
            coeffs.iter_mut().for_each(|r| r[c] = -r[c]);
        }
    }
    // Power explained by the first 1..K vectors, χ² per spectrum.
    let mut total = 0.0;
    let mut left = vec![0.0; k];
    let mut chi2 = vec![0.0; n];
    let mut n_pix = vec![0usize; n];
    for i in 0..n {
        let (lo, hi) = supports[i];
        for j in lo..hi {
            let wj = w[i][j];
            if wj <= 0.0 {
                continue;
            }
            n_pix[i] += 1;
            total += wj * x[i][j] * x[i][j];
            let mut m = 0.0;
            for c in 0..k {
                m += coeffs[i][c] * vectors[c][j];
                let r = x[i][j] - m;
                left[c] += wj * r * r;
            }
            let r = x[i][j] - m;
            chi2[i] += wj * r * r;
        }
    }
    let explained = left
        .iter()
        .map(|l| if total > 0.0 { 1.0 - l / total } else { 0.0 })
        .collect();
    Ok(Pca {
        vectors,
        coeffs,
        explained,
        chi2,
        n_pix,
        iterations,
    })
}

/// Settings of the outlier rejection of [`empca_clipped`].
#[derive(Debug, Clone, PartialEq)]
pub struct ClipOptions {
    /// Reject spectra whose reduced χ² exceeds the median by more than κ robust σ.
    pub kappa: f64,
    /// Most rounds of rejection.
    pub rounds: usize,
    /// Never reject more than this fraction of the spectra in total.
    pub max_fraction: f64,
    /// A rejected spectrum's reduced χ² must also exceed the median by this
    /// factor (see [`empca_clipped`]).
    pub min_ratio: f64,
}

impl Default for ClipOptions {
    fn default() -> Self {
        ClipOptions {
            kappa: 3.0,
            rounds: 5,
            max_fraction: 0.25,
            min_ratio: 2.0,
        }
    }
}

/// [`empca`] with iterative sigma clipping of the per-spectrum reduced χ²
/// (see the module docs). A row is set aside when its reduced χ² exceeds
/// both median + κσ and `min_ratio` × median: with template mismatch at high
/// S/N the χ² of good spectra has a long tail (spectra with strong lines
/// gather more mismatch), and a narrow MAD alone would reject them. After each fit every row — also one set aside
/// earlier, projected on the new vectors — is judged against the median and
/// robust σ of the kept rows, so a row rejected only because outliers had
/// bent the first basis comes back; it stops when the kept set no longer
/// changes. Returns the final fit (on the kept rows only, in their order)
/// and, per input row, whether it was kept.
pub fn empca_clipped(
    x: &[Vec<f64>],
    w: &[Vec<f64>],
    opts: &EmpcaOptions,
    clip: &ClipOptions,
) -> Result<(Pca, Vec<bool>), PcaError> {
    let n = x.len();
    let mut kept = vec![true; n];
    let max_reject = (clip.max_fraction.clamp(0.0, 1.0) * n as f64).floor() as usize;
    let mut start = opts.start.clone();
    let mut round = 0;
    loop {
        let idx: Vec<usize> = (0..n).filter(|&i| kept[i]).collect();
        let xs: Vec<Vec<f64>> = idx.iter().map(|&i| x[i].clone()).collect();
        let ws: Vec<Vec<f64>> = idx.iter().map(|&i| w[i].clone()).collect();
        let mut o = opts.clone();
        o.start = start;
        let pca = empca(&xs, &ws, &o)?;
        start = pca.vectors.clone();
        if round >= clip.rounds || clip.kappa.is_nan() || clip.kappa <= 0.0 {
            return Ok((pca, kept));
        }
        round += 1;
        // reduced χ² of every row against the current vectors
        let k = pca.vectors.len();
        let mut red = vec![f64::NAN; n];
        for (pos, &i) in idx.iter().enumerate() {
            if pca.n_pix[pos] > 0 {
                red[i] = pca.reduced_chi2(pos);
            }
        }
        let mut c = vec![0.0; k];
        for i in (0..n).filter(|&i| !kept[i]) {
            red[i] = row_reduced_chi2(&x[i], &w[i], &pca.vectors, &mut c);
        }
        let kept_red: Vec<f64> = idx.iter().map(|&i| red[i]).collect();
        let Some(med) = median(&kept_red) else {
            return Ok((pca, kept));
        };
        let dev: Vec<f64> = kept_red.iter().map(|r| (r - med).abs()).collect();
        let sigma = 1.4826 * median(&dev).unwrap_or(0.0);
        if sigma.is_nan() || sigma <= 0.0 {
            return Ok((pca, kept));
        }
        let cut = (med + clip.kappa * sigma).max(clip.min_ratio * med);
        let mut over: Vec<(f64, usize)> = (0..n)
            .filter(|&i| red[i].is_finite() && red[i] > cut)
            .map(|i| (red[i], i))
            .collect();
        over.sort_by(|a, b| b.0.total_cmp(&a.0));
        over.truncate(max_reject);
        let mut next = vec![true; n];
        for (_, i) in &over {
            next[*i] = false;
        }
        if next == kept || next.iter().filter(|k| **k).count() < opts.components {
            return Ok((pca, kept));
        }
        kept = next;
    }
}

/// Reduced χ² of one row against `vectors` (its own best coefficients);
/// NaN when it has no pixel.
fn row_reduced_chi2(x: &[f64], w: &[f64], vectors: &[Vec<f64>], c: &mut [f64]) -> f64 {
    let w: Vec<f64> = x
        .iter()
        .zip(w)
        .map(|(xv, wv)| {
            if xv.is_finite() && wv.is_finite() && *wv > 0.0 {
                *wv
            } else {
                0.0
            }
        })
        .collect();
    let sup = support(&w);
    solve_coeffs(x, &w, &transpose(vectors), vectors.len(), sup, c);
    let (mut chi2, mut n) = (0.0, 0usize);
    for j in sup.0..sup.1 {
        if w[j] > 0.0 {
            let m: f64 = (0..vectors.len()).map(|q| c[q] * vectors[q][j]).sum();
            chi2 += w[j] * (x[j] - m).powi(2);
            n += 1;
        }
    }
    if n == 0 {
        return f64::NAN;
    }
    chi2 / (n as f64 - vectors.len() as f64).max(1.0)
}

fn median(v: &[f64]) -> Option<f64> {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    crate::spectrum::median_in_place(&mut s)
}

/// Orthonormal basis (columns) of the span of `a`'s columns (thin QR).
fn orth(a: &DMatrix<f64>) -> DMatrix<f64> {
    a.clone().qr().q()
}

/// Principal angles (radians, largest first) between the column spaces of `a`
/// and `b` (same number of rows; columns need not be orthonormal, but must be
/// independent). Cosines from the SVD of Q₁ᵀQ₂, small angles from the sines
/// (see the module docs). As many angles as the smaller dimension.
pub fn principal_angles(a: &DMatrix<f64>, b: &DMatrix<f64>) -> Result<Vec<f64>, PcaError> {
    if a.nrows() != b.nrows() || a.ncols() == 0 || b.ncols() == 0 {
        return Err(PcaError::Shape);
    }
    if a.ncols() > a.nrows() || b.ncols() > b.nrows() {
        return Err(PcaError::Invalid("more columns than rows".into()));
    }
    let (mut q1, mut q2) = (orth(a), orth(b));
    if q1.ncols() < q2.ncols() {
        std::mem::swap(&mut q1, &mut q2);
    }
    // now dim(q1) ≥ dim(q2); there are dim(q2) angles
    let m = q1.transpose() * &q2;
    let mut cos: Vec<f64> = m.singular_values().iter().map(|s| s.clamp(0.0, 1.0)).collect();
    cos.sort_by(|x, y| x.total_cmp(y)); // smallest cosine = largest angle first
    let perp = &q2 - &q1 * &m;
    let mut sin: Vec<f64> = perp.singular_values().iter().map(|s| s.clamp(0.0, 1.0)).collect();
    sin.sort_by(|x, y| y.total_cmp(x)); // largest sine = largest angle first
    Ok(cos
        .iter()
        .zip(&sin)
        .map(|(&c, &s)| if c * c < 0.5 { c.acos() } else { s.asin() })
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use rand_distr::{Distribution, Normal};

    /// Rows made from a known 2-vector basis with random coefficients,
    /// noise and gaps: the fitted vectors span the basis.
    #[test]
    fn empca_recovers_a_known_subspace_from_gappy_noisy_rows() {
        let p = 200;
        let b1: Vec<f64> = (0..p).map(|j| 1.0 + 0.3 * (j as f64 / 30.0).sin()).collect();
        let b2: Vec<f64> = (0..p)
            .map(|j| (-(j as f64 - 120.0).powi(2) / 50.0).exp())
            .collect();
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let noise = Normal::new(0.0, 0.02).unwrap();
        let (mut x, mut w) = (Vec::new(), Vec::new());
        for i in 0..80 {
            let (a1, a2) = (rng.random_range(0.5..2.0), rng.random_range(-0.5..1.0));
            let gap = rng.random_range(0..p - 40);
            let mut xr = vec![0.0; p];
            let mut wr = vec![0.0; p];
            for j in 0..p {
                if (gap..gap + 40).contains(&j) && i % 2 == 0 {
                    continue; // a gap in every other row
                }
                xr[j] = a1 * b1[j] + a2 * b2[j] + noise.sample(&mut rng);
                wr[j] = 1.0 / 0.02f64.powi(2);
            }
            x.push(xr);
            w.push(wr);
        }
        let pca = empca(
            &x,
            &w,
            &EmpcaOptions {
                components: 2,
                iterations: 300,
                ..Default::default()
            },
        )
        .unwrap();
        let truth = DMatrix::from_fn(p, 2, |j, c| if c == 0 { b1[j] } else { b2[j] });
        let got = DMatrix::from_fn(p, 2, |j, c| pca.vectors[c][j]);
        let ang = principal_angles(&truth, &got).unwrap();
        // the noise-limited angle (by construction of the test data): each
        // pixel of φ₂ is known to σ/√(Σ a₂²) ≈ 0.02/√(80·0.25) ≈ 0.0045, over
        // 200 pixels a perpendicular error of ≈ 0.063 against |b₂| ≈ 3.0, so
        // ≈ 0.02 rad (1.2°); the bound leaves a factor 2.5
        assert!(ang[0] < 3f64.to_radians(), "angles {ang:?}");
        assert!(pca.explained[1] > 0.999 && pca.explained[0] <= pca.explained[1]);
        // orthonormal
        for a in 0..2 {
            for b in 0..2 {
                let d: f64 = pca.vectors[a]
                    .iter()
                    .zip(&pca.vectors[b])
                    .map(|(u, v)| u * v)
                    .sum();
                assert_relative_eq!(d, if a == b { 1.0 } else { 0.0 }, epsilon = 1e-9);
            }
        }
        // χ² per row ≈ number of pixels (the noise is the assumed noise)
        let red: Vec<f64> = (0..x.len()).map(|i| pca.reduced_chi2(i)).collect();
        let m = red.iter().sum::<f64>() / red.len() as f64;
        assert!((m - 1.0).abs() < 0.1, "mean reduced χ² {m}");
    }

    #[test]
    fn sigma_clipping_sets_aside_rows_that_do_not_belong() {
        let p = 100;
        let b1: Vec<f64> = (0..p).map(|j| 1.0 + j as f64 / p as f64).collect();
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let noise = Normal::new(0.0, 0.05).unwrap();
        let (mut x, mut w) = (Vec::new(), Vec::new());
        for i in 0..40 {
            let a = rng.random_range(0.5..2.0);
            let odd = i % 13 == 7; // rows 7, 20, 33: a strong spike no other row has
            x.push(
                (0..p)
                    .map(|j| {
                        let spike = if odd && (40..50).contains(&j) { 2.0 } else { 0.0 };
                        a * b1[j] + spike + noise.sample(&mut rng)
                    })
                    .collect(),
            );
            w.push(vec![400.0; p]);
        }
        let opts = EmpcaOptions {
            components: 1,
            ..Default::default()
        };
        let (pca, kept) = empca_clipped(&x, &w, &opts, &ClipOptions::default()).unwrap();
        let rejected: Vec<usize> = (0..40).filter(|&i| !kept[i]).collect();
        assert_eq!(rejected, vec![7, 20, 33]);
        assert_eq!(pca.coeffs.len(), 37);
    }

    #[test]
    fn bad_shapes_and_too_few_rows_are_errors_not_panics() {
        let x = vec![vec![1.0, 2.0, 3.0]];
        assert_eq!(
            empca(&x, &[], &EmpcaOptions::default()).unwrap_err(),
            PcaError::Shape
        );
        let w = vec![vec![1.0, 1.0, 1.0]];
        assert!(matches!(
            empca(
                &x,
                &w,
                &EmpcaOptions {
                    components: 2,
                    ..Default::default()
                }
            ),
            Err(PcaError::TooFew { .. })
        ));
        let zero = vec![vec![0.0; 3]];
        assert!(empca(
            &x,
            &zero,
            &EmpcaOptions {
                components: 1,
                ..Default::default()
            }
        )
        .is_err());
        let nan = vec![vec![f64::NAN, 1.0, 2.0], vec![1.0, 1.0, 1.0]];
        let w2 = vec![vec![1.0; 3]; 2];
        let pca = empca(
            &nan,
            &w2,
            &EmpcaOptions {
                components: 1,
                ..Default::default()
            },
        )
        .unwrap();
        assert!(pca.vectors[0].iter().all(|v| v.is_finite()));
    }

    #[test]
    fn principal_angles_of_known_planes() {
        // by construction: span{e1, e2} against span{e1, cos t e2 + sin t e3}
        let t = 0.3f64;
        let a = DMatrix::from_row_slice(4, 2, &[1.0, 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0]);
        let b = DMatrix::from_row_slice(4, 2, &[2.0, 0.0, 0.0, t.cos(), 0.0, t.sin(), 0.0, 0.0]);
        let ang = principal_angles(&a, &b).unwrap();
        assert_relative_eq!(ang[0], t, epsilon = 1e-14);
        assert_relative_eq!(ang[1], 0.0, epsilon = 1e-14);
        // tiny angles keep their precision (from the sines)
        let e = 1e-9;
        let c = DMatrix::from_row_slice(4, 1, &[1.0, e, 0.0, 0.0]);
        let d = DMatrix::from_row_slice(4, 1, &[1.0, 0.0, 0.0, 0.0]);
        assert_relative_eq!(
            principal_angles(&c, &d).unwrap()[0],
            e.atan(),
            max_relative = 1e-6
        );
        assert!(principal_angles(&a, &DMatrix::zeros(3, 1)).is_err());
    }
}
