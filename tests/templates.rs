//! The built-in templates: committed files, FITS layout, and physics checks
//! against published or textbook values (each check names its source).
use crate::support;
use zvet::lines;
use zvet::templates::{
    self, galaxies, profiles::Grid, quasars, FitMode, Template, TemplateKind, TemplateSet,
};
use zvet::ObjectClass;

fn committed_dir() -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("templates-spectra")
}

fn get<'a>(set: &'a TemplateSet, name: &str) -> &'a Template {
    set.classes
        .iter()
        .flat_map(|c| &c.templates)
        .find(|t| t.name == name)
        .unwrap_or_else(|| panic!("template {name} missing"))
}

/// ∫ f dλ over the pixels whose centres lie in [lo, hi] Å.
fn integral(f: &[f64], g: &Grid, lo: f64, hi: f64) -> f64 {
    (0..g.n)
        .filter(|&i| (lo..=hi).contains(&g.wave(i as f64)))
        .map(|i| f[i] * (g.wave(i as f64 + 0.5) - g.wave(i as f64 - 0.5)))
        .sum()
}

/// Mean f_ν (∝ f_λ λ²) over [lo, hi] Å, weighted by pixel width.
fn mean_fnu(t: &Template, lo: f64, hi: f64) -> f64 {
    let g = t.grid();
    let fnu: Vec<f64> = (0..g.n).map(|i| t.flux[i] * g.wave(i as f64).powi(2)).collect();
    let ones = vec![1.0; g.n];
    integral(&fnu, &g, lo, hi) / integral(&ones, &g, lo, hi)
}

/// The 4000 Å break, narrow definition of Balogh et al. (1999): ratio of the
/// mean f_ν in 4000–4100 Å to that in 3850–3950 Å (the original, wider
/// definition of Bruzual 1983 uses 4050–4250 / 3750–3950 Å).
fn d4000_narrow(t: &Template) -> f64 {
    mean_fnu(t, 4000.0, 4100.0) / mean_fnu(t, 3850.0, 3950.0)
}

fn same_bits(a: &[f64], b: &[f64]) -> bool {
    a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.to_bits() == y.to_bits())
}

fn assert_same_data(a: &TemplateSet, b: &TemplateSet) {
    assert_eq!(a.name, b.name);
    assert_eq!(a.classes.len(), b.classes.len());
    for (ca, cb) in a.classes.iter().zip(&b.classes) {
        assert_eq!(ca.class, cb.class);
        assert_eq!(ca.mode, cb.mode);
        assert_eq!(ca.templates.len(), cb.templates.len());
        for (ta, tb) in ca.templates.iter().zip(&cb.templates) {
            assert_eq!(ta.name, tb.name);
            assert_eq!(ta.class, tb.class);
            assert_eq!(ta.kind, tb.kind);
            assert_eq!(ta.loglam0.to_bits(), tb.loglam0.to_bits(), "{}", ta.name);
            assert_eq!(ta.dloglam.to_bits(), tb.dloglam.to_bits(), "{}", ta.name);
            assert!(same_bits(&ta.flux, &tb.flux), "{}: flux differs", ta.name);
        }
    }
}

#[test]
fn committed_files_are_reproduced_exactly() {
    let committed = templates::read_set(&committed_dir().join("builtin.fits")).expect("read committed set");
    assert_same_data(&committed, &templates::generate_builtin());
    assert_same_data(&committed, templates::builtin());
}

#[test]
fn write_read_round_trip_and_entry_points() {
    let dir = support::scratch("templates-round-trip");
    templates::write_builtin(&dir).expect("write");
    let set = templates::builtin();
    for path in [dir.join("builtin.fits"), dir.join("builtin.json"), dir.clone()] {
        let back = templates::read_set(&path).expect("read back");
        assert_same_data(&back, set);
        assert_eq!(back.provenance, set.provenance);
    }
    // Writing again replaces the files without leaving temporaries behind.
    templates::write_set(set, &dir).expect("rewrite");
    let names: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names.len(), 2, "{names:?}");
}

