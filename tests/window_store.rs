//! The window's object store (`zvet::store`): a campaign opened with only
//! summaries in memory, each object read whole when it is shown. The
//! campaigns are small synthetic ones written here with cfitsio (multi-object
//! tables of 64-pixel spectra whose values encode the object number), so the
//! spectrum read on demand is compared with the numbers written into the file.
use std::path::{Path, PathBuf};
use zvet::campaign::{Campaign, InitOptions};
use zvet::fit::{Candidate, FitResult, Warnings};
use zvet::pipeline::FitRecord;
use zvet::store::{ObjectStore, CACHE};
use zvet::ObjectClass;

const PIX: usize = 64;
const PER_FILE: usize = 2500;

fn id_of(k: usize) -> String {
    format!("W-{k:06}")
}

/// The flux written for pixel `j` of object `k`.
fn flux_of(k: usize, j: usize) -> f64 {
    (k % 10_000) as f64 + j as f64 * 0.25
}

fn z_of(k: usize) -> f64 {
    0.01 + (k % 3000) as f64 * 1e-4
}

/// Write `n` objects as multi-object FITS tables of `PER_FILE` rows.
fn write_spectra(dir: &Path, n: usize) {
    use fitsio::tables::{ColumnDataType, ColumnDescription};
    std::fs::create_dir_all(dir).unwrap();
    let wave: Vec<f32> = (0..PIX).map(|j| 4000.0 + 50.0 * j as f32).collect();
    for (f, start) in (0..n).step_by(PER_FILE).enumerate() {
        let rows = PER_FILE.min(n - start);
        let path = dir.join(format!("part-{f:03}.fits"));
        let vec_col = |name: &str| {
            ColumnDescription::new(name)
                .with_type(ColumnDataType::Float)
                .that_repeats(PIX)
                .create()
                .unwrap()
        };
        let cols = vec![
            ColumnDescription::new("OBJID")
                .with_type(ColumnDataType::String)
                .that_repeats(12)
                .create()
                .unwrap(),
            vec_col("WAVE"),
            vec_col("FLUX"),
            vec_col("IVAR"),
        ];
        let mut file = fitsio::FitsFile::create(&path).open().unwrap();
        let hdu = file.create_table("SPECTRA", &cols).unwrap();
        let mut w = Vec::with_capacity(rows * PIX);
        let mut fl = Vec::with_capacity(rows * PIX);
        for r in 0..rows {
            w.extend_from_slice(&wave);
            fl.extend((0..PIX).map(|j| flux_of(start + r, j) as f32));
        }
        let iv = vec![4.0f32; rows * PIX];
        hdu.write_col(&mut file, "WAVE", &w).unwrap();
        hdu.write_col(&mut file, "FLUX", &fl).unwrap();
        hdu.write_col(&mut file, "IVAR", &iv).unwrap();
        let ids: Vec<String> = (start..start + rows).map(id_of).collect();
        hdu.write_col(&mut file, "OBJID", &ids).unwrap();
    }
}

fn fit_of(k: usize) -> FitResult {
    FitResult {
        object_id: id_of(k),
        candidates: vec![
            Candidate {
                class: ObjectClass::Galaxy,
                template: "g".into(),
                z: z_of(k),
                z_err: 1e-4,
                chi2: 70.0,
                coeffs: vec![1.0, 0.5],
            },
            Candidate {
                class: ObjectClass::Star,
                template: "s".into(),
                z: 0.0,
                z_err: 1e-5,
                chi2: 90.0,
                coeffs: vec![2.0],
            },
        ],
        delta_chi2: 20.0,
        chi2_reduced: 1.1,
        n_good: PIX,
        snr_median: 2.0 + (k % 7) as f64,
        warnings: Warnings::default(),
        curves: vec![],
        lines: vec![],
        per_class: vec![],
        refit_kept: false,
    }
}

/// A fitted campaign of `n` objects (spectra, catalogue, one cached fit each).
fn campaign(root: &Path, n: usize) -> PathBuf {
    use std::io::Write;
    let spectra = root.join("spectra");
    write_spectra(&spectra, n);
    let catalog = root.join("catalog.csv");
    let mut c = std::io::BufWriter::new(std::fs::File::create(&catalog).unwrap());
    writeln!(c, "id,ra,dec,mag_r,phot_class,phot_z").unwrap();
    for k in 0..n {
        writeln!(
            c,
            "{},{:.6},-3.5,21.0,galaxy,0.3",
            id_of(k),
            150.0 + k as f64 * 1e-5
        )
        .unwrap();
    }
    drop(c);
    let dir = root.join("campaign");
    let camp = Campaign::init(
        &dir,
        &InitOptions {
            spectra: vec![spectra],
            catalog: Some(catalog),
            ..Default::default()
        },
    )
    .unwrap();
    let records: Vec<FitRecord> = (0..n).map(|k| FitRecord::fitted(fit_of(k), "", "chi2")).collect();
    camp.save_records(&records).unwrap();
    dir
}

