/*!
Bad input, full disks and interrupted runs: each test here is one way a file,
a folder or a disk used to make zvet abort, lie or lose data.
*/
use crate::support::scratch;
use std::path::{Path, PathBuf};
use std::process::Command;
use zvet::io::{read_file, LoadError, ReadOptions};
use zvet::pipeline::{read_rows, write_records, FitRecord, FitRow, RowWriter, TableError};

// ---------------------------------------------------------------- helpers

/// A FITS header of `cards` (each padded to 80 bytes), END, padded to whole
/// 2880-byte blocks (FITS standard 4.0, §3.1, §4.4.1).
fn header(cards: &[String]) -> Vec<u8> {
    let mut h = String::new();
    for c in cards {
        h.push_str(&format!("{c:<80}"));
    }
    h.push_str(&format!("{:<80}", "END"));
    let mut b = h.into_bytes();
    b.resize(b.len().div_ceil(2880) * 2880, b' ');
    b
}

fn card(k: &str, v: &str) -> String {
    format!("{k:<8}= {v:>20}")
}

fn pad(mut data: Vec<u8>) -> Vec<u8> {
    data.resize(data.len().div_ceil(2880) * 2880, 0);
    data
}

/// A 1-D float image of `n` pixels with a linear WCS, `naxis1` as declared.
pub(crate) fn image(n: usize, naxis1: &str, cdelt: &str, extra: &[String]) -> Vec<u8> {
    let mut cards = vec![
        card("SIMPLE", "T"),
        card("BITPIX", "-32"),
        card("NAXIS", "1"),
        card("NAXIS1", naxis1),
        card("CTYPE1", "'WAVE    '"),
        card("CRVAL1", "4000.0"),
        card("CRPIX1", "1.0"),
        card("CDELT1", cdelt),
        card("CUNIT1", "'Angstrom'"),
    ];
    cards.extend_from_slice(extra);
    let mut b = header(&cards);
    let mut data = Vec::with_capacity(4 * n);
    for i in 0..n {
        data.extend_from_slice(&noisy(i).to_be_bytes());
    }
    b.extend(pad(data));
    b
}

/// A flux with scatter (files without σ get their noise from the scatter).
fn noisy(i: usize) -> f32 {
    1.0 + ((i * 7919) % 101) as f32 / 100.0
}

fn an_extension() -> Vec<u8> {
    let mut b = header(&[
        card("XTENSION", "'IMAGE   '"),
        card("BITPIX", "-32"),
        card("NAXIS", "1"),
        card("NAXIS1", "100"),
        card("PCOUNT", "0"),
        card("GCOUNT", "1"),
        card("EXTNAME", "'OTHER   '"),
    ]);
    b.extend(pad(vec![0x3f; 400]));
    b
}

/// A binary table of one row: WAVE and FLUX vectors of `n` doubles, with
/// `tform` as the FLUX column's declared format.
fn vector_table(n: usize, tform_flux: &str, naxis1: usize) -> Vec<u8> {
    let mut b = header(&[card("SIMPLE", "T"), card("BITPIX", "8"), card("NAXIS", "0")]);
    b.extend(header(&[
        card("XTENSION", "'BINTABLE'"),
        card("BITPIX", "8"),
        card("NAXIS", "2"),
        card("NAXIS1", &naxis1.to_string()),
        card("NAXIS2", "1"),
        card("PCOUNT", "0"),
        card("GCOUNT", "1"),
        card("TFIELDS", "2"),
        card("TTYPE1", "'WAVE    '"),
        card("TFORM1", &format!("'{n}D'")),
        card("TTYPE2", "'FLUX    '"),
        card("TFORM2", &format!("'{tform_flux}'")),
    ]));
    let mut data = Vec::new();
    for i in 0..n {
        data.extend_from_slice(&(4000.0 + i as f64).to_be_bytes());
    }
    for i in 0..n {
        data.extend_from_slice(&f64::from(noisy(i)).to_be_bytes());
    }
    data.resize(naxis1, 0);
    b.extend(pad(data));
    b
}

fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

fn err_of(p: &Path) -> String {
    match read_file(p, &ReadOptions::default()) {
        Ok(v) => panic!("{} read as {} spectra", p.display(), v.len()),
        Err(e) => e.to_string(),
    }
}

/// Write flat rows as records (the pipeline's one record format).
fn write_rows(path: &Path, rows: &[FitRow]) -> Result<(), TableError> {
    write_records(path, &rows.iter().map(FitRecord::from_flat).collect::<Vec<_>>())
}

fn rows(n: usize) -> Vec<FitRow> {
    (0..n)
        .map(|i| FitRow {
            object_id: format!("obj-{i:05}"),
            source: format!("spectra/obj-{i:05}.fits"),
            class: "galaxy".into(),
            z: Some(0.1 + i as f64 * 1e-4),
            z_err: Some(1e-4),
            chi2: Some(4000.0),
            warnings: 0,
            method: "chi2".into(),
            ..FitRow::default()
        })
        .collect()
}

fn leftovers(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with(".zvet-tmp"))
        .collect()
}

/// A small tmpfs mounted at `dir` (root only); `None` where the machine
/// does not allow it (the caller prints why and skips).
struct SmallDisk(PathBuf);

impl SmallDisk {
    fn mount(dir: &Path, kib: u64) -> Option<SmallDisk> {
        std::fs::create_dir_all(dir).ok()?;
        let _ = Command::new("umount").arg(dir).output();
        let ok = Command::new("mount")
            .args(["-t", "tmpfs", "-o", &format!("size={kib}k"), "tmpfs"])
            .arg(dir)
            .output()
            .is_ok_and(|o| o.status.success());
        if !ok {
            eprintln!(
                "SKIPPED: cannot mount a small tmpfs at {} (needs root); the full-disk case is covered by the injected-failure test",
                dir.display()
            );
            return None;
        }
        Some(SmallDisk(dir.to_path_buf()))
    }

    /// Fill the disk until at most `free` bytes are left.
    fn fill_leaving(&self, free: usize) {
        use std::io::Write;
        let mut f = std::fs::File::create(self.0.join("filler")).unwrap();
        let chunk = vec![0u8; 4096];
        loop {
            if f.write_all(&chunk).is_err() {
                break;
            }
        }
        drop(f);
        // Give back `free` bytes.
        let len = std::fs::metadata(self.0.join("filler")).unwrap().len();
        let f = std::fs::OpenOptions::new()
            .write(true)
            .open(self.0.join("filler"))
            .unwrap();
        f.set_len(len.saturating_sub(free as u64)).unwrap();
    }
}

impl Drop for SmallDisk {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).output();
    }
}

// ------------------------------------------------- 1. one output path

#[test]
fn full_disk_fits_result_table_fails_loudly_and_keeps_the_old_file() {
    let dir = scratch("robust-full-disk-table");
    let Some(disk) = SmallDisk::mount(&dir.join("mnt"), 512) else {
        return;
    };
    let out = disk.0.join("out.fits");
    write_rows(&out, &rows(5)).unwrap();
    let before = std::fs::read(&out).unwrap();
    disk.fill_leaving(40 * 1024);
    // 3000 rows need far more than 40 KiB.
    let e = write_rows(&out, &rows(3000)).expect_err("a full disk must be an error");
    // the error names the output it could not write
    assert!(e.to_string().contains("out.fits"), "{e}");
    assert_eq!(std::fs::read(&out).unwrap(), before, "the old file must stay");
    assert_eq!(read_rows(&out).unwrap().len(), 5);
    assert!(leftovers(&disk.0).is_empty(), "{:?}", leftovers(&disk.0));
}