#[test]
fn wcs_agrees_with_astropy() {
    // Wavelengths astropy.wcs (FITS WCS Paper III, WAVE-LOG) assigns to pixels
    // of the committed file, recorded by tests/scripts/record_template_wcs.py.
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/data/templates/astropy_wcs.json"
    ))
    .expect("recorded astropy values");
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    let set = templates::builtin();
    let mut checked = 0;
    for (name, rec) in v["templates"].as_object().unwrap() {
        let t = set
            .classes
            .iter()
            .flat_map(|c| &c.templates)
            .find(|t| t.name.eq_ignore_ascii_case(name))
            .unwrap_or_else(|| panic!("{name} not in the built-in set"));
        let pix = rec["pixels"].as_array().unwrap();
        let wav = rec["wave_angstrom"].as_array().unwrap();
        for (p, w) in pix.iter().zip(wav) {
            let (p, w) = (p.as_u64().unwrap() as usize, w.as_f64().unwrap());
            approx::assert_relative_eq!(t.wave(p), w, max_relative = 1e-10);
            checked += 1;
        }
    }
    assert!(checked >= 50);
}

#[test]
fn bad_files_give_clear_errors() {
    let dir = support::scratch("templates-bad");
    // Not FITS at all.
    let junk = dir.join("junk.fits");
    std::fs::write(&junk, b"this is not a FITS file").unwrap();
    let e = templates::read_set(&junk).unwrap_err().to_string();
    assert!(e.contains("junk.fits"), "{e}");
    // Missing file.
    assert!(templates::read_set(&dir.join("absent.fits")).is_err());
    // An extension without TPLCLASS, and one with a NaN.
    for (file, class, value) in [
        ("noclass.fits", None, 1.0f32),
        ("nan.fits", Some("galaxy"), f32::NAN),
    ] {
        let path = dir.join(file);
        let mut f = fitsio::FitsFile::create(&path).open().unwrap();
        let desc = fitsio::images::ImageDescription {
            data_type: fitsio::images::ImageType::Float,
            dimensions: &[4],
        };
        let hdu = f.create_image("t1".to_string(), &desc).unwrap();
        hdu.write_image(&mut f, &[1.0f32, value, 1.0, 1.0]).unwrap();
        hdu.write_key(&mut f, "LOGLAM0", 3.5f64).unwrap();
        hdu.write_key(&mut f, "DLOGLAM", 1e-4f64).unwrap();
        if let Some(c) = class {
            hdu.write_key(&mut f, "TPLCLASS", c).unwrap();
        }
        drop(f);
        let e = templates::read_set(&path).unwrap_err().to_string();
        let expect = if class.is_none() { "TPLCLASS" } else { "non-finite" };
        assert!(e.contains(expect) && e.contains("'t1'"), "{e}");
    }
    // Two templates of one class on different log-λ steps.
    let path = dir.join("steps.fits");
    let mut f = fitsio::FitsFile::create(&path).open().unwrap();
    for (name, step) in [("a", 1e-4f64), ("b", 2e-4)] {
        let desc = fitsio::images::ImageDescription {
            data_type: fitsio::images::ImageType::Float,
            dimensions: &[3],
        };
        let hdu = f.create_image(name.to_string(), &desc).unwrap();
        hdu.write_image(&mut f, &[1.0f32, 2.0, 3.0]).unwrap();
        hdu.write_key(&mut f, "TPLCLASS", "quasar").unwrap();
        hdu.write_key(&mut f, "LOGLAM0", 3.0f64).unwrap();
        hdu.write_key(&mut f, "DLOGLAM", step).unwrap();
    }
    drop(f);
    let e = templates::read_set(&path).unwrap_err().to_string();
    assert!(e.contains("step") && e.contains("'b'"), "{e}");
    // A folder with several sets is ambiguous.
    assert!(templates::read_set(&dir).is_err());
    // A descriptor of another format.
    let json = dir.join("other.json");
    std::fs::write(
        &json,
        r#"{"format":"x","format_version":1,"name":"a","provenance":"","fits":"a.fits","templates":[]}"#,
    )
    .unwrap();
    assert!(templates::read_set(&json)
        .unwrap_err()
        .to_string()
        .contains("format"));
}

