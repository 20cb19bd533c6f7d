//! Multi-object frames (2-D image, one spectrum per row, plus a row table):
//! the fixtures tests/data/io/frame_*.fits were written by
//! tests/scripts/make_frame_fixtures.py with astropy, which also recorded in
//! frames_expected.json the target rows and their wavelengths (astropy.wcs for
//! per-row and header WCS, FITS WCS Paper III), flux and inverse variance.
use serde_json::Value;
use std::path::{Path, PathBuf};
use zvet::io::{frame_layout, read_file, stream_file, LoadError, ReadOptions};
use zvet::spectrum::{air_to_vacuum, Medium};

fn data_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/io")
}

fn expected() -> Value {
    let p = data_dir().join("frames_expected.json");
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()).max(1e-300)
}

#[test]
fn frames_read_their_target_rows_as_astropy_does() {
    let exp = expected();
    let files = exp["files"].as_object().unwrap();
    assert_eq!(files.len(), 3);
    for (name, e) in files {
        let spectra = read_file(&data_dir().join(name), &ReadOptions::default())
            .unwrap_or_else(|err| panic!("{name}: {err}"));
        let targets = e["targets"].as_array().unwrap();
        // Sky and unused rows are skipped.
        assert_eq!(spectra.len(), targets.len(), "{name}");
        let air = e["medium"] == "air";
        for (s, t) in spectra.iter().zip(targets) {
            let ctx = format!("{name} row {}", t["row"]);
            assert_eq!(s.meta.id, t["id"].as_str().unwrap(), "{ctx}");
            assert_eq!(s.meta.row, t["row"].as_u64().map(|r| r as usize), "{ctx}");
            assert_eq!(s.meta.ra, t["ra"].as_f64(), "{ctx}");
            assert_eq!(s.meta.dec, t["dec"].as_f64(), "{ctx}");
            assert_eq!(
                s.meta.medium_as_read,
                if air { Medium::Air } else { Medium::Vacuum },
                "{ctx}"
            );
            let wave = t["wave"].as_array().unwrap();
            assert_eq!(s.len(), wave.len(), "{ctx}");
            let ivar = t["ivar"].as_array();
            assert_eq!(s.meta.noise_estimated, ivar.is_none(), "{ctx}");
            for i in 0..s.len() {
                // astropy's wavelength in the file's medium; air converted by
                // our IAU-standard formula (tested against published pairs).
                let w = wave[i].as_f64().unwrap();
                let w = if air { air_to_vacuum(w) } else { w };
                assert!(
                    close(s.wave()[i], w, 1e-10),
                    "{ctx}: wave[{i}] {} vs {w}",
                    s.wave()[i]
                );
                let f = t["flux"][i].as_f64().unwrap();
                if let Some(iv) = ivar.map(|v| v[i].as_f64().unwrap()) {
                    assert_eq!(s.good()[i], iv > 0.0, "{ctx}: pixel {i} masked where ivar = 0");
                    if iv > 0.0 {
                        assert!(
                            close(s.ivar()[i], iv, 1e-6),
                            "{ctx}: ivar[{i}] {} vs {iv}",
                            s.ivar()[i]
                        );
                    }
                }
                if s.good()[i] {
                    assert!(
                        close(s.flux()[i], f, 1e-9),
                        "{ctx}: flux[{i}] {} vs {f}",
                        s.flux()[i]
                    );
                }
            }
        }
    }
}

#[test]
fn frame_layout_says_what_was_found() {
    let exp = expected();
    for (name, e) in exp["files"].as_object().unwrap() {
        let l = frame_layout(&data_dir().join(name), &ReadOptions::default())
            .unwrap()
            .unwrap_or_else(|| panic!("{name} is a frame"));
        assert_eq!(l.rows as u64, e["rows"].as_u64().unwrap(), "{name}");
        assert_eq!(l.pixels as u64, e["pixels"].as_u64().unwrap(), "{name}");
        assert_eq!(l.targets, e["targets"].as_array().unwrap().len(), "{name}");
        assert_eq!(l.sky as u64, e["skipped"]["sky"].as_u64().unwrap(), "{name}");
        assert_eq!(
            l.unused as u64,
            e["skipped"]["unused"].as_u64().unwrap(),
            "{name}"
        );
    }
    let l = frame_layout(&data_dir().join("frame_wave2d.fits"), &ReadOptions::default())
        .unwrap()
        .unwrap();
    let text = l.to_string();
    assert!(text.contains("6 rows × 120 pixels in HDU 0"), "{text}");
    assert!(
        text.contains("HDU 3 (FIBRES)") && text.contains("use TYPE"),
        "{text}"
    );
    assert!(text.contains("2-D wavelength image HDU 2 (WAVE)"), "{text}");
    assert!(text.contains("inverse variance from HDU 1 (IVAR)"), "{text}");
    assert!(
        text.contains("3 target(s) read; 2 sky and 1 unused skipped"),
        "{text}"
    );
    let l = frame_layout(&data_dir().join("frame_rowwcs.fits"), &ReadOptions::default())
        .unwrap()
        .unwrap();
    assert!(
        l.wavelengths.contains("per-row WCS") && l.wavelengths.contains("air"),
        "{}",
        l.wavelengths
    );
    // A one-spectrum file is not a frame.
    assert!(
        frame_layout(&data_dir().join("img_linear.fits"), &ReadOptions::default())
            .unwrap()
            .is_none()
    );
}

#[test]
fn a_frame_whose_table_does_not_match_its_image_is_a_clear_error() {
    let p = data_dir().join("bad/frame_short_table.fits");
    let err = read_file(&p, &ReadOptions::default()).unwrap_err();
    assert!(matches!(err.kind(), LoadError::BadHdu { .. }), "{err}");
    let msg = err.to_string();
    assert!(
        msg.contains("describes 3 rows; the image has 4") && msg.contains("frame_short_table.fits"),
        "{msg}"
    );
}

#[test]
fn inspect_explains_a_frame_and_times_each_file() {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_zvet"))
        .arg("inspect")
        .arg(data_dir().join("frame_wave2d.fits"))
        .arg(data_dir().join("img_linear.fits"))
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("multi-object frame: 6 rows × 120 pixels"), "{text}");
    assert!(text.contains("2 sky and 1 unused skipped"), "{text}");
    for id in ["slt-0101", "slt-0102", "slt-0103", "lin-1"] {
        assert!(text.contains(id), "{text}");
    }
    assert!(!text.contains("sky-01"), "sky rows are not read: {text}");
    // One read-time line per file.
    assert_eq!(text.matches("read in ").count(), 2, "{text}");
    // JSON: every object line carries its read time.
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_zvet"))
        .args(["inspect", "--json"])
        .arg(data_dir().join("frame_rowwcs.fits"))
        .output()
        .unwrap();
    let lines: Vec<Value> = String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(lines.len(), 3);
    assert!(lines
        .iter()
        .all(|l| l["read_ms"].as_f64().is_some_and(|t| t >= 0.0)));
    assert_eq!(lines[0]["medium"], "air");
}

#[test]
fn frame_rows_stream_one_at_a_time() {
    // The stream yields the first target without reading the others.
    let mut it = stream_file(&data_dir().join("frame_wave2d.fits"), &ReadOptions::default()).unwrap();
    let first = it.next().unwrap().unwrap();
    assert_eq!(first.meta.id, "slt-0101");
    assert_eq!(it.count(), 2);
}