#[test]
fn full_disk_report_keeps_the_old_set_whole() {
    use zvet::report::{numbers, write_report, ReportInput};
    let dir = scratch("robust-full-disk-report");
    let Some(disk) = SmallDisk::mount(&dir.join("mnt"), 1024) else {
        return;
    };
    let out = disk.0.join("report");
    let n = numbers(&ReportInput::default());
    write_report(&out, &n).unwrap();
    let old: Vec<(PathBuf, Vec<u8>)> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| {
            let p = e.unwrap().path();
            let b = std::fs::read(&p).unwrap();
            (p, b)
        })
        .collect();
    // Room for the new plots (as many bytes as the old set) but not for the
    // large report.json and report.html: writing file by file would leave a
    // mix of new plots and old pages.
    let old_bytes: usize = old.iter().map(|(_, b)| b.len()).sum();
    disk.fill_leaving(old_bytes + 16 * 1024);
    let mut n2 = numbers(&ReportInput::default());
    for (k, (_, count)) in n2.flags.iter_mut().enumerate() {
        *count = 3 + k;
    }
    for (k, (_, count)) in n2.confidence.iter_mut().enumerate() {
        *count = 5 + k;
    }
    n2.campaign = "x".repeat(400_000);
    let e = write_report(&out, &n2).expect_err("a full disk must be an error");
    // the error names the report it could not write
    assert!(e.to_string().contains("report"), "{e}");
    for (p, b) in &old {
        assert_eq!(&std::fs::read(p).unwrap(), b, "{} changed", p.display());
    }
    assert!(leftovers(&out).is_empty(), "{:?}", leftovers(&out));
}

/// A campaign on three demo objects with one review each.
pub(crate) fn demo_campaign(dir: &Path) -> PathBuf {
    let survey = zvet::demo::generate_n(zvet::demo::DEFAULT_SEED, 3);
    let w = zvet::demo::write_survey(&survey, &dir.join("demo")).unwrap();
    let camp = dir.join("campaign");
    let mut c = zvet::campaign::Campaign::init(
        &camp,
        &zvet::campaign::InitOptions {
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            ..Default::default()
        },
    )
    .unwrap();
    let (mut log, _) = c.open_review_log("ana").unwrap();
    for o in &survey.objects {
        log.record(
            o.id(),
            None,
            zvet::review::Change::Verdict {
                class: zvet::review::VerdictClass::Galaxy,
                z: Some(0.25),
                z_err: Some(1e-4),
                source: zvet::review::ZSource::Automatic,
                confidence: zvet::review::Confidence::ALL[0],
            },
        )
        .unwrap();
    }
    camp
}

/// A write failure injected into the real program: the shell's file-size
/// limit (`ulimit -f`, with SIGXFSZ ignored so writes fail with EFBIG as on
/// a full disk) stops `zvet export` half-way through its FITS file.
#[cfg(unix)]
#[test]
fn injected_write_failure_in_fits_export_is_an_error_and_keeps_the_old_file() {
    let dir = scratch("robust-injected-export");
    let camp = demo_campaign(&dir);
    let out = dir.join("cat.fits");
    let zvet = env!("CARGO_BIN_EXE_zvet");
    let ok = Command::new(zvet)
        .arg("export")
        .arg(&camp)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert!(ok.status.success(), "{}", String::from_utf8_lossy(&ok.stderr));
    let before = std::fs::read(&out).unwrap();
    assert!(before.len() > 5 * 2880);
    // 4 blocks of ≤ 1024 bytes: less than the primary header and the table header.
    let script = format!(
        "trap '' XFSZ; ulimit -f 4; exec '{zvet}' export '{}' --out '{}'",
        camp.display(),
        out.display()
    );
    let bad = Command::new("sh").arg("-c").arg(&script).output().unwrap();
    let stderr = String::from_utf8_lossy(&bad.stderr);
    assert!(
        !bad.status.success(),
        "exit 0 on a failed write; stderr: {stderr}"
    );
    assert!(!stderr.trim().is_empty(), "no message");
    assert_eq!(std::fs::read(&out).unwrap(), before, "the old file must stay");
    assert!(leftovers(&dir).is_empty(), "{:?}", leftovers(&dir));
}