#[test]
fn coverage_modes_and_kinds() {
    let set = templates::builtin();
    // Contract: galaxies ≥ 1000–11000 Å, quasars ≤ 900–≥ 9000 Å, stars ≥ 3000–11000 Å rest.
    for (class, mode, lo, hi) in [
        (ObjectClass::Galaxy, FitMode::Basis, 1000.0, 11000.0),
        (ObjectClass::Quasar, FitMode::Basis, 900.0, 9000.0),
        (ObjectClass::Star, FitMode::EachAlone, 3000.0, 11000.0),
    ] {
        let c = set.class(class).expect("class present");
        assert_eq!(c.mode, mode);
        for t in &c.templates {
            assert!(t.wave(0) <= lo && t.wave(t.flux.len() - 1) >= hi, "{}", t.name);
            approx::assert_relative_eq!(t.dloglam, 1e-4);
            assert!(t.flux.iter().all(|x| x.is_finite() && *x >= 0.0), "{}", t.name);
        }
    }
    let stars = &set.class(ObjectClass::Star).unwrap().templates;
    // Every star is an absorption template but the emission-line stars (an
    // active M dwarf with Balmer emission, Wolf–Rayet types), which are named so.
    assert!(stars.len() >= 7);
    for t in stars {
        let emission_star = ["star-M4e", "star-WN", "star-WC"].contains(&t.name.as_str());
        assert!(
            t.kind == TemplateKind::Absorption || emission_star,
            "{} is {:?}",
            t.name,
            t.kind
        );
    }
    assert_eq!(get(set, "galaxy-emission").kind, TemplateKind::Emission);
    assert_eq!(get(set, "galaxy-old").kind, TemplateKind::Absorption);
}

#[test]
fn balmer_decrement_is_case_b() {
    // Case B, T = 10⁴ K: Hα/Hβ = 2.86 (Osterbrock & Ferland 2006, from memory;
    // 2.863 in the published galaxy_recomb.ascii of linetools 0.3.2).
    let lw = lines::wave_of;
    let g = Grid::new(2.95, 4.08, 1e-4);
    let young: Vec<f64> = galaxies::young(&g)
        .iter()
        .zip(galaxies::young_continuum(&g))
        .map(|(a, b)| a - b)
        .collect();
    let em = galaxies::emission_only(&g);
    for f in [&young, &em] {
        let ha = integral(f, &g, lw("Hα") - 8.0, lw("Hα") + 8.0);
        let hb = integral(f, &g, lw("Hβ") - 8.0, lw("Hβ") + 8.0);
        let hg = integral(f, &g, lw("Hγ") - 8.0, lw("Hγ") + 8.0);
        approx::assert_relative_eq!(ha / hb, 2.863, max_relative = 0.005);
        approx::assert_relative_eq!(hg / hb, 0.468, max_relative = 0.005);
    }
}

/// The flux ratio of the two lines from one upper level, ¹D₂ → ³P₂ over
/// ¹D₂ → ³P₁ (the 5008/4960 and 6585/6550 lines; levels 4 → 3 and 4 → 2 of
/// the six-level atom), from the transition probabilities A of a published
/// atomic data set that the pyneb package ships (fetched at test time):
/// energy flux ∝ A·hν, so the ratio is A₄₃ λ₄₂ / (A₄₂ λ₄₃) (common practice).
fn published_ratio(file: &str, lam43: f64, lam42: f64) -> f64 {
    let p = support::reference_file("pyneb==1.1.32", &format!("pyneb/atomic_data/{file}"));
    let text = std::fs::read_to_string(&p).unwrap();
    let rows: Vec<Vec<f64>> = text
        .lines()
        .filter_map(|l| {
            l.split_whitespace()
                .map(|x| x.parse::<f64>().ok())
                .collect::<Option<Vec<f64>>>()
        })
        .filter(|v| v.len() >= 4)
        .collect();
    let (a43, a42) = (rows[3][2], rows[3][1]);
    assert!(a43 > 0.0 && a42 > 0.0, "{file}: A values {a43} {a42}");
    a43 * lam42 / (a42 * lam43)
}

