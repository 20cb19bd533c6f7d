/*!
The one pipeline: find inputs, read them, resolve the template set, build the
engine, fit in parallel, write one fit record per object.

`zvet fit`, `zvet campaign fit` (whole, sharded, collected, imported) and the
window's background fits are thin callers of this module, so that every way
of fitting behaves the same:

- [`inputs`]: files and folders → files to read (safe folder walks, outputs
  never read back, tables that are not spectra skipped with a note);
- [`read`]: files → objects, streamed, failures kept as items;
- [`engine`]: the template set (built-in or a folder) and the engine on it;
- [`run`]: objects → records, in parallel, with shards, skips, progress and
  cancellation;
- [`record`] and [`table`]: the one record ([`FitRecord`]) and its files
  (JSON Lines with every field of the engine's result; CSV and FITS with its
  flat summary);
- [`kind`]: what a path holds (campaign, template set, catalogue, spectra).
*/
pub mod engine;
pub mod inputs;
pub mod kind;
pub mod read;
pub mod record;
pub mod run;
pub mod table;
mod table_fits;

pub use engine::{build_engine, load_templates, PipelineError};
pub use inputs::{check_output, estimate_objects, find, Inputs};
pub use kind::{kind_of, PathKind, CAMPAIGN_MANIFEST};
pub use read::{read_all, source_of, stream, stream_timed, Item, ReadFailure};
pub use record::{FitRecord, FitRow, TableError, RECORD_FORMAT};
pub use run::{fit_all, fit_spectrum, fit_stream, method_name, RunOptions, Summary};
pub use table::{
    merge_tables, read_records, read_rows, resume_source, write_records, RowWriter, TableFormat,
};

/// Shard K of N from a batch scheduler's job-array environment, if the
/// process runs as an array task: Slurm's `SLURM_ARRAY_TASK_ID`,
/// `SLURM_ARRAY_TASK_MIN` and `SLURM_ARRAY_TASK_COUNT` (K = id − min + 1, so
/// arrays numbered from 0 or 1 both work).
pub fn shard_from_env() -> Result<Option<(usize, usize)>, String> {
    shard_from(|k| std::env::var(k).ok())
}

/// [`shard_from_env`] over any variable lookup (for tests).
pub fn shard_from(var: impl Fn(&str) -> Option<String>) -> Result<Option<(usize, usize)>, String> {
    let (Some(id), Some(count)) = (var("SLURM_ARRAY_TASK_ID"), var("SLURM_ARRAY_TASK_COUNT")) else {
        return Ok(None);
    };
    let num = |name: &str, v: &str| -> Result<usize, String> {
        v.trim()
            .parse()
            .map_err(|_| format!("{name}={v} is not a whole number"))
    };
    let id = num("SLURM_ARRAY_TASK_ID", &id)?;
    let n = num("SLURM_ARRAY_TASK_COUNT", &count)?;
    let min = match var("SLURM_ARRAY_TASK_MIN") {
        Some(m) => num("SLURM_ARRAY_TASK_MIN", &m)?,
        None => 0,
    };
    let k = id
        .checked_sub(min)
        .map(|d| d + 1)
        .filter(|&k| k >= 1 && k <= n)
        .ok_or_else(|| {
            format!("array task {id} (first {min}, {n} tasks) is not one of {n} shards; use --shard K/N")
        })?;
    Ok(Some((k, n)))
}

/// Parse `K/N` with 1 ≤ K ≤ N.
pub fn parse_shard(s: &str) -> Result<(usize, usize), String> {
    let (k, n) = s
        .split_once('/')
        .ok_or_else(|| format!("shard '{s}' must look like K/N, e.g. 3/10"))?;
    let k: usize = k
        .trim()
        .parse()
        .map_err(|_| format!("shard '{s}': K is not a number"))?;
    let n: usize = n
        .trim()
        .parse()
        .map_err(|_| format!("shard '{s}': N is not a number"))?;
    if n == 0 || k == 0 || k > n {
        return Err(format!("shard '{s}': need 1 ≤ K ≤ N"));
    }
    Ok((k, n))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shards_parse_and_come_from_the_array_environment() {
        assert_eq!(parse_shard("3/10"), Ok((3, 10)));
        assert!(parse_shard("0/10").is_err());
        assert!(parse_shard("11/10").is_err());
        assert!(parse_shard("x").is_err());
        fn env(pairs: &'static [(&'static str, &'static str)]) -> impl Fn(&str) -> Option<String> {
            move |k: &str| pairs.iter().find(|(n, _)| *n == k).map(|(_, v)| v.to_string())
        }
        assert_eq!(shard_from(env(&[])), Ok(None));
        // --array=0-3: ids 0..=3, min 0
        const ZERO: [(&str, &str); 3] = [
            ("SLURM_ARRAY_TASK_ID", "0"),
            ("SLURM_ARRAY_TASK_MIN", "0"),
            ("SLURM_ARRAY_TASK_COUNT", "4"),
        ];
        assert_eq!(shard_from(env(&ZERO)), Ok(Some((1, 4))));
        // --array=1-4
        const ONE: [(&str, &str); 3] = [
            ("SLURM_ARRAY_TASK_ID", "4"),
            ("SLURM_ARRAY_TASK_MIN", "1"),
            ("SLURM_ARRAY_TASK_COUNT", "4"),
        ];
        assert_eq!(shard_from(env(&ONE)), Ok(Some((4, 4))));
        const BAD: [(&str, &str); 2] = [("SLURM_ARRAY_TASK_ID", "9"), ("SLURM_ARRAY_TASK_COUNT", "4")];
        assert!(shard_from(env(&BAD)).is_err());
    }
}
