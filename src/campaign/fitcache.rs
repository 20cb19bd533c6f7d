/*!
`fits.jsonl`, the cache of automatic fits: one [`FitRecord`] per line and
object (the pipeline's one record, see [`crate::pipeline::record`]), written
as a whole through the atomic rewrite.

The χ²(z) curves are not cached — they are large (one value per grid step
and class); the window recomputes them for the object it shows. Lines of the
first cache format are read as they are. A line that is not UTF-8 or not a
record is skipped and named with its line number.
*/
use crate::pipeline::FitRecord;

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