/// The template's doublet flux ratios.
fn doublet_ratios() -> (f64, f64) {
    let lw = lines::wave_of;
    let g = Grid::new(2.95, 4.08, 1e-4);
    let f = galaxies::emission_only(&g);
    let flux = |n: &str| integral(&f, &g, lw(n) - 6.0, lw(n) + 6.0);
    // The [N II] lines sit 14.7 Å and 20.7 Å from Hα: narrower windows.
    let flux4 = |n: &str| integral(&f, &g, lw(n) - 4.0, lw(n) + 4.0);
    (
        flux("[O III] 5008") / flux("[O III] 4960"),
        flux4("[N II] 6585") / flux4("[N II] 6550"),
    )
}

#[test]
fn forbidden_doublet_ratios() {
    let lw = lines::wave_of;
    let (o3, _) = doublet_ratios();
    // [O III]: Storey & Zeippen 2000 (MNRAS 312, 813), pyneb's
    // o_iii_atom_SZ00-WFD96.dat: 2.98. Within 1 % (the windows hold > 99 %
    // of each line).
    let want = published_ratio(
        "o_iii_atom_SZ00-WFD96.dat",
        lw("[O III] 5008"),
        lw("[O III] 4960"),
    );
    approx::assert_relative_eq!(o3, want, max_relative = 0.01);
    // [N II]: the test below
}

#[test]
fn nii_doublet_ratio_within_one_per_cent_of_the_a_values() {
    // Source: the transition probabilities of Froese Fischer & Tachiev 2004
    // (ADNDT 87, 1) as pyneb 1.1.32 ships them (n_ii_atom_FFT04.dat), 2.94.
    // Within 1 % (the ±4 Å windows hold > 99 % of each line), both in the
    // template and in the ratio the emission-line fit ties the doublet with.
    let lw = lines::wave_of;
    let want = published_ratio("n_ii_atom_FFT04.dat", lw("[N II] 6585"), lw("[N II] 6550"));
    approx::assert_relative_eq!(doublet_ratios().1, want, max_relative = 0.01);
    approx::assert_relative_eq!(
        zvet::fit::emission::table::NII_6585_6550,
        want,
        max_relative = 0.01
    );
}

#[test]
fn old_galaxy_has_a_strong_4000_break() {
    // Balogh et al. (1999): passive galaxies have D4000(narrow) ≈ 1.6–2.2,
    // star-forming ones ≈ 1.0–1.3 (from memory).
    let set = templates::builtin();
    let old = d4000_narrow(get(set, "galaxy-old"));
    let young = d4000_narrow(get(set, "galaxy-young"));
    assert!((1.6..=2.2).contains(&old), "old D4000n = {old}");
    assert!((0.8..=1.3).contains(&young), "young D4000n = {young}");
    assert!(old > young + 0.5);
}

#[test]
fn emission_lines_peak_at_their_listed_wavelengths() {
    let set = templates::builtin();
    let gas_fwhm = galaxies::GAS_SIGMA_KMS * 2.3548;
    let mut checked = 0;
    let mut unpublished = Vec::new();
    for (tname, comps) in [
        (
            "galaxy-emission",
            galaxies::high_ionisation_lines()
                .iter()
                .map(|l| (l.0, gas_fwhm))
                .collect::<Vec<_>>(),
        ),
        (
            "qso-balmer",
            quasars::BALMER_LINES
                .iter()
                .map(|c| (c.line, c.fwhm_kms))
                .collect(),
        ),
        // Blueward of ~1300 Å the forest eats the blue wings: peaks shift there.
        (
            "qso-uv-lines",
            quasars::UV_LINES
                .iter()
                .filter(|c| lines::wave_of(c.line) > 1300.0)
                .map(|c| (c.line, c.fwhm_kms))
                .collect(),
        ),
    ] {
        let t = get(set, tname);
        let g = t.grid();
        for &(n, fwhm) in &comps {
            let w = lines::wave_of(n);
            // Only unblended lines: no other line within 8 Å or within this
            // line's FWHM, and not on the wing of a broader line (within
            // three of its FWHM).
            let crowded = comps.iter().any(|&(m, f2)| {
                let o = lines::wave_of(m);
                let d = (o - w).abs();
                let c = 299_792.458;
                d > 1e-9 && (d < 8.0 || d < w * fwhm / c || (f2 > fwhm && d < 3.0 * o * f2 / c))
            });
            if crowded {
                continue;
            }
            // The published wavelength (Morton 2003 Table 2 or the linetools
            // galaxy lists, see lines::published_wave), not our own lookup.
            let Some(w) = crate::lines::published_wave(n) else {
                unpublished.push(n);
                continue;
            };
            let half = (w * fwhm / 299_792.458).max(4.0);
            let r = g.range(w - half, w + half);
            let imax = r.max_by(|&a, &b| t.flux[a].total_cmp(&t.flux[b])).unwrap();
            let dpix = g.pixel(w) - imax as f64;
            assert!(dpix.abs() <= 0.5, "{tname}: {n} peaks {dpix:.2} pixels from {w}");
            checked += 1;
        }
    }
    assert!(
        checked >= 20,
        "{checked} checked; no published wavelength for {unpublished:?}"
    );
}