/// Open a campaign of `n` objects through the store, show objects spread
/// over it one after the other, and return what the store holds at the end
/// (objects held whole, their bytes, spectra read from files).
fn visit(n: usize) -> (usize, usize, usize) {
    let root = tempfile::tempdir().unwrap();
    let dir = campaign(root.path(), n);
    let opened = ObjectStore::open_campaign(&Campaign::open(&dir).unwrap()).unwrap();
    assert!(opened.problems.is_empty(), "{:?}", opened.problems);
    let store = opened.store;
    assert_eq!(store.len(), n);
    // opening read no spectrum: only ids, catalogue rows and fit summaries
    assert_eq!(store.held(), (0, 0, 0));
    // the summaries carry what the queue needs (the fit's best z and S/N, the catalogue row)
    for k in (0..n).step_by(n / 50) {
        assert_eq!(store[k].id, id_of(k));
        let f = opened.fits[k].as_ref().expect("a cached fit");
        assert_eq!(f.candidates.len(), 1, "only the best candidate is kept in memory");
        assert!(f.candidates[0].coeffs.is_empty());
        assert_eq!(f.best().unwrap().z.to_bits(), z_of(k).to_bits());
        assert_eq!(store[k].snr.to_bits(), (2.0 + (k % 7) as f64).to_bits());
        assert!(store[k].catalog.is_some());
    }
    let mut most_bytes = 0;
    let shown: Vec<usize> = (0..n).step_by(n / 100).chain([n - 1, 0]).collect();
    for (step, &k) in shown.iter().enumerate() {
        let e = store.load(k).unwrap();
        // the spectrum read on demand is the one written at its place
        assert_eq!(e.spectrum.meta.id, id_of(k));
        assert_eq!(e.spectrum.len(), PIX);
        for (j, v) in e.spectrum.flux().iter().enumerate() {
            // written as single precision: equal once widened
            let want = flux_of(k, j) as f32 as f64;
            assert_eq!(
                v.to_bits(),
                want.to_bits(),
                "{} pixel {j}: {v} vs {want}",
                id_of(k)
            );
        }
        // and its fit is the whole record, every candidate with its coefficients
        assert_eq!(e.fit.as_ref().unwrap(), &fit_of(k));
        let (held, bytes, reads) = store.held();
        assert!(held <= CACHE, "step {step}: {held} objects held");
        assert!(reads <= step + 1, "each object read once at most");
        most_bytes = most_bytes.max(bytes);
    }
    let (held, _, reads) = store.held();
    assert_eq!(held, CACHE, "the cache is full, not more");
    // object 0 was shown first and again last: read twice (dropped in between)
    assert_eq!(reads, shown.len());
    (held, most_bytes, reads)
}

#[test]
fn what_the_window_holds_is_bounded_by_its_cache_not_the_number_of_objects() {
    let small = visit(2_000);
    let large = visit(20_000);
    // the same objects held, the same bytes, whatever the campaign's size
    assert_eq!(small.0, large.0);
    assert_eq!(small.1, large.1, "bytes held: {small:?} vs {large:?}");
    assert!(small.1 <= CACHE * PIX * 8 * 5, "{small:?}");
}

#[test]
fn a_damaged_or_changed_file_met_on_demand_is_a_message() {
    let root = tempfile::tempdir().unwrap();
    let dir = campaign(root.path(), 2 * PER_FILE);
    let camp = Campaign::open(&dir).unwrap();
    let opened = ObjectStore::open_campaign(&camp).unwrap();
    let store = opened.store;
    // damage the first file after the open (cut in the middle of its data)
    let first = root.path().join("spectra/part-000.fits");
    let bytes = std::fs::read(&first).unwrap();
    std::fs::write(&first, &bytes[..bytes.len() / 3]).unwrap();
    let late = PER_FILE - 1;
    let err = store.load(late).expect_err("a cut file cannot give its last row");
    assert!(err.contains(&id_of(late)), "{err}");
    assert!(err.contains("part-000.fits"), "{err}");
    // the other file still reads
    assert_eq!(store.load(PER_FILE).unwrap().spectrum.meta.id, id_of(PER_FILE));
    // a file replaced by another that holds other objects at the same places
    let second = root.path().join("spectra/part-001.fits");
    std::fs::remove_file(&second).unwrap();
    let other = tempfile::tempdir().unwrap();
    write_spectra(other.path(), PER_FILE);
    std::fs::copy(other.path().join("part-000.fits"), &second).unwrap();
    let err = store
        .load(PER_FILE + 1)
        .expect_err("another object at that place");
    assert!(err.contains("changed since it was opened"), "{err}");
    assert!(err.contains(&id_of(PER_FILE + 1)), "{err}");
}

#[test]
fn fits_stay_readable_after_the_cache_is_rewritten() {
    let root = tempfile::tempdir().unwrap();
    let dir = campaign(root.path(), 300);
    let camp = Campaign::open(&dir).unwrap();
    let opened = ObjectStore::open_campaign(&camp).unwrap();
    let mut store = opened.store;
    // the cache is rewritten (a new fit for object 5), as the window's
    // write-back does while it is open
    let mut refit = fit_of(5);
    refit.candidates[0].z = 2.5;
    camp.save_records(&[FitRecord::fitted(refit.clone(), "", "chi2")])
        .unwrap();
    // an object indexed before the rewrite still reads its own record
    assert_eq!(store.load(200).unwrap().fit.as_ref().unwrap(), &fit_of(200));
    // a fit made in the window is read back whole, its summary kept
    let summary = store.put_fit(7, &refit).unwrap();
    assert_eq!(summary.candidates.len(), 1);
    assert_eq!(store.load(7).unwrap().fit.as_ref().unwrap(), &refit);
    // … also once it has left the cache
    for k in 100..100 + CACHE + 2 {
        store.load(k).unwrap();
    }
    assert!(!store.is_cached(7));
    assert_eq!(store.load(7).unwrap().fit.as_ref().unwrap(), &refit);
}
