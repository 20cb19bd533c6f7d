//! The spectrum readers against values a reference library recorded: the
//! tiny fixtures in tests/data/io/ (written by tests/scripts/make_io_fixtures.py,
//! expected values from astropy/astropy.wcs in expected.json), the three real
//! spectra that registry packages ship (values recorded by
//! tests/scripts/record_reference_spectra.py with astropy), the bad files, and
//! `zvet inspect` run as a program.
use crate::support;
use serde_json::Value;
use std::path::{Path, PathBuf};
use zvet::io::{expand_inputs, read_file, stream_file, LoadError, ReadOptions};
use zvet::spectrum::{air_to_vacuum, Medium, Spectrum};

fn data_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/io")
}

fn json(name: &str) -> Value {
    let p = data_dir().join(name);
    let text = std::fs::read_to_string(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
    serde_json::from_str(&text).expect("valid JSON")
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()).max(1e-300)
}

/// Compare one spectrum with an object recorded by make_io_fixtures.py (astropy).
fn check_object(file: &str, s: &Spectrum, e: &Value) {
    let ctx = format!("{file} / {}", s.meta.id);
    assert_eq!(s.meta.id, e["id"].as_str().unwrap(), "{ctx}: id");
    assert_eq!(s.meta.hdu.map(|h| h as u64), e["hdu"].as_u64(), "{ctx}: hdu");
    assert_eq!(s.meta.row.map(|h| h as u64), e["row"].as_u64(), "{ctx}: row");
    let air = e["medium"] == "air";
    assert_eq!(
        s.meta.medium_as_read,
        if air { Medium::Air } else { Medium::Vacuum },
        "{ctx}"
    );
    assert_eq!(
        s.meta.noise_estimated,
        e["noise_estimated"].as_bool().unwrap(),
        "{ctx}"
    );
    assert_eq!(
        s.meta.flux_unit.as_deref(),
        e["flux_unit"].as_str(),
        "{ctx}: flux unit"
    );
    let wave = e["wave"].as_array().unwrap();
    assert_eq!(s.len(), wave.len(), "{ctx}: pixels");
    let good: Vec<bool> = e["good"]
        .as_array()
        .unwrap()
        .iter()
        .map(|g| g.as_bool().unwrap())
        .collect();
    assert_eq!(s.good(), &good[..], "{ctx}: good-pixel mask");
    for i in 0..s.len() {
        // astropy's wavelength in the file's medium; air is converted by our
        // IAU-standard formula (itself tested against published pairs).
        let w = wave[i].as_f64().unwrap();
        let w = if air { air_to_vacuum(w) } else { w };
        assert!(
            close(s.wave()[i], w, 1e-10),
            "{ctx}: wave[{i}] {} vs {w}",
            s.wave()[i]
        );
        if good[i] {
            let f = e["flux"][i].as_f64().unwrap();
            assert!(
                close(s.flux()[i], f, 1e-9),
                "{ctx}: flux[{i}] {} vs {f}",
                s.flux()[i]
            );
            if let Some(iv) = e["ivar"][i].as_f64() {
                assert!(
                    close(s.ivar()[i], iv, 1e-9),
                    "{ctx}: ivar[{i}] {} vs {iv}",
                    s.ivar()[i]
                );
            }
        }
    }
}

#[test]
fn fixtures_match_what_astropy_reads() {
    let exp = json("expected.json");
    let files = exp["files"].as_object().unwrap();
    assert!(files.len() >= 15, "every reader shape has a fixture");
    for (name, objects) in files {
        let spectra = read_file(&data_dir().join(name), &ReadOptions::default())
            .unwrap_or_else(|e| panic!("{name}: {e}"));
        let objects = objects.as_array().unwrap();
        assert_eq!(spectra.len(), objects.len(), "{name}: number of objects");
        for (s, e) in spectra.iter().zip(objects) {
            check_object(name, s, e);
        }
    }
}