#[test]
fn lyman_alpha_forest_suppresses_the_blue_side() {
    // Mean transmitted flux of the Lyα forest at z ≈ 2.5 is F ≈ 0.75–0.85
    // (published measurements of the mean flux decrement; from memory).
    let t = templates::builtin();
    let c = get(t, "qso-continuum");
    let red = get(t, "qso-red");
    let at = |t: &Template, l: f64| t.at(l).unwrap();
    // The red basis is a pure power law times the transmission: compare with
    // the power law extrapolated from 1300–1450 Å.
    let slope = (at(red, 1450.0) / at(red, 1300.0)).ln() / (1450f64 / 1300.0).ln();
    let pl = |l: f64| at(red, 1300.0) * (l / 1300.0).powf(slope);
    let trans_1180 = at(red, 1180.0) / pl(1180.0);
    assert!((0.7..=0.88).contains(&trans_1180), "transmission {trans_1180}");
    // Below 912 Å the intervening absorbers' Lyman continuum makes it darker
    // still, by about one e-fold per ~60 Å rest at z ≈ 2.5–3 (a mean free path
    // of ~100 proper Mpc; from memory), with no sharp edge in the mean.
    assert!(at(c, 820.0) / at(c, 1180.0) < 0.5);
    assert!(at(c, 905.0) / at(c, 918.0) > 0.8);
}

