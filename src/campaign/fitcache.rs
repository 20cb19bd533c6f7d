/*!
`fits.jsonl`, the cache of automatic fits: one [`FitRecord`] per line and
object (the pipeline's one record, see [`crate::pipeline::record`]), written
as a whole through the atomic rewrite.

The cache is read line by line ([`scan`]), so a command that needs a little
of every fit (the best class and redshift: status, export, report) keeps
only that ([`summary`]) and its memory does not hold the records.

The χ²(z) curves are not cached — they are large (one value per grid step
and class); the window recomputes them for the object it shows. Lines of the
first cache format are read as they are. A line that is not UTF-8 or not a
record is skipped and named with its line number.
*/
use crate::fit::FitResult;
use crate::pipeline::FitRecord;
use std::path::Path;

/// Format version of a `fits.jsonl` line (the record's).
pub const FIT_CACHE_FORMAT: u32 = crate::pipeline::RECORD_FORMAT;

/// Parse the bytes of a `fits.jsonl`; bad lines come back as
/// `fits.jsonl line N: message` problems.
pub fn parse(bytes: &[u8]) -> (Vec<FitRecord>, Vec<String>) {
    let (records, problems) = crate::pipeline::record::parse_lines(bytes);
    (
        records,
        problems.into_iter().map(|p| format!("fits.jsonl {p}")).collect(),
    )
}

/// The text of a `fits.jsonl` holding `records` in the given order.
pub fn to_text(records: &[&FitRecord]) -> Result<String, serde_json::Error> {
    let mut s = String::new();
    for r in records {
        s.push_str(&r.to_json_line()?);
        s.push('\n');
    }
    Ok(s)
}

/// Read the cache at `path` line by line, handing every record to `f` in
/// file order; bad lines come back as `fits.jsonl line N: …` problems. A
/// missing file holds no records.
pub fn scan(path: &Path, f: impl FnMut(FitRecord)) -> std::io::Result<Vec<String>> {
    let file = match std::fs::File::open(path) {
        Ok(file) => file,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => return Err(e),
    };
    let problems = crate::pipeline::record::for_each_line(std::io::BufReader::new(file), f)?;
    Ok(problems.into_iter().map(|p| format!("fits.jsonl {p}")).collect())
}

/// What the summary commands keep of a fit: the best candidate (without its
/// template coefficients), Δχ², reduced χ², S/N and the warnings; no other
/// candidates, line measurements, per-class solutions or curves.
pub fn summary(mut fit: FitResult) -> FitResult {
    fit.candidates.truncate(1);
    for c in &mut fit.candidates {
        c.coeffs = Vec::new();
    }
    fit.lines = Vec::new();
    fit.per_class = Vec::new();
    fit.curves = Vec::new();
    fit
}