#[test]
fn bad_fixtures_give_their_own_error() {
    let exp = json("expected.json");
    for (name, variant) in exp["bad"].as_object().unwrap() {
        let path = data_dir().join("bad").join(name);
        let err = read_file(&path, &ReadOptions::default())
            .err()
            .unwrap_or_else(|| panic!("{name} was read without error"));
        let got = match err.kind() {
            LoadError::Truncated(_) => "Truncated",
            LoadError::ColumnType { .. } => "ColumnType",
            LoadError::LengthMismatch { .. } => "LengthMismatch",
            LoadError::NoGoodPixels { .. } => "NoGoodPixels",
            LoadError::UnknownUnit { .. } => "UnknownUnit",
            LoadError::EmptyTable { .. } => "EmptyTable",
            LoadError::NoSpectrum(_) => "NoSpectrum",
            _ => "other",
        };
        assert_eq!(got, variant.as_str().unwrap(), "{name}: {err}");
        // one line, naming the file
        let line = err.to_string();
        assert!(!line.contains('\n') && line.contains(name.as_str()), "{line}");
    }
}

#[test]
fn multi_object_tables_stream_row_by_row() {
    let path = data_dir().join("tab_vector_loglam.fits");
    let mut it = stream_file(&path, &ReadOptions::default()).unwrap();
    let first = it.next().unwrap().unwrap();
    assert_eq!(first.meta.row, Some(0));
    // positions come from the RA/DEC columns the script wrote
    assert_eq!(first.meta.ra, Some(10.0));
    assert_eq!(first.meta.dec, Some(-5.0));
    assert_eq!(it.count(), 2);
}

#[test]
fn options_override_what_the_file_says() {
    // --air on a vacuum file: every λ goes through the air→vacuum conversion
    let plain = &read_file(&data_dir().join("img_linear.fits"), &ReadOptions::default()).unwrap()[0];
    let opts = ReadOptions {
        air: true,
        ..Default::default()
    };
    let air = &read_file(&data_dir().join("img_linear.fits"), &opts).unwrap()[0];
    assert_eq!(air.meta.medium_as_read, Medium::Air);
    for (a, p) in air.wave().iter().zip(plain.wave()) {
        assert!(close(*a, air_to_vacuum(*p), 1e-12));
    }
    // explicit column names and HDU
    let opts = ReadOptions {
        wave_col: Some("wavelength".into()),
        flux_col: Some("Flux".into()),
        err_col: Some("error".into()),
        hdu: Some(1),
        ..Default::default()
    };
    let s = read_file(&data_dir().join("tab_pixel_sigma.fits"), &opts).unwrap();
    assert_eq!(s.len(), 1);
    // a named column that is not there, an HDU that is not there
    let opts = ReadOptions {
        flux_col: Some("nope".into()),
        ..Default::default()
    };
    let e = read_file(&data_dir().join("tab_pixel_sigma.fits"), &opts).unwrap_err();
    assert!(
        matches!(e.kind(), LoadError::MissingColumn { role: "flux", .. }),
        "{e}"
    );
    let opts = ReadOptions {
        hdu: Some(7),
        ..Default::default()
    };
    let e = read_file(&data_dir().join("tab_pixel_sigma.fits"), &opts).unwrap_err();
    assert!(matches!(e.kind(), LoadError::BadHdu { .. }), "{e}");
    // a 1-D image without a spectral WCS is skipped, unless chosen by hand
    let opts = ReadOptions {
        hdu: Some(0),
        ..Default::default()
    };
    let e = read_file(&data_dir().join("bad/no_wcs.fits"), &opts).unwrap_err();
    assert!(matches!(e.kind(), LoadError::BadWcs { .. }), "{e}");
    // a mask column named by hand on a file whose synonyms would not find it
    let opts = ReadOptions {
        mask_col: Some("Quality".into()),
        ..Default::default()
    };
    let s = &read_file(&data_dir().join("tab_mask.fits"), &opts).unwrap()[0];
    // exactly the pixels the fixture's recording (astropy, make_io_fixtures.py) marks good
    let want: Vec<bool> = json("expected.json")["files"]["tab_mask.fits"][0]["good"]
        .as_array()
        .unwrap()
        .iter()
        .map(|g| g.as_bool().unwrap())
        .collect();
    assert_eq!(s.good(), want.as_slice());
    assert!(s.n_good() < s.len(), "the fixture has bad pixels");
}