// ------------------------------------------ 2. resume after a torn row

#[test]
fn resume_cuts_a_torn_jsonl_row_and_carries_on() {
    let dir = scratch("robust-torn-jsonl");
    let out = dir.join("out.jsonl");
    write_rows(&out, &rows(3)).unwrap();
    // A kill in the middle of the fourth row.
    let mut bytes = std::fs::read(&out).unwrap();
    bytes.extend_from_slice(br#"{"object_id":"obj-00003","source":"spe"#);
    std::fs::write(&out, &bytes).unwrap();
    assert_eq!(read_rows(&out).unwrap().len(), 3);
    let mut w = RowWriter::create(&out, true).unwrap();
    for r in &rows(5)[3..] {
        w.write(&FitRecord::from_flat(r)).unwrap();
    }
    w.finish().unwrap();
    let back = read_rows(&out).unwrap();
    let ids: Vec<&str> = back.iter().map(|r| r.object_id.as_str()).collect();
    assert_eq!(
        ids,
        ["obj-00000", "obj-00001", "obj-00002", "obj-00003", "obj-00004"]
    );
}

#[test]
fn resume_cuts_a_torn_csv_row_and_carries_on() {
    let dir = scratch("robust-torn-csv");
    let out = dir.join("out.csv");
    write_rows(&out, &rows(3)).unwrap();
    let mut bytes = std::fs::read(&out).unwrap();
    bytes.extend_from_slice(b"obj-00003,spectra/obj-0");
    std::fs::write(&out, &bytes).unwrap();
    assert_eq!(read_rows(&out).unwrap().len(), 3);
    let mut w = RowWriter::create(&out, true).unwrap();
    for r in &rows(5)[3..] {
        w.write(&FitRecord::from_flat(r)).unwrap();
    }
    w.finish().unwrap();
    let back = read_rows(&out).unwrap();
    assert_eq!(back.len(), 5);
    let want = &rows(5)[4];
    assert_eq!(
        (&back[4].object_id, back[4].z, back[4].chi2),
        (&want.object_id, want.z, want.chi2)
    );
}

// ------------------------------------------------------- 3. the readers

#[test]
fn a_huge_declared_axis_is_one_clear_error_not_an_abort() {
    let dir = scratch("robust-huge-axis");
    let p = write(&dir, "huge.fits", &image(500, "20000000000", "1.0", &[]));
    let e = err_of(&p);
    assert!(e.contains("huge.fits") && e.contains("truncated"), "{e}");
    // 2^31 pixels: also beyond the file.
    let p = write(&dir, "big.fits", &image(500, "2147483648", "1.0", &[]));
    assert!(err_of(&p).contains("declares"), "{}", err_of(&p));
}

#[test]
fn a_huge_vector_repeat_is_one_clear_error() {
    let dir = scratch("robust-huge-repeat");
    let p = write(&dir, "ok.fits", &vector_table(50, "50D", 800));
    assert_eq!(read_file(&p, &ReadOptions::default()).unwrap()[0].len(), 50);
    let p = write(&dir, "rep.fits", &vector_table(50, "10000000000D", 800));
    let e = err_of(&p);
    assert!(e.contains("bytes per row"), "{e}");
}

#[test]
fn a_data_unit_running_into_the_next_hdu_is_an_error() {
    let dir = scratch("robust-overrun");
    // NAXIS1 says 1000 pixels (4000 bytes, two blocks) where 500 were written
    // (one block): the declared data unit swallows the extension's header.
    let mut f = image(500, "1000", "1.0", &[]);
    f.extend(an_extension());
    f.extend(vec![0u8; 2880]);
    let p = write(&dir, "over.fits", &f);
    let e = err_of(&p);
    assert!(e.contains("runs over the header"), "{e}");
    // The honest file reads.
    let mut f = image(500, "500", "1.0", &[]);
    f.extend(an_extension());
    let p = write(&dir, "fine.fits", &f);
    assert_eq!(read_file(&p, &ReadOptions::default()).unwrap()[0].len(), 500);
}

#[test]
fn a_gz_file_that_inflates_past_the_bound_is_refused() {
    use std::io::Write;
    let dir = scratch("robust-gz-bomb");
    // A byte image of MAX_INFLATED + 1 MiB zeros: a few hundred KiB compressed.
    let n = zvet::io::MAX_INFLATED + (1 << 20);
    let p = dir.join("bomb.fits.gz");
    let mut gz =
        flate2::write::GzEncoder::new(std::fs::File::create(&p).unwrap(), flate2::Compression::fast());
    gz.write_all(&header(&[
        card("SIMPLE", "T"),
        card("BITPIX", "8"),
        card("NAXIS", "1"),
        card("NAXIS1", &n.to_string()),
    ]))
    .unwrap();
    let zeros = vec![0u8; 1 << 20];
    let mut left = n.div_ceil(2880) * 2880;
    while left > 0 {
        let k = left.min(zeros.len() as u64) as usize;
        gz.write_all(&zeros[..k]).unwrap();
        left -= k as u64;
    }
    gz.finish().unwrap();
    let e = err_of(&p);
    assert!(e.contains("too large") && e.contains("MiB"), "{e}");
}

#[test]
fn variable_length_and_complex_columns_are_plain_errors() {
    let dir = scratch("robust-odd-columns");
    for (name, tform, width) in [("vla.fits", "1PD(50)", 400 + 8), ("cplx.fits", "50C", 400 + 400)] {
        let p = write(&dir, name, &vector_table(50, tform, width));
        let e = err_of(&p);
        assert!(e.contains("unsupported") && e.contains("FLUX"), "{name}: {e}");
        assert!(!e.contains("panic") && !e.contains("gave up"), "{name}: {e}");
    }
}

#[test]
fn a_wavelength_solution_outside_any_physical_range_is_rejected() {
    let dir = scratch("robust-cdelt");
    let p = write(&dir, "cdelt.fits", &image(2000, "2000", "1E30", &[]));
    let e = err_of(&p);
    assert!(e.contains("physical range"), "{e}");
    let p = write(&dir, "fine.fits", &image(2000, "2000", "1.0", &[]));
    assert_eq!(read_file(&p, &ReadOptions::default()).unwrap()[0].len(), 2000);
}

#[test]
fn negative_uncertainties_are_masked_with_a_warning() {
    let dir = scratch("robust-neg-sigma");
    let mut t = String::from("wave,flux,err\n");
    for i in 0..50 {
        let err = if i % 10 == 3 { -0.1 } else { 0.1 };
        t.push_str(&format!("{},{},{}\n", 5000 + i, 1.0, err));
    }
    let p = write(&dir, "neg.csv", t.as_bytes());
    let s = &read_file(&p, &ReadOptions::default()).unwrap()[0];
    assert_eq!(s.n_good(), 45);
    assert!(
        s.meta
            .warnings
            .iter()
            .any(|w| w.contains("5 pixel(s) with a negative uncertainty")),
        "{:?}",
        s.meta.warnings
    );
}

#[test]
fn bom_and_cr_only_text_tables_read() {
    let dir = scratch("robust-bom-cr");
    let mut lines = vec!["wave,flux,err".to_string()];
    for i in 0..30 {
        lines.push(format!("{},{},0.1", 6000 + 2 * i, 1.0 + i as f64 / 100.0));
    }
    let bom = format!("\u{feff}{}\n", lines.join("\n"));
    let cr = format!("{}\r", lines.join("\r"));
    for (name, text) in [("bom.csv", bom), ("cr.csv", cr)] {
        let p = write(&dir, name, text.as_bytes());
        let s = read_file(&p, &ReadOptions::default()).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(s[0].len(), 30, "{name}");
        assert!((s[0].wave()[29] - 6058.0).abs() < 1e-9, "{name}");
    }
}

#[test]
fn loaderror_variants_for_bounds_are_not_panics() {
    // The bound on a spectrum's pixels is stated and enforced before reading.
    let dir = scratch("robust-max-pixels");
    let n = zvet::io::MAX_PIXELS as usize + 1;
    let p = write(&dir, "wide.fits", &image(n, &n.to_string(), "0.001", &[]));
    match read_file(&p, &ReadOptions::default()) {
        Err(e) => assert!(matches!(e.kind(), LoadError::TooLarge(_)), "{e}"),
        Ok(_) => panic!("a spectrum beyond MAX_PIXELS was read"),
    }
}

// ------------------------------------------------------- 4. catalogue

fn catalog_err(dir: &Path, name: &str, text: &str) -> String {
    let p = write(dir, name, text.as_bytes());
    match zvet::catalog::read_csv(&p, &zvet::catalog::ColumnMap::default()) {
        Ok(r) => panic!("{name}: accepted {} rows", r.len()),
        Err(e) => e.to_string(),
    }
}

#[test]
fn impossible_catalogue_values_are_rejected_with_file_and_line() {
    let dir = scratch("robust-catalog");
    let h = "id,ra,dec,r,phot_class,phot_class_prob\n";
    let e = catalog_err(
        &dir,
        "ra.csv",
        &format!("{h}a,10,5,20,galaxy,0.5\nb,400,5,20,galaxy,0.5\n"),
    );
    assert!(
        e.contains("ra.csv") && e.contains("line 3") && e.contains("RA"),
        "{e}"
    );
    let e = catalog_err(&dir, "dec.csv", &format!("{h}a,10,-95,20,galaxy,0.5\n"));
    assert!(e.contains("line 2") && e.contains("Dec"), "{e}");
    let e = catalog_err(&dir, "prob.csv", &format!("{h}a,10,5,20,galaxy,1.7\n"));
    assert!(e.contains("line 2") && e.contains("probability"), "{e}");
    let e = catalog_err(&dir, "empty.csv", h);
    assert!(e.contains("no rows"), "{e}");
    let e = catalog_err(&dir, "nopos.csv", "id,r\na,20\n");
    assert!(e.contains("right ascension"), "{e}");
}

#[test]
fn catalogue_match_counts_name_case_only_differences() {
    let spectra = ["OBJ-1", "OBJ-2", "OBJ-3"];
    assert_eq!(
        zvet::catalog::match_summary(&spectra, &["OBJ-1", "OBJ-2", "OBJ-3"]),
        None
    );
    let m = zvet::catalog::match_summary(&spectra, &["obj-1", "obj-2", "obj-3"]).unwrap();
    assert!(m.contains("0 of 3") && m.contains("letter case"), "{m}");
    let m = zvet::catalog::match_summary(&spectra, &["X"]).unwrap();
    assert!(m.contains("0 of 3") && !m.contains("letter case"), "{m}");
}

#[test]
fn a_campaign_whose_catalogue_matches_nothing_says_so() {
    let dir = scratch("robust-catalog-nomatch");
    let camp = demo_campaign(&dir);
    crate::robust_gaps::lower_case_ids(&dir.join("demo/catalog.csv"));
    let c = zvet::campaign::Campaign::open(&camp).unwrap();
    let (_, problems) = c.load_objects().unwrap();
    assert!(
        problems
            .iter()
            .any(|p| p.contains("0 of 3") && p.contains("letter case")),
        "{problems:?}"
    );
}

// ------------------------------------------------------- 5. manifest

#[test]
fn a_manifest_with_impossible_settings_does_not_open() {
    let dir = scratch("robust-manifest");
    let camp = demo_campaign(&dir);
    let path = camp.join("campaign.toml");
    let text = std::fs::read_to_string(&path).unwrap();
    let tol = text
        .lines()
        .find(|l| l.starts_with("tolerance"))
        .unwrap()
        .to_string();
    for (from, to, says) in [
        (tol.as_str(), "tolerance = nan", "tolerance"),
        (tol.as_str(), "tolerance = -1.0", "tolerance"),
        ("format = 1", "format = 0", "format = 0"),
        (tol.as_str(), "tolerance = 0.001\nmystery = 3", "mystery"),
    ] {
        std::fs::write(&path, text.replacen(from, to, 1)).unwrap();
        let e = zvet::campaign::Campaign::open(&camp)
            .err()
            .map(|e| e.to_string())
            .unwrap_or_default();
        assert!(e.contains(says) && e.contains("campaign.toml"), "{to}: {e}");
    }
    std::fs::write(&path, &text).unwrap();
    assert!(zvet::campaign::Campaign::open(&camp).is_ok());
}

// ------------------------------------------------- 6. duplicated logs

#[test]
fn a_copied_review_log_counts_once_and_the_name_inside_wins() {
    let dir = scratch("robust-dup-logs");
    let camp = demo_campaign(&dir);
    let reviews = camp.join("reviews");
    std::fs::copy(reviews.join("ana.jsonl"), reviews.join("bob.jsonl")).unwrap();
    std::fs::create_dir_all(reviews.join("folder.jsonl")).unwrap();
    let c = zvet::campaign::Campaign::open(&camp).unwrap();
    let (logs, problems) = c.read_logs().unwrap();
    assert_eq!(logs.len(), 1, "{problems:?}");
    assert_eq!(logs[0].inspector, "ana");
    assert!(
        problems
            .iter()
            .any(|p| p.contains("bob.jsonl") && p.contains("same events")),
        "{problems:?}"
    );
    assert!(
        problems
            .iter()
            .any(|p| p.contains("folder.jsonl") && p.contains("skipped")),
        "{problems:?}"
    );
    let (merged, _) = c.merge(None).unwrap();
    assert!(
        merged.stats.pairs.is_empty(),
        "a copy must not pair with its original"
    );
    // Only the renamed copy: counted under the name inside.
    std::fs::rename(reviews.join("ana.jsonl"), reviews.join("carl.jsonl")).unwrap();
    std::fs::remove_file(reviews.join("bob.jsonl")).unwrap();
    let (logs, problems) = c.read_logs().unwrap();
    assert_eq!(logs.len(), 1);
    assert_eq!(logs[0].inspector, "ana", "{problems:?}");
    assert!(
        problems
            .iter()
            .any(|p| p.contains("carl.jsonl") && p.contains("'ana'")),
        "{problems:?}"
    );
}

#[test]
fn absent_pixels_are_a_gap_not_interpolated() {
    // 50 pixels of 1 Å from 5000 Å, then a single pixel at 8000 Å: the
    // pixels around the gap keep their own width on the log grid.
    let mut wave: Vec<f64> = (0..50).map(|i| 5000.0 + i as f64).collect();
    wave.push(8000.0);
    let n = wave.len();
    let s = zvet::Spectrum::new(wave, vec![1.0; n], Some(vec![100.0; n]), None, Default::default()).unwrap();
    let grid = s.log_grid(1e-4);
    let r = s.resample(&grid);
    let good = r.ivar.iter().filter(|v| **v > 0.0).count();
    // 50 Å at 5000 Å is 50 / (5000 · ln 10 · 1e-4) ≈ 43 grid pixels, plus
    // about one for the lone pixel (grid step from log10 λ, common practice).
    assert!(
        (40..=50).contains(&good),
        "{good} good grid pixels from 51 input pixels"
    );
    assert!(grid.n > 2000, "the grid still spans the gap ({})", grid.n);
}
