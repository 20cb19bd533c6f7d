/*!
Pixel arithmetic against numpy. The noise estimate of files without
uncertainties: the pixels and numpy's estimate of the same quantity were
recorded by tests/scripts/record_noise_numpy.py into
tests/data/noise/noise_numpy.json. The flux-conserving resampling onto the
log-λ grid: numpy's rebin of the same pixels (from the cumulative integral)
recorded by tests/scripts/record_resample_numpy.py into
tests/data/resample/resample_numpy.json.
*/
use serde_json::Value;

fn recording() -> Value {
    load("tests/data/noise/noise_numpy.json")
}

fn load(rel: &str) -> Value {
    let p = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join(rel);
    serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap()
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

#[test]
fn the_noise_estimate_matches_numpy_on_the_same_pixels() {
    let r = recording();
    let half = r["half_width"].as_u64().unwrap() as usize;
    assert_eq!(
        half,
        zvet::io::NOISE_HALF_WIDTH,
        "the recording is for another window"
    );
    let flux = floats(&r["flux"]);
    let numpy = floats(&r["sigma_numpy"]);
    let truth = floats(&r["sigma_true"]);
    let n = numpy.len();
    let wave = floats(&r["wave"]);
    let mut s = zvet::Spectrum::new(wave.clone(), flux, None, None, Default::default()).unwrap();
    s.estimate_noise(half);
    assert!(s.meta.noise_estimated);
    for (i, (iv, want)) in s.ivar().iter().zip(&numpy).enumerate() {
        let got = 1.0 / iv.sqrt();
        // zvet uses the MAD constant 1.4826, the script 1/Φ⁻¹(3/4) =
        // 1.482602…: they differ by 1.5e-6 relative.
        assert!(
            ((got - want) / want).abs() < 1e-5,
            "pixel {i}: σ {got} where numpy gives {want}"
        );
    }
    // And the estimate is right: away from the lines, the spikes and the
    // step in σ (windows that hold none of them), the median σ of each half
    // is within 20 % of the σ the pixels were drawn with. Why 20 %: the MAD
    // of n Gaussian values estimates σ with a relative scatter of about
    // 1.17/√n (its asymptotic efficiency, common practice), 16 % for the 51
    // differences of one window; each half holds about three independent
    // clean windows, so ≈ 9 % for their median, and 20 % is about 2σ.
    // (Measured: +7 % and −2 %.)
    let centre = |l: f64| wave.iter().position(|w| *w >= l).unwrap();
    let avoid = [centre(5200.0), centre(5600.0), 100, 101, 450, n / 2];
    let clean = |i: usize| avoid.iter().all(|&c| i.abs_diff(c) > half + 5);
    for (lo, hi) in [(0, n / 2), (n / 2, n)] {
        let mut v: Vec<f64> = (lo..hi)
            .filter(|&i| clean(i))
            .map(|i| 1.0 / s.ivar()[i].sqrt())
            .collect();
        assert!(v.len() > 100, "{} clean pixels in {lo}..{hi}", v.len());
        v.sort_by(f64::total_cmp);
        let med = v[v.len() / 2];
        let t = truth[lo];
        assert!(
            (med / t - 1.0).abs() < 0.2,
            "pixels {lo}..{hi}: median σ {med}, drawn with {t}"
        );
    }
}

#[test]
fn resampling_matches_a_numpy_rebin_of_the_same_pixels() {
    let r = load("tests/data/resample/resample_numpy.json");
    let (wave, flux, sigma) = (floats(&r["wave"]), floats(&r["flux"]), floats(&r["sigma"]));
    let ivar: Vec<f64> = sigma.iter().map(|s| 1.0 / (s * s)).collect();
    let s = zvet::Spectrum::new(wave, flux, Some(ivar), None, Default::default()).unwrap();
    let dloglam = r["dloglam"].as_f64().unwrap();
    let grid = s.log_grid(dloglam);
    // The grid as the script built it from the documented rule.
    assert_eq!(grid.n as u64, r["grid_n"].as_u64().unwrap());
    assert!((grid.loglam0 - r["grid_loglam0"].as_f64().unwrap()).abs() < 1e-12);
    let out = s.resample(&grid);
    let index = r["index"].as_array().unwrap();
    let (want_f, want_s) = (floats(&r["flux_out"]), floats(&r["sigma_out"]));
    assert!(index.len() > 800);
    for (k, j) in index.iter().enumerate() {
        let j = j.as_u64().unwrap() as usize;
        // Both are sums of a few products of the same doubles: 1e-9 relative.
        let f = out.flux[j];
        assert!(
            ((f - want_f[k]) / want_f[k]).abs() < 1e-9,
            "pixel {j}: flux {f} vs numpy {}",
            want_f[k]
        );
        let sd = 1.0 / out.ivar[j].sqrt();
        assert!(
            ((sd - want_s[k]) / want_s[k]).abs() < 1e-9,
            "pixel {j}: σ {sd} vs numpy {}",
            want_s[k]
        );
    }
}