#[test]
fn folders_expand_to_all_spectrum_files_in_stable_order() {
    let files = expand_inputs(&[data_dir()]);
    let names: Vec<String> = files
        .iter()
        .map(|p| p.strip_prefix(data_dir()).unwrap().display().to_string())
        .collect();
    // Exactly the fixtures the writing scripts recorded: the good files and
    // bad files of make_io_fixtures.py (expected.json), the frames of
    // make_frame_fixtures.py (frames_expected.json), and the one bad frame
    // that script writes without recording it; the JSON files are not spectra.
    let exp = json("expected.json");
    let frames = json("frames_expected.json");
    let mut want: Vec<String> = exp["files"]
        .as_object()
        .unwrap()
        .keys()
        .chain(frames["files"].as_object().unwrap().keys())
        .cloned()
        .chain(exp["bad"].as_object().unwrap().keys().map(|k| format!("bad/{k}")))
        .chain(["bad/frame_short_table.fits".to_string()])
        .collect();
    want.sort();
    let mut got = names.clone();
    got.sort();
    assert_eq!(got, want);
    let mut sorted = names.clone();
    sorted.sort();
    assert_eq!(names, sorted);
    assert!(names.iter().all(|n| !n.ends_with(".json")));
    assert_eq!(expand_inputs(&[data_dir()]), files);
}

/// What a damaged copy of `name` read as must be what the copy really holds:
/// an error that names the file, or spectra equal to the intact file's
/// (`whole`). A text table cut between lines holds the first rows, so its
/// spectra may be a prefix of the intact ones (the last row may be cut in
/// the middle of a number, so its pixel is not compared); a FITS file holds
/// its data whole or is damaged, so nothing short of all of it may read.
fn check_damaged(p: &Path, name: &str, whole: &[Spectrum]) {
    let text = !name.contains(".fits");
    match read_file(p, &ReadOptions::default()) {
        Err(e) => {
            let file = p.file_name().unwrap().to_string_lossy();
            assert!(
                e.to_string().contains(file.as_ref()),
                "{}: the error does not name the file: {e}",
                p.display()
            );
        }
        Ok(got) => {
            assert!(
                !got.is_empty() && got.len() <= whole.len(),
                "{}: {} spectra from a file of {}",
                p.display(),
                got.len(),
                whole.len()
            );
            for (g, w) in got.iter().zip(whole) {
                let ctx = format!("{} / {}", p.display(), g.meta.id);
                let n = g.len();
                let compared = if text {
                    assert!(n <= w.len(), "{ctx}: {n} pixels, the intact file has {}", w.len());
                    n.saturating_sub(1)
                } else {
                    assert_eq!(n, w.len(), "{ctx}: a damaged FITS file read with other pixels");
                    n
                };
                for i in 0..compared {
                    assert!(close(g.wave()[i], w.wave()[i], 1e-12), "{ctx}: wave[{i}]");
                    assert!(
                        close(g.flux()[i], w.flux()[i], 1e-12)
                            || (g.flux()[i].is_nan() && w.flux()[i].is_nan()),
                        "{ctx}: flux[{i}] {} where the file holds {}",
                        g.flux()[i],
                        w.flux()[i]
                    );
                }
            }
        }
    }
}