/// Equivalent width (Å) of an absorption line in a real spectrum file:
/// ∫ (1 − f/c) dλ over [center − half, center + half] (trapezoids on the
/// file's own pixels), c the straight line through the median flux within
/// ±5 Å of the two continuum points (the definition of an equivalent width,
/// common practice).
fn real_ew(path: &std::path::Path, center: f64, half: f64, cont: (f64, f64)) -> f64 {
    let s = zvet::io::read_file(path, &Default::default()).unwrap().remove(0);
    let (w, f) = (s.wave(), s.flux());
    let med = |at: f64| {
        let mut v: Vec<f64> = (0..w.len())
            .filter(|&i| (w[i] - at).abs() <= 5.0 && f[i].is_finite())
            .map(|i| f[i])
            .collect();
        assert!(!v.is_empty(), "{}: no pixels near {at} Å", path.display());
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    let (c0, c1) = (med(cont.0), med(cont.1));
    let c = |l: f64| c0 + (c1 - c0) * (l - cont.0) / (cont.1 - cont.0);
    let idx: Vec<usize> = (0..w.len())
        .filter(|&i| (center - half..=center + half).contains(&w[i]))
        .collect();
    idx.windows(2)
        .map(|p| {
            let (a, b) = (p[0], p[1]);
            0.5 * ((1.0 - f[a] / c(w[a])) + (1.0 - f[b] / c(w[b]))) * (w[b] - w[a])
        })
        .sum()
}

#[test]
fn spectral_sequence_behaves_as_in_the_textbooks() {
    // Classification criteria (common practice): hydrogen lines peak at A0,
    // Ca II K grows towards cool types, TiO bands appear in M stars.
    let set = templates::builtin();
    let seq = [
        "star-O", "star-B", "star-A", "star-F", "star-G", "star-K", "star-M0", "star-M4",
    ];
    let ew = |t: &Template, center: f64, half: f64, cont: (f64, f64)| {
        let g = t.grid();
        let c = 0.5 * (t.at(cont.0).unwrap() + t.at(cont.1).unwrap());
        let deficit: Vec<f64> = t.flux.iter().map(|f| 1.0 - f / c).collect();
        integral(&deficit, &g, center - half, center + half)
    };
    let hdelta: Vec<f64> = seq
        .iter()
        .map(|n| ew(get(set, n), 4102.9, 40.0, (4045.0, 4160.0)))
        .collect();
    let best = hdelta
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))
        .unwrap()
        .0;
    assert_eq!(seq[best], "star-A", "Hδ EWs {hdelta:?}");
    // The A template's Hδ against a real A0 V star measured the same way
    // (same line and continuum windows): the STIS spectrum of α Lyr that
    // astro-sedpy ships (support::a0v_star).
    let vega = real_ew(&support::a0v_star(), 4102.9, 40.0, (4045.0, 4160.0));
    // The template is a generic A dwarf, α Lyr an A0 V; Balmer equivalent
    // widths in a fixed window differ by up to about a fifth between A0 and
    // A3 dwarfs (from memory), so within 20 % (measured: 13.6 Å vs 16.2 Å).
    assert!(
        (hdelta[2] / vega - 1.0).abs() < 0.2,
        "A-star Hδ EW {} Å, α Lyr {vega} Å",
        hdelta[2]
    );
    let cak: Vec<f64> = seq[2..6]
        .iter()
        .map(|n| ew(get(set, n), 3934.8, 12.0, (3910.0, 3955.0)))
        .collect();
    assert!(cak.windows(2).all(|w| w[1] > w[0]), "Ca K EWs {cak:?}");
    // TiO 7056 Å band: absent in a K star, and deepening along the M sequence.
    // Bounds from real dwarfs (Kesseli et al. 2019, kastredux 1.1.4, measured
    // with numpy on the same two wavelengths): the K7 dwarf Gl 143.1 gives
    // 1.02, so a K star above 0.9; the M4 dwarfs Gl 402 and NLTT 3247 give
    // 0.70 and 0.71, so M4 below 0.8. (The calibrated depth, the TiO5 index
    // against Reid, Hawley & Gizis 1995, is checked in
    // `stars::m_dwarfs_follow_the_published_band_index_relations`; the depth
    // at the head against those real stars in
    // `stars::cool_star_band_heads_are_as_deep_as_in_real_stars`.)
    let tio = |n: &str| {
        let t = get(set, n);
        t.at(7070.0).unwrap() / t.at(7040.0).unwrap()
    };
    let (k, m0, m4) = (tio("star-K"), tio("star-M0"), tio("star-M4"));
    assert!(k > 0.9 && m0 < k && m4 < m0 && m4 < 0.8, "K {k} M0 {m0} M4 {m4}");
    // The white dwarf's Balmer lines are far broader than the A star's.
    let wd = ew(get(set, "star-WD-DA"), 4102.9, 60.0, (4010.0, 4200.0));
    let a60 = ew(get(set, "star-A"), 4102.9, 60.0, (4010.0, 4200.0));
    let real_wd = real_ew(&support::da_white_dwarf(), 4102.9, 60.0, (4010.0, 4200.0));
    let real_a = real_ew(&support::a0v_star(), 4102.9, 60.0, (4010.0, 4200.0));
    // The ratio of the real DA white dwarf's Hδ to the real A star's in the
    // same window (1.2 for GRW +70 5824 and α Lyr) is the floor for the
    // templates' ratio (a hot DA's lines are weaker than the strongest DAs').
    assert!(
        wd / a60 >= real_wd / real_a,
        "WD/A Hδ EW {wd:.1}/{a60:.1} below the real stars' {real_wd:.1}/{real_a:.1}"
    );
}

