/*!
Format detection from a file's first bytes (not its name): FITS files begin
with the card `SIMPLE  =` (FITS standard 4.0, §4.4.1.1); gzip-compressed files
(magic 1F 8B) whose name says FITS are handed to the FITS library, which
reads them directly; anything else that is valid UTF-8 text in its first
kilobytes is read as a text table.
*/
use super::LoadError;
use std::io::Read;
use std::path::Path;

/// The file formats the readers know.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// FITS (possibly gzip-compressed).
    Fits,
    /// A CSV or whitespace-separated text table.
    Text,
}

/// Decide the format of `path` from its content.
pub fn detect_format(path: &Path) -> Result<Format, LoadError> {
    let mut f = std::fs::File::open(path)?;
    let mut head = Vec::with_capacity(4096);
    f.by_ref().take(4096).read_to_end(&mut head)?;
    if head.is_empty() {
        return Err(LoadError::UnknownFormat("the file is empty".into()));
    }
    if head.starts_with(b"SIMPLE  =") {
        return Ok(Format::Fits);
    }
    if head.starts_with(&[0x1f, 0x8b]) {
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().to_ascii_lowercase())
            .unwrap_or_default();
        if name.contains(".fit") || name.contains(".fts") {
            return Ok(Format::Fits);
        }
        return Err(LoadError::UnknownFormat(
            "gzip-compressed, and the name does not say FITS".into(),
        ));
    }
    // A cut in the middle of a multi-byte character at the 4096-byte
    // boundary is still text.
    let text_ok = match std::str::from_utf8(&head) {
        Ok(_) => true,
        Err(e) => e.error_len().is_none() && e.valid_up_to() + 4 > head.len(),
    };
    if text_ok && !head.contains(&0) {
        return Ok(Format::Text);
    }
    Err(LoadError::UnknownFormat(
        "binary content that does not start with a FITS header".into(),
    ))
}