#[test]
fn damaged_files_never_panic() {
    // Cut every fixture at many lengths and flip header bytes: each read
    // must give an error naming the file or exactly the data the damaged
    // file still holds (check_damaged), never a panic.
    let dir = support::scratch("io-damaged");
    let exp = json("expected.json");
    let mut errors = 0;
    let mut reads = 0;
    for name in exp["files"].as_object().unwrap().keys() {
        let bytes = std::fs::read(data_dir().join(name)).unwrap();
        let whole = read_file(&data_dir().join(name), &ReadOptions::default()).unwrap();
        let cuts = [1usize, 80, 2879, 2880, 2881, 3000, 5000, 5760, 8000];
        for (k, &cut) in cuts.iter().filter(|c| **c < bytes.len()).enumerate() {
            let p = dir.join(format!("cut{k}_{name}"));
            std::fs::write(&p, &bytes[..cut]).unwrap();
            check_damaged(&p, name, &whole);
            reads += 1;
            errors += usize::from(read_file(&p, &ReadOptions::default()).is_err());
        }
        if name.ends_with(".fits") {
            // garble a table format and an axis length
            let text = String::from_utf8_lossy(&bytes).into_owned();
            for (from, to) in [
                ("TFORM2  = '", "TFORM2  = '9"),
                ("NAXIS1  =", "NAXIS1  = -"),
                ("BITPIX  =", "BITPIX  = 7"),
            ] {
                if let Some(i) = text.find(from) {
                    let mut b = bytes.clone();
                    let at = i + from.len();
                    for (j, c) in to[from.len()..].bytes().enumerate() {
                        b[at + j] = c;
                    }
                    let p = dir.join(format!(
                        "garbled_{}_{name}",
                        from.split_whitespace().next().unwrap()
                    ));
                    std::fs::write(&p, &b).unwrap();
                    check_damaged(&p, name, &whole);
                    reads += 1;
                    errors += usize::from(read_file(&p, &ReadOptions::default()).is_err());
                }
            }
        }
    }
    // Every FITS fixture is longer than the shortest cuts, which are all errors.
    assert!(errors * 2 > reads, "{errors} errors of {reads} damaged reads");
}

fn reference() -> Value {
    json("reference_spectra.json")
}

/// Compare a real spectrum with the numbers astropy read from the same file.
fn check_samples(s: &Spectrum, r: &Value, what: &str, has_ivar: bool) {
    for smp in r["samples"].as_array().unwrap() {
        let i = smp["index"].as_u64().unwrap() as usize;
        let w = smp["wave"].as_f64().unwrap();
        assert!(
            close(s.wave()[i], w, 1e-9),
            "{what}: wave[{i}] {} vs {w}",
            s.wave()[i]
        );
        if let Some(f) = smp["flux"].as_f64() {
            assert!(close(s.flux()[i], f, 1e-9), "{what}: flux[{i}]");
        }
        if has_ivar {
            match smp["ivar"].as_f64() {
                Some(iv) => assert!(
                    close(s.ivar()[i], iv, 1e-9),
                    "{what}: ivar[{i}] {} vs {iv}",
                    s.ivar()[i]
                ),
                None => assert!(!s.good()[i], "{what}: pixel {i} has no usable ivar in the file"),
            }
        }
    }
}

#[test]
fn the_nearby_passive_galaxy_reads_as_astropy_reads_it() {
    let r = &reference()["passive_galaxy"];
    let spectra = read_file(&support::passive_galaxy(), &ReadOptions::default()).unwrap();
    // The combined spectrum (HDU COADD) is the object; the single exposures
    // in later HDUs are the same object and are named in a warning.
    assert_eq!(spectra.len(), 1);
    let s = &spectra[0];
    assert_eq!(s.meta.hdu, Some(r["hdu"].as_u64().unwrap() as usize));
    // Pixel count and range as astropy read them from the same file
    // (tests/scripts/record_reference_spectra.py), not typed in here.
    assert_eq!(s.len() as u64, r["pixels"].as_u64().unwrap());
    assert!(close(s.wave()[0], r["wave_min"].as_f64().unwrap(), 1e-10));
    assert!(close(
        s.wave()[s.len() - 1],
        r["wave_max"].as_f64().unwrap(),
        1e-10
    ));
    assert_eq!(s.meta.medium_as_read, Medium::Vacuum);
    assert_eq!(s.n_good() as u64, r["n_good"].as_u64().unwrap());
    assert_eq!(s.meta.flux_unit.as_deref(), r["flux_unit"].as_str());
    assert!(!s.meta.noise_estimated);
    check_samples(s, r, "passive galaxy", true);
    // --hdu picks one exposure instead
    let opts = ReadOptions {
        hdu: Some(4),
        ..Default::default()
    };
    let e = read_file(&support::passive_galaxy(), &opts).unwrap();
    assert_eq!(e[0].meta.hdu, Some(4));
}