#[test]
fn stellar_continua_follow_planck() {
    // Far from strong features the continuum ratio between 5600 Å and
    // 10400 Å equals the Planck ratio at the type's temperature (Planck's law,
    // CODATA constants); line blanketing changes it by a few per cent at most.
    let set = templates::builtin();
    for st in templates::stars::SEQUENCE
        .iter()
        .filter(|s| (4_000.0..7_500.0).contains(&s.teff))
    {
        let t = get(set, st.name);
        let got = t.at(5600.0).unwrap() / t.at(10400.0).unwrap();
        let want =
            templates::profiles::planck(5600.0, st.teff) / templates::profiles::planck(10400.0, st.teff);
        approx::assert_relative_eq!(got, want, max_relative = 0.04);
    }
}

#[test]
fn planck_matches_astropy_blackbody() {
    // astropy's BlackBody (recorded by tests/scripts/record_planck_astropy.py
    // into tests/data/templates/planck_astropy.json): the shape, B_λ over
    // B_λ(5500 Å), from the Lyman limit to 5 µm and 3000–40000 K. Both use
    // CODATA 2018 constants; zvet rounds hc/k to 10 digits, so 1e-7 relative.
    let p = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/templates/planck_astropy.json");
    let rec: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap();
    let waves: Vec<f64> = rec["wave_angstrom"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let i0 = waves.iter().position(|w| (*w - 5500.0).abs() < 1e-9).unwrap();
    let mut checked = 0;
    for (t, vals) in rec["b_lambda"].as_object().unwrap() {
        let t: f64 = t.parse().unwrap();
        let vals: Vec<f64> = vals
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let ours0 = templates::profiles::planck(5500.0, t);
        for (w, v) in waves.iter().zip(&vals) {
            let want = v / vals[i0];
            let got = templates::profiles::planck(*w, t) / ours0;
            approx::assert_relative_eq!(got, want, max_relative = 1e-7);
            checked += 1;
        }
    }
    assert_eq!(checked, 50);
}

#[test]
fn cli_builds_and_lists_sets() {
    let dir = support::scratch("templates-cli");
    let exe = env!("CARGO_BIN_EXE_zvet");
    let out = std::process::Command::new(exe)
        .args(["templates", "build", "--out"])
        .arg(&dir)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let out = std::process::Command::new(exe)
        .args(["templates", "list"])
        .arg(&dir)
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    for name in ["galaxy-old", "qso-continuum", "star-M4", "each alone"] {
        assert!(text.contains(name), "{text}");
    }
    let bad = std::process::Command::new(exe)
        .args(["templates", "list"])
        .arg(dir.join("nope.fits"))
        .output()
        .unwrap();
    assert!(!bad.status.success());
    assert!(String::from_utf8_lossy(&bad.stderr).contains("nope.fits"));
}

#[test]
fn user_set_with_only_a_standard_wcs_is_read() {
    // FITS WCS Paper III, WAVE-LOG: λ(p) = CRVAL1 · exp(CDELT1 (p − CRPIX1) / CRVAL1).
    let dir = support::scratch("templates-wcs-only");
    let path = dir.join("mine.fits");
    let mut f = fitsio::FitsFile::create(&path).open().unwrap();
    let desc = fitsio::images::ImageDescription {
        data_type: fitsio::images::ImageType::Float,
        dimensions: &[100],
    };
    let hdu = f.create_image("my-galaxy".to_string(), &desc).unwrap();
    hdu.write_image(&mut f, &[1.0f32; 100]).unwrap();
    hdu.write_key(&mut f, "TPLCLASS", "galaxy").unwrap();
    hdu.write_key(&mut f, "TPLKIND", "emission").unwrap();
    hdu.write_key(&mut f, "CTYPE1", "WAVE-LOG").unwrap();
    hdu.write_key(&mut f, "CUNIT1", "nm").unwrap();
    hdu.write_key(&mut f, "CRPIX1", 11.0f64).unwrap();
    hdu.write_key(&mut f, "CRVAL1", 500.0f64).unwrap(); // nm at pixel 11
    hdu.write_key(&mut f, "CDELT1", 500.0 * 2e-4f64).unwrap(); // Δ ln λ = 2e-4 per pixel
    drop(f);
    let set = templates::read_set(&path).expect("read");
    let g = set.class(ObjectClass::Galaxy).expect("galaxy group");
    assert_eq!(g.mode, FitMode::Basis); // default for galaxies
    let t = &g.templates[0];
    assert_eq!(t.kind, TemplateKind::Emission);
    approx::assert_relative_eq!(t.wave(10), 5000.0, max_relative = 1e-12);
    approx::assert_relative_eq!(t.wave(60), 5000.0 * (50.0f64 * 2e-4).exp(), max_relative = 1e-12);
}

#[test]
fn a_star_balmer_profiles_match_alpha_lyr() {
    // The A template's Hβ, Hγ and Hδ, seen at the resolution of the STIS
    // spectrum of α Lyr that astro-sedpy ships (5.5 Å FWHM at 4100–4900 Å,
    // the file's own FWHM column) and normalised the same way on both (a
    // straight line through the medians of 75–95 Å on either side), against
    // the real star pixel by pixel over ±40 Å. The Lorentzian wings were
    // fitted to this star (`tests/scripts/balmer_profiles.py`), so this checks
    // that the generator reproduces the calibration in the shape that
    // matters for emission lines measured in the trough (the old profile,
    // flat-bottomed with 16–20 Å wings, was 0.2 too shallow at the centre).
    // Tolerance: rms 0.02 and 0.04 at any pixel, about twice the fit's
    // residual (0.8–1.5 %).
    let t = get(templates::builtin(), "star-A");
    let g = t.grid();
    let vega = zvet::io::read_file(&support::a0v_star(), &Default::default())
        .unwrap()
        .remove(0);
    let c = zvet::fit::C_KMS;
    for (name, center) in [("Hβ", 4862.68), ("Hγ", 4341.69), ("Hδ", 4102.89)] {
        let seen_kms = 5.5 / 8f64.ln().sqrt() / 2.0 / center * c;
        let template = templates::profiles::convolve_velocity(
            &t.flux,
            &g,
            (seen_kms.powi(2) - templates::stars::INSTRUMENT_SIGMA_KMS.powi(2)).sqrt(),
        );
        let tw = g.waves();
        let normalised = |w: &[f64], f: &[f64]| -> Vec<(f64, f64)> {
            let side = |lo: f64, hi: f64| {
                let mut v: Vec<f64> = (0..w.len())
                    .filter(|&i| (lo..=hi).contains(&(w[i] - center)) && f[i].is_finite())
                    .map(|i| f[i])
                    .collect();
                assert!(v.len() >= 3, "{name}: side band {lo}–{hi} Å");
                v.sort_by(f64::total_cmp);
                v[v.len() / 2]
            };
            let (a, b) = (side(-95.0, -75.0), side(75.0, 95.0));
            (0..w.len())
                .filter(|&i| (w[i] - center).abs() <= 40.0)
                .map(|i| {
                    let x = w[i] - center;
                    (x, f[i] / (a + (b - a) * (x + 85.0) / 170.0))
                })
                .collect()
        };
        let ours = normalised(&tw, &template);
        let real = normalised(vega.wave(), vega.flux());
        let at = |x: f64| {
            let j = ours.partition_point(|p| p.0 < x).clamp(1, ours.len() - 1);
            let (p, q) = (ours[j - 1], ours[j]);
            p.1 + (q.1 - p.1) * (x - p.0) / (q.0 - p.0)
        };
        let d: Vec<f64> = real.iter().map(|&(x, r)| at(x) - r).collect();
        let rms = (d.iter().map(|v| v * v).sum::<f64>() / d.len() as f64).sqrt();
        let worst = d.iter().fold(0f64, |m, v| m.max(v.abs()));
        let centre = real
            .iter()
            .min_by(|p, q| p.0.abs().total_cmp(&q.0.abs()))
            .unwrap();
        eprintln!(
            "{name}: rms {rms:.4}, largest {worst:.4}; centre {:.3} (α Lyr {:.3})",
            at(centre.0),
            centre.1
        );
        assert!(rms < 0.02 && worst < 0.04, "{name}: rms {rms}, largest {worst}");
    }
}
