/*!
More bad input and interrupted runs: a fresh result table never truncates an
older one, campaigns say how their catalogue matches, a spectrum with few
good pixels says so, and a failed command says what failed once.
*/
use crate::robust::demo_campaign;
use crate::support::scratch;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use zvet::pipeline::{read_rows, resume_source, write_records, FitRecord, FitRow, RowWriter};

fn rows(prefix: &str, n: usize) -> Vec<FitRow> {
    (0..n)
        .map(|i| FitRow {
            object_id: format!("{prefix}-{i:03}"),
            source: format!("spectra/{prefix}-{i:03}.fits"),
            class: "galaxy".into(),
            z: Some(0.2 + i as f64 * 1e-3),
            z_err: Some(1e-4),
            chi2: Some(3000.0),
            method: "chi2".into(),
            ..FitRow::default()
        })
        .collect()
}

fn records(rows: &[FitRow]) -> Vec<FitRecord> {
    rows.iter().map(FitRecord::from_flat).collect()
}

fn ids(path: &Path) -> Vec<String> {
    read_rows(path)
        .unwrap()
        .into_iter()
        .map(|r| r.object_id)
        .collect()
}

fn zvet(args: &[&std::ffi::OsStr]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_zvet"))
        .args(args)
        .output()
        .unwrap()
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

// ------------------------------------- a fresh table never truncates the old

#[test]
fn a_failed_fresh_table_leaves_the_old_one_and_resume_carries_it_on() {
    let dir = scratch("gaps-fresh-table");
    for ext in ["csv", "jsonl", "fits"] {
        let out = dir.join(format!("out.{ext}"));
        write_records(&out, &records(&rows("old", 4))).unwrap();
        let before = std::fs::read(&out).unwrap();
        // A fresh run that fails after two rows (its writer is dropped, never finished).
        let new = rows("new", 5);
        let mut w = RowWriter::create(&out, false).unwrap();
        for r in &records(&new[..2]) {
            w.write(r).unwrap();
        }
        assert_eq!(
            std::fs::read(&out).unwrap(),
            before,
            "{ext}: the old table changed mid-run"
        );
        drop(w);
        assert_eq!(
            std::fs::read(&out).unwrap(),
            before,
            "{ext}: a failed run changed the old table"
        );
        if ext == "fits" {
            // Written whole at the end or not at all: nothing to carry on.
            assert_eq!(resume_source(&out), Some(out.clone()));
            continue;
        }
        // Its rows wait in the partial file, which --resume carries on
        // (a torn last row cut off first).
        let partial = zvet::campaign::partial_path(&out);
        assert_eq!(resume_source(&out), Some(partial.clone()), "{ext}");
        assert_eq!(ids(&partial), ["new-000", "new-001"], "{ext}");
        let mut torn = std::fs::read(&partial).unwrap();
        torn.extend_from_slice(b"new-002,spec");
        std::fs::write(&partial, torn).unwrap();
        let mut w = RowWriter::create(&out, true).unwrap();
        for r in &records(&new[2..]) {
            w.write(r).unwrap();
        }
        w.finish().unwrap();
        let want: Vec<String> = new.iter().map(|r| r.object_id.clone()).collect();
        assert_eq!(ids(&out), want, "{ext}");
        assert!(
            !partial.exists(),
            "{ext}: the partial file was renamed into place"
        );
        // A fresh run that finishes replaces the table whole.
        write_records(&out, &records(&rows("third", 2))).unwrap();
        assert_eq!(ids(&out), ["third-000", "third-001"], "{ext}");
        // --resume with no partial file appends to the output itself.
        let mut w = RowWriter::create(&out, true).unwrap();
        w.write(&records(&rows("more", 1))[0]).unwrap();
        w.finish().unwrap();
        assert_eq!(ids(&out), ["third-000", "third-001", "more-000"], "{ext}");
    }
}

/// `zvet fit` killed (SIGKILL) while it writes a fresh table over a good old
/// one: the old table is byte for byte as it was; `--resume` then carries on
/// the killed run's partial file (its torn last row cut off) and renames the
/// finished table into place. (Rows are written per chunk of
/// `pipeline::run::CHUNK` objects, more than this test fits, so the kill
/// lands before the first row; carrying on rows already written is checked
/// above on the writer itself.)
#[cfg(unix)]
#[test]
fn a_killed_fresh_fit_keeps_the_old_table_and_resume_finishes_it() {
    let dir = scratch("gaps-killed-fit");
    let n = 4;
    let survey = zvet::demo::generate_n(zvet::demo::DEFAULT_SEED, n);
    let w = zvet::demo::write_survey(&survey, &dir.join("demo")).unwrap();
    let out = dir.join("out.jsonl");
    write_records(&out, &records(&rows("old", 3))).unwrap();
    let before = std::fs::read(&out).unwrap();
    let partial = zvet::campaign::partial_path(&out);
    let mut child = Command::new(env!("CARGO_BIN_EXE_zvet"))
        .arg("fit")
        .arg(&w.spectra)
        .arg("--out")
        .arg(&out)
        .args(["--threads", "1"])
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    // Kill as soon as the run has opened its partial file.
    let t0 = std::time::Instant::now();
    while !partial.exists() {
        assert!(
            child.try_wait().unwrap().is_none(),
            "zvet fit ended before it could be killed"
        );
        assert!(t0.elapsed().as_secs() < 120, "no partial file after 120 s");
        std::thread::sleep(std::time::Duration::from_millis(2));
    }
    child.kill().unwrap();
    child.wait().unwrap();
    assert_eq!(
        std::fs::read(&out).unwrap(),
        before,
        "the killed run changed the old table"
    );
    // As if the kill had cut a row in half.
    let mut torn = std::fs::read(&partial).unwrap();
    torn.extend_from_slice(br#"{"object_id":"TERN-0001","sou"#);
    std::fs::write(&partial, torn).unwrap();
    let o = zvet(&[
        "fit".as_ref(),
        w.spectra.as_os_str(),
        "--out".as_ref(),
        out.as_os_str(),
        "--resume".as_ref(),
    ]);
    let err = text(&o.stderr);
    assert!(o.status.success(), "{err}");
    assert!(
        err.contains(&format!("{n} fitted, 0 failed, 0 already in the output")),
        "{err}"
    );
    let mut got = ids(&out);
    got.sort();
    let mut want: Vec<String> = survey.objects.iter().map(|o| o.id().to_string()).collect();
    want.sort();
    assert_eq!(got, want, "every object exactly once, none of the old table");
    assert!(!partial.exists());
}

// ------------------------------------------- catalogue match counts (CLI)

/// Lower-case every id of a demo catalogue (header and comments kept).
pub(crate) fn lower_case_ids(cat: &Path) {
    let text = std::fs::read_to_string(cat).unwrap();
    let lower: String = text
        .lines()
        .enumerate()
        .map(|(i, l)| {
            if i == 0 || l.starts_with('#') {
                format!("{l}\n")
            } else {
                let (id, rest) = l.split_once(',').unwrap();
                format!("{},{rest}\n", id.to_lowercase())
            }
        })
        .collect();
    std::fs::write(cat, lower).unwrap();
}

fn init_and_status(dir: &Path, spectra: &Path, cat: &Path, name: &str) -> (Output, Output) {
    let camp = dir.join(name);
    let init = zvet(&[
        "campaign".as_ref(),
        "init".as_ref(),
        camp.as_os_str(),
        "--spectra".as_ref(),
        spectra.as_os_str(),
        "--catalog".as_ref(),
        cat.as_os_str(),
    ]);
    assert!(init.status.success(), "{}", text(&init.stderr));
    let status = zvet(&["campaign".as_ref(), "status".as_ref(), camp.as_os_str()]);
    assert!(status.status.success(), "{}", text(&status.stderr));
    (init, status)
}

#[test]
fn campaign_init_and_status_give_catalogue_match_counts() {
    let dir = scratch("gaps-match-counts");
    let survey = zvet::demo::generate_n(zvet::demo::DEFAULT_SEED, 3);
    let w = zvet::demo::write_survey(&survey, &dir.join("demo")).unwrap();
    // All three match.
    let (init, status) = init_and_status(&dir, &w.spectra, &w.catalog, "good");
    let counts = "3 of 3 spectra have a catalogue row; 0 of 3 catalogue rows match no spectrum";
    assert!(text(&init.stdout).contains(counts), "{}", text(&init.stdout));
    assert!(!text(&init.stderr).contains("warning"), "{}", text(&init.stderr));
    let st = text(&status.stdout);
    assert!(st.contains(&format!("matches   {counts}")), "{st}");
    assert!(!st.contains("problem"), "{st}");
    // The same catalogue with lower-case ids matches nothing: both say so.
    let lower = dir.join("lower.csv");
    std::fs::copy(&w.catalog, &lower).unwrap();
    lower_case_ids(&lower);
    let (init, status) = init_and_status(&dir, &w.spectra, &lower, "lower");
    let counts = "0 of 3 spectra have a catalogue row; 3 of 3 catalogue rows match no spectrum";
    assert!(text(&init.stdout).contains(counts), "{}", text(&init.stdout));
    let err = text(&init.stderr);
    assert!(
        err.contains("warning: no spectrum matches a catalogue row"),
        "{err}"
    );
    assert!(err.contains("letter case"), "{err}");
    let st = text(&status.stdout);
    assert!(st.contains(&format!("matches   {counts}")), "{st}");
    assert!(st.contains("problem   no spectrum matches"), "{st}");
    assert!(st.contains("letter case"), "{st}");
    // One extra catalogue row with no spectrum is counted, not a warning.
    let extra = dir.join("extra.csv");
    let mut t = std::fs::read_to_string(&w.catalog).unwrap();
    let last = t.lines().last().unwrap().to_string();
    let (id, rest) = last.split_once(',').unwrap();
    t.push_str(&format!("{id}-X,{rest}\n"));
    std::fs::write(&extra, t).unwrap();
    let (init, _) = init_and_status(&dir, &w.spectra, &extra, "extra");
    let out = text(&init.stdout);
    assert!(
        out.contains("3 of 3 spectra have a catalogue row; 1 of 4 catalogue rows match no spectrum"),
        "{out}"
    );
}

// ------------------------------------------------ few_pixels is set, gaps stay gaps

#[test]
fn a_spectrum_with_a_wide_gap_gets_the_few_pixels_warning() {
    use zvet::fit::{Engine, FitConfig, Warnings, FEW_PIXELS};
    // 60 pixels of 1 Å from 5000 Å, nothing until one pixel at 8000 Å (a
    // chip gap of 3000 Å). Interpolated across the gap it would give some
    // 3000 grid pixels; as a gap it gives about 60 / (5000 · ln 10 · 1e-4)
    // ≈ 52 (log-λ grid step, common practice), below FEW_PIXELS.
    let make = |wave: Vec<f64>| {
        let n = wave.len();
        let flux: Vec<f64> = (0..n)
            .map(|i| 1.0 + 0.05 * ((i * 37 % 11) as f64 - 5.0) / 5.0)
            .collect();
        zvet::Spectrum::new(wave, flux, Some(vec![400.0; n]), None, Default::default()).unwrap()
    };
    let mut wave: Vec<f64> = (0..60).map(|i| 5000.0 + i as f64).collect();
    wave.push(8000.0);
    let gap = make(wave);
    let config = FitConfig {
        classes: vec![zvet::ObjectClass::Galaxy],
        ..FitConfig::default()
    };
    let engine = Engine::new(zvet::templates::builtin(), config).unwrap();
    let r = engine.fit(&gap).unwrap();
    assert!(r.n_good < FEW_PIXELS, "n_good {} from 61 pixels", r.n_good);
    assert!((45..=60).contains(&r.n_good), "n_good {}", r.n_good);
    assert!(r.warnings.has(Warnings::FEW_PIXELS), "{}", r.warnings.names());
    // The same 1 Å sampling without the gap over 600 Å: no warning.
    let whole = make((0..600).map(|i| 5000.0 + i as f64).collect());
    let r = engine.fit(&whole).unwrap();
    assert!(r.n_good >= FEW_PIXELS, "n_good {}", r.n_good);
    assert!(!r.warnings.has(Warnings::FEW_PIXELS), "{}", r.warnings.names());
}

// ------------------------------------------------ one message, said once

#[test]
fn a_failed_export_says_its_message_once() {
    let dir = scratch("gaps-export-once");
    let camp = demo_campaign(&dir);
    for name in ["cat.csv", "cat.fits"] {
        let out: PathBuf = dir.join("no-such-folder").join(name);
        let o = zvet(&[
            "export".as_ref(),
            camp.as_os_str(),
            "--out".as_ref(),
            out.as_os_str(),
        ]);
        let err = text(&o.stderr);
        assert!(!o.status.success(), "{err}");
        let cause = "No such file or directory";
        assert_eq!(err.matches(cause).count(), 1, "{name}: {err}");
        assert_eq!(err.matches("zvet: error:").count(), 1, "{name}: {err}");
        assert!(err.contains("no-such-folder"), "{name}: {err}");
    }
    // Another command's error with its cause inside its own message: said once too.
    let o = zvet(&[
        "campaign".as_ref(),
        "init".as_ref(),
        dir.join("c2").as_os_str(),
        "--spectra".as_ref(),
        dir.join("missing").as_os_str(),
    ]);
    let err = text(&o.stderr);
    assert!(!o.status.success(), "{err}");
    assert_eq!(err.matches("no such file or folder").count(), 1, "{err}");
}

// ------------------------- items 5 and 12 through the program: the run goes on

/// A folder holding a good spectrum, a FITS file whose NAXIS1 declares
/// 2·10¹⁰ pixels and a file whose name is not UTF-8: `zvet fit` fits the good
/// one, names both bad ones, and exits 1 (not 0, not an abort).
#[cfg(unix)]
#[test]
fn a_run_over_a_corrupt_size_card_and_a_bad_name_fits_the_rest_and_exits_1() {
    use std::os::unix::ffi::OsStrExt;
    let dir = scratch("gaps-run-goes-on");
    let survey = zvet::demo::generate_n(zvet::demo::DEFAULT_SEED, 1);
    let w = zvet::demo::write_survey(&survey, &dir.join("demo")).unwrap();
    std::fs::write(
        w.spectra.join("huge.fits"),
        crate::robust::image(500, "20000000000", "1.0", &[]),
    )
    .unwrap();
    let bad = w.spectra.join(std::ffi::OsStr::from_bytes(b"bad\xff.csv"));
    std::fs::write(&bad, "wave,flux\n5000,1\n5001,2\n").unwrap();
    let out = dir.join("out.csv");
    let o = zvet(&[
        "fit".as_ref(),
        w.spectra.as_os_str(),
        "--out".as_ref(),
        out.as_os_str(),
        "--classes".as_ref(),
        "galaxy".as_ref(),
        "--threads".as_ref(),
        "1".as_ref(),
    ]);
    let err = text(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains("not UTF-8"), "{err}");
    let rows = read_rows(&out).unwrap();
    let good: Vec<&FitRow> = rows.iter().filter(|r| r.error.is_empty()).collect();
    assert_eq!(good.len(), 1, "{rows:?}");
    assert_eq!(good[0].object_id, survey.objects[0].id());
    let huge: Vec<&FitRow> = rows.iter().filter(|r| r.source.contains("huge.fits")).collect();
    assert_eq!(huge.len(), 1, "{rows:?}");
    assert!(huge[0].error.contains("truncated"), "{}", huge[0].error);
}