#[test]
fn the_a0v_star_reads_as_astropy_reads_it() {
    let r = &reference()["a0v_star"];
    let s = &read_file(&support::a0v_star(), &ReadOptions::default()).unwrap()[0];
    assert_eq!(s.len() as u64, r["pixels"].as_u64().unwrap());
    assert!(close(s.wave()[0], r["wave_min"].as_f64().unwrap(), 1e-10));
    assert!(close(
        s.wave()[s.len() - 1],
        r["wave_max"].as_f64().unwrap(),
        1e-10
    ));
    // σ = STATERROR → ivar = 1/σ²; σ = 0 pixels are bad
    assert_eq!(s.n_good() as u64, r["n_good"].as_u64().unwrap());
    assert_eq!(s.meta.id, r["id"].as_str().unwrap());
    assert_eq!(s.meta.flux_unit.as_deref(), r["flux_unit"].as_str());
    check_samples(s, r, "A0V star", true);
}

#[test]
fn the_g2_model_reads_with_an_estimated_noise() {
    let r = &reference()["g2_model"];
    let s = &read_file(&support::g2_model(), &ReadOptions::default()).unwrap()[0];
    assert_eq!(s.len() as u64, r["pixels"].as_u64().unwrap());
    assert!(close(s.wave()[0], r["wave_min"].as_f64().unwrap(), 1e-10));
    assert!(close(
        s.wave()[s.len() - 1],
        r["wave_max"].as_f64().unwrap(),
        1e-10
    ));
    // no uncertainty in the file: the fallback is flagged and said
    assert!(s.meta.noise_estimated);
    assert!(s.meta.warnings.iter().any(|w| w.contains("no uncertainty")));
    assert!(s.n_good() as u64 <= r["n_finite_flux"].as_u64().unwrap());
    check_samples(s, r, "G2 model", false);
}

#[test]
fn inspect_reports_good_files_and_one_line_per_bad_file() {
    let dir = support::scratch("io-inspect");
    for name in ["img_linear.fits", "tab_vector_loglam.fits"] {
        std::fs::copy(data_dir().join(name), dir.join(name)).unwrap();
    }
    std::fs::copy(data_dir().join("bad/truncated.fits"), dir.join("broken.fits")).unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_zvet"))
        .arg("inspect")
        .arg("--json")
        .arg(&dir)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(1),
        "a bad file makes the exit code non-zero"
    );
    let stdout = String::from_utf8(out.stdout).unwrap();
    let lines: Vec<Value> = stdout.lines().map(|l| serde_json::from_str(l).unwrap()).collect();
    // 1 object from the image + 3 from the table, in file order
    let ids: Vec<&str> = lines.iter().map(|l| l["id"].as_str().unwrap()).collect();
    assert_eq!(ids, ["lin-1", "obj-a", "obj-b", "obj-c"]);
    // the image's pixel count and first wavelength as astropy recorded them
    let rec = &json("expected.json")["files"]["img_linear.fits"][0];
    let wave = rec["wave"].as_array().unwrap();
    assert_eq!(lines[0]["pixels"].as_u64(), Some(wave.len() as u64));
    assert!(close(
        lines[0]["wave_min"].as_f64().unwrap(),
        wave[0].as_f64().unwrap(),
        1e-12
    ));
    let stderr = String::from_utf8(out.stderr).unwrap();
    let bad: Vec<&str> = stderr.lines().filter(|l| l.contains("broken.fits")).collect();
    assert_eq!(bad.len(), 1, "{stderr}");
    assert!(bad[0].contains("truncated"), "{stderr}");

    // the readable listing names the medium and the flags
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_zvet"))
        .args(["inspect", "--air"])
        .arg(data_dir().join("img_linear.fits"))
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        text.contains("lin-1")
            && text.contains("air (converted to vacuum)")
            && text.contains("noise estimated"),
        "{text}"
    );
}
