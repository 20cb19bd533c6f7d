//! The one pipeline end to end through the binary: shards of a campaign fitted
//! by concurrent processes and collected, `zvet fit` outputs imported into a
//! campaign, a survey's delivery folder (spectra beside a catalogue and a
//! truth table) fitted cleanly, outputs never read back or written over an
//! input, and a damaged fit cache read line by line.
use crate::support;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use zvet::campaign::{Campaign, InitOptions};

const SHARD_VARS: [&str; 3] = [
    "SLURM_ARRAY_TASK_ID",
    "SLURM_ARRAY_TASK_MIN",
    "SLURM_ARRAY_TASK_COUNT",
];

fn zvet() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_zvet"));
    for v in SHARD_VARS {
        c.env_remove(v);
    }
    c
}

fn run(args: &[&std::ffi::OsStr]) -> Output {
    zvet().args(args).output().expect("running zvet")
}

fn text(o: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

/// A small delivery of the demo survey: `spectra/`, `catalog.csv`, `truth.csv`.
fn delivery(name: &str, n: usize) -> (PathBuf, zvet::demo::Written) {
    let dir = support::scratch(name);
    let survey = zvet::demo::generate_n(zvet::demo::DEFAULT_SEED, n);
    let w = zvet::demo::write_survey(&survey, &dir.join("data")).unwrap();
    (dir, w)
}

/// A campaign on the delivery; galaxy templates only, to keep the debug-build
/// test quick (`zvet fit --classes galaxy` matches it).
fn new_campaign(dir: &Path, w: &zvet::demo::Written) -> Campaign {
    Campaign::init(
        dir,
        &InitOptions {
            spectra: vec![w.spectra.clone()],
            catalog: Some(w.catalog.clone()),
            engine: zvet::fit::FitConfig {
                classes: vec![zvet::ObjectClass::Galaxy],
                ..Default::default()
            },
            ..Default::default()
        },
    )
    .unwrap()
}

/// Each cached record as its JSON line with the source left out (the same
/// files may be named by different paths).
fn records(c: &Campaign) -> Vec<(String, String)> {
    let (recs, problems) = c.load_records().unwrap();
    assert!(problems.is_empty(), "{problems:?}");
    recs.into_iter()
        .map(|(id, mut r)| {
            r.source.clear();
            (id, r.to_json_line().unwrap())
        })
        .collect()
}

#[test]
fn concurrent_shards_collect_to_the_single_process_fit_object_for_object() {
    let (dir, w) = delivery("pipeline-shards", 4);
    let single = new_campaign(&dir.join("single"), &w);
    let o = run(&["campaign".as_ref(), "fit".as_ref(), single.dir().as_os_str()]);
    assert!(o.status.success(), "{}", text(&o));
    let want = records(&single);
    assert_eq!(want.len(), 4);

    // three array tasks at once, K/N taken from the scheduler's variables
    // (an array numbered from 0, as `--array=0-2` gives)
    let sharded = new_campaign(&dir.join("sharded"), &w);
    let tasks: Vec<_> = (0..3)
        .map(|id| {
            zvet()
                .args(["campaign", "fit", "--threads", "1"])
                .arg(sharded.dir())
                .env("SLURM_ARRAY_TASK_ID", id.to_string())
                .env("SLURM_ARRAY_TASK_MIN", "0")
                .env("SLURM_ARRAY_TASK_COUNT", "3")
                .stdout(std::process::Stdio::piped())
                .stderr(std::process::Stdio::piped())
                .spawn()
                .unwrap()
        })
        .collect();
    for t in tasks {
        let o = t.wait_with_output().unwrap();
        assert!(o.status.success(), "{}", text(&o));
        assert!(text(&o).contains("of 3"), "{}", text(&o));
    }
    for k in 1..=3 {
        assert!(sharded.part_path(k, 3).is_file(), "part {k}");
    }
    // nothing in the cache until the parts are collected
    assert!(records(&sharded).is_empty());
    let o = run(&[
        "campaign".as_ref(),
        "fit".as_ref(),
        sharded.dir().as_os_str(),
        "--collect".as_ref(),
    ]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(sharded.part_files().unwrap().is_empty());
    assert_eq!(records(&sharded), want);

    // the outputs of plain `zvet fit` shards, imported, give the same cache
    let imported = new_campaign(&dir.join("imported"), &w);
    let mut outs = Vec::new();
    for k in 1..=2 {
        let out = dir.join(format!("shard{k}.jsonl"));
        let o = zvet()
            .args([
                "fit",
                "--classes",
                "galaxy",
                "--threads",
                "1",
                "--shard",
                &format!("{k}/2"),
                "--out",
            ])
            .arg(&out)
            .arg(&w.spectra)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", text(&o));
        outs.push(out);
    }
    let mut args: Vec<&std::ffi::OsStr> =
        vec!["campaign".as_ref(), "fit".as_ref(), imported.dir().as_os_str()];
    args.push("--import".as_ref());
    args.extend(outs.iter().map(|p| p.as_os_str()));
    let o = run(&args);
    assert!(o.status.success(), "{}", text(&o));
    assert!(text(&o).contains("imported 4 fits"), "{}", text(&o));
    assert_eq!(records(&imported), want);
    // and the export reads the imported cache like any other
    let csv = dir.join("export.csv");
    let o = run(&[
        "export".as_ref(),
        imported.dir().as_os_str(),
        "--out".as_ref(),
        csv.as_os_str(),
    ]);
    assert!(o.status.success(), "{}", text(&o));

    // a damaged cache: a non-UTF-8 line and a torn one are skipped and named
    let cache = single.dir().join(zvet::campaign::FITS_FILE);
    let mut bytes = std::fs::read(&cache).unwrap();
    bytes.extend_from_slice(b"{\"object_id\": \"\xff\"}\n{\"v\":2,\"object_id\":\"x\",\"cand");
    std::fs::write(&cache, bytes).unwrap();
    let (fits, problems) = single.load_fits().unwrap();
    assert_eq!(fits.len(), 4);
    assert_eq!(problems.len(), 2, "{problems:?}");
    assert!(
        problems[0].contains("line 5") && problems[0].contains("UTF-8"),
        "{problems:?}"
    );
    assert!(problems[1].contains("line 6"), "{problems:?}");
    let o = run(&["campaign".as_ref(), "status".as_ref(), single.dir().as_os_str()]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(text(&o).contains("line 5"), "{}", text(&o));
}

#[test]
fn a_delivery_folder_fits_cleanly_and_outputs_are_never_read_back() {
    let (dir, w) = delivery("pipeline-delivery", 2);
    let data = w.spectra.parent().unwrap().to_path_buf();
    // the folder as delivered: spectra/, catalog.csv, truth.csv — and the
    // output written inside it
    let out = data.join("fits.csv");
    for _ in 0..2 {
        let o = zvet()
            .args(["fit", "--classes", "galaxy", "--threads", "1", "--out"])
            .arg(&out)
            .arg(&data)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", text(&o));
        let t = text(&o);
        assert!(
            t.contains("not spectra") && t.contains("catalog.csv") && t.contains("truth.csv"),
            "{t}"
        );
        // the second run does not read the first run's output as a spectrum
        let rows = zvet::pipeline::read_rows(&out).unwrap();
        assert_eq!(rows.len(), 2, "{rows:?}");
        assert!(rows.iter().all(|r| r.error.is_empty()), "{rows:?}");
    }
    // an output that is one of the inputs is refused, and the input kept
    let spec = std::fs::read_dir(&w.spectra)
        .unwrap()
        .next()
        .unwrap()
        .unwrap()
        .path();
    let before = std::fs::read(&spec).unwrap();
    let o = run(&[
        "fit".as_ref(),
        "--out".as_ref(),
        spec.as_os_str(),
        spec.as_os_str(),
    ]);
    assert!(!o.status.success());
    assert!(text(&o).contains("also an input"), "{}", text(&o));
    assert_eq!(std::fs::read(&spec).unwrap(), before);
    let _ = dir;
}

#[cfg(unix)]
#[test]
fn an_unreadable_subfolder_or_a_fifo_ends_the_run_in_failure_without_hanging() {
    use std::os::unix::fs::PermissionsExt;
    let (dir, w) = delivery("pipeline-unreadable", 1);
    let locked = w.spectra.join("locked");
    std::fs::create_dir(&locked).unwrap();
    std::fs::set_permissions(&locked, std::fs::Permissions::from_mode(0o000)).unwrap();
    // root reads any folder: then there is nothing to check
    let readable_anyway = std::fs::read_dir(&locked).is_ok();
    let out = dir.join("out.csv");
    let o = zvet()
        .args(["fit", "--classes", "galaxy", "--threads", "1", "--out"])
        .arg(&out)
        .arg(&w.spectra)
        .output()
        .unwrap();
    std::fs::set_permissions(&locked, std::fs::Permissions::from_mode(0o755)).unwrap();
    if !readable_anyway {
        assert_eq!(o.status.code(), Some(1), "{}", text(&o));
        assert!(text(&o).contains("locked"), "{}", text(&o));
        // the readable spectrum was still fitted
        assert_eq!(zvet::pipeline::read_rows(&out).unwrap().len(), 1);
    }
    let fifo = dir.join("pipe.fits");
    if Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .is_ok_and(|s| s.success())
    {
        let o = zvet()
            .args(["fit", "--out"])
            .arg(dir.join("f.csv"))
            .arg(&fifo)
            .output()
            .unwrap();
        assert_eq!(o.status.code(), Some(1), "{}", text(&o));
        assert!(text(&o).contains("not a regular file"), "{}", text(&o));
    }
}
