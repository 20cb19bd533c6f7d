//! The library side of the review window's tools: catalogue photometry
//! converted against astropy, the band table against the published response
//! curves, and the sky spectrum kept by the readers.
use approx::assert_relative_eq;
use std::path::PathBuf;
use zvet::io::{read_file, ReadOptions};
use zvet::photometry::{ab_to_flambda, flambda_unit_scale, points, CATALOG_BANDS};

fn data(rel: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(rel)
}

fn json(rel: &str) -> serde_json::Value {
    let text = std::fs::read_to_string(data(rel)).unwrap();
    serde_json::from_str(&text).unwrap()
}

#[test]
fn ab_magnitudes_to_flambda_agree_with_astropy() {
    // Source: astropy.units, (m * u.ABmag).to(erg/s/cm²/Å, spectral_density(λ)),
    // recorded by tests/scripts/record_photometry.py.
    let j = json("photometry/ab_reference.json");
    let cases = j["ab_to_flambda"].as_array().unwrap();
    assert!(cases.len() >= 30);
    for c in cases {
        let m = c["mag"].as_f64().unwrap();
        let lam = c["wave_angstrom"].as_f64().unwrap();
        let want = c["flambda_cgs_per_angstrom"].as_f64().unwrap();
        assert_relative_eq!(ab_to_flambda(m, lam), want, max_relative = 1e-9);
    }
}

#[test]
fn band_table_matches_the_published_response_curves() {
    // Source: pivot wavelengths of the Doi et al. 2010 (AJ 139, 1628, Table 4)
    // u g r i z curves as shipped by speclite 1.0.0, computed by
    // tests/scripts/record_photometry.py; the table keeps 0.1 Å.
    let j = json("photometry/ab_reference.json");
    let bands = j["bands"].as_array().unwrap();
    assert_eq!(bands.len(), CATALOG_BANDS.len());
    for (b, want) in CATALOG_BANDS.iter().zip(bands) {
        assert_eq!(b.name, want["band"].as_str().unwrap());
        let p = want["pivot_angstrom"].as_f64().unwrap();
        assert!(
            (b.pivot - p).abs() <= 0.05 + 1e-9,
            "{}: {} vs {p}",
            b.name,
            b.pivot
        );
    }
    // Blue to red, in the catalogue's band order.
    assert!(CATALOG_BANDS.windows(2).all(|w| w[0].pivot < w[1].pivot));
    assert_eq!(
        CATALOG_BANDS.iter().map(|b| b.name).collect::<Vec<_>>(),
        zvet::catalog::BANDS
    );
}

#[test]
fn catalogue_points_land_in_the_spectrum_unit() {
    // A flat f_ν source of AB 20 in every band: at each pivot f_λ =
    // f_ν c / λ², in the demo's unit of 1e-17 erg/s/cm²/Å.
    let row = zvet::catalog::CatalogRow {
        mag: [Some(20.0); 5],
        mag_err: [Some(0.05); 5],
        ..Default::default()
    };
    let scale = flambda_unit_scale("1e-17 erg/s/cm2/Angstrom").unwrap();
    let p = points(&row, scale);
    assert_eq!(p.len(), 5);
    let fnu = 3.631e-20 * 10f64.powf(-0.4 * 20.0); // 3631 Jy at AB 0 (Oke & Gunn 1983)
    for q in &p {
        let want = fnu * 2.997_924_58e18 / (q.wave * q.wave) / 1e-17;
        assert_relative_eq!(q.flux, want, max_relative = 2e-4);
    }
}

#[test]
fn the_sky_column_is_kept_with_its_pixels() {
    // Fixture written by astropy (tests/scripts/write_sky_fixture.py), stored
    // red to blue: the sky must come back blue to red with the wavelengths.
    let s = read_file(&data("tools/sky_table.fits"), &ReadOptions::default())
        .unwrap()
        .remove(0);
    let j = json("tools/sky_table.json");
    let sky = s.sky().expect("the SKY column is kept");
    let want: Vec<f64> = j["sky"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let wave: Vec<f64> = j["wave"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert_eq!(sky.len(), want.len());
    for (((got_w, got), w), k) in s.wave().iter().zip(sky).zip(&wave).zip(&want) {
        assert_relative_eq!(*got_w, *w, max_relative = 1e-12);
        assert_relative_eq!(*got, *k, max_relative = 1e-12);
    }
}

#[test]
fn a_text_file_with_a_sky_column_keeps_it_and_one_without_has_none() {
    let dir = tempfile::tempdir().unwrap();
    let with = dir.path().join("with.csv");
    std::fs::write(&with, "wave,flux,ivar,sky\n5000,1,4,7\n5001,1,4,\n5002,1,4,9\n").unwrap();
    let s = read_file(&with, &ReadOptions::default()).unwrap().remove(0);
    let sky = s.sky().unwrap();
    assert_relative_eq!(sky[0], 7.0);
    assert!(sky[1].is_nan(), "an empty sky value stays missing");
    let without = dir.path().join("without.csv");
    std::fs::write(&without, "wave,flux\n5000,1\n5001,2\n5002,1\n").unwrap();
    let s = read_file(&without, &ReadOptions::default()).unwrap().remove(0);
    assert!(s.sky().is_none());
}
