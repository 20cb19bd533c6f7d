/*!
What a path holds, judged from its content: a campaign folder, a template
set, a photometric catalogue, or spectra. The window sorts dropped and opened
paths with it; the file dialogs offer [`spectrum_dialog_extensions`].
*/
use super::inputs::not_a_spectrum_table;
use crate::io::{ReadOptions, SPECTRUM_EXTENSIONS};
use std::io::Read;
use std::path::Path;

/// File name of a campaign's manifest (a folder holding it is a campaign).
pub const CAMPAIGN_MANIFEST: &str = "campaign.toml";

/// Extensions (lower case) of catalogue files.
pub const CATALOGUE_EXTENSIONS: &[&str] = &["csv", "txt"];

/// What a path holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PathKind {
    /// A campaign folder.
    Campaign,
    /// A template set (a folder of one set, or its `.fits`/`.json` file).
    TemplateSet,
    /// A photometric catalogue (a table with ra/dec and no wavelength).
    Catalogue,
    /// Spectrum files or a folder of them.
    Spectra,
}

/// Judge `path` by its content.
pub fn kind_of(path: &Path) -> PathKind {
    if path.is_dir() {
        if path.join(CAMPAIGN_MANIFEST).is_file() {
            return PathKind::Campaign;
        }
        if is_template_set_folder(path) {
            return PathKind::TemplateSet;
        }
        return PathKind::Spectra;
    }
    if path.is_file() {
        if is_template_set_file(path) {
            return PathKind::TemplateSet;
        }
        if not_a_spectrum_table(path, &ReadOptions::default()).is_some_and(|why| why.contains("catalogue")) {
            return PathKind::Catalogue;
        }
    }
    PathKind::Spectra
}

/// A folder whose FITS files are all template sets (at least one).
pub fn is_template_set_folder(dir: &Path) -> bool {
    let Ok(rd) = std::fs::read_dir(dir) else {
        return false;
    };
    let mut any = false;
    for e in rd.flatten() {
        let p = e.path();
        let fits = p
            .extension()
            .and_then(|x| x.to_str())
            .is_some_and(|x| x.eq_ignore_ascii_case("fits"));
        if !fits || !e.file_type().is_ok_and(|t| t.is_file()) {
            continue;
        }
        if !is_template_set_file(&p) {
            return false;
        }
        any = true;
    }
    any
}

/// A FITS file whose primary header names a template set (`SETNAME`, see
/// [`crate::templates`]), or the JSON descriptor of one.
pub fn is_template_set_file(path: &Path) -> bool {
    let Ok(meta) = std::fs::metadata(path) else {
        return false;
    };
    if !meta.is_file() {
        return false;
    }
    let ext = path
        .extension()
        .and_then(|x| x.to_str())
        .map(str::to_ascii_lowercase);
    if ext.as_deref() == Some("json") {
        return crate::templates::read_descriptor(path).is_ok();
    }
    let Ok(f) = std::fs::File::open(path) else {
        return false;
    };
    // the primary header: 80-character cards in 2880-byte blocks, up to END
    let mut head = Vec::with_capacity(2880 * 4);
    if f.take(2880 * 4).read_to_end(&mut head).is_err() || !head.starts_with(b"SIMPLE  =") {
        return false;
    }
    for card in head.chunks(80) {
        if card.starts_with(b"SETNAME ") {
            return true;
        }
        if card.starts_with(b"END ") || card == b"END" {
            break;
        }
    }
    false
}

/// Extensions for a file dialog's spectrum filter (the last part of each of
/// [`SPECTRUM_EXTENSIONS`], e.g. `gz` for `fits.gz`).
pub fn spectrum_dialog_extensions() -> Vec<&'static str> {
    let mut v: Vec<&'static str> = Vec::new();
    for e in SPECTRUM_EXTENSIONS {
        let last = e.rsplit('.').next().unwrap_or(e);
        if !v.contains(&last) {
            v.push(last);
        }
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_shipped_template_set_is_recognised_by_its_content() {
        // a copy under any name is still a template set
        let dir = tempfile::tempdir().unwrap();
        let copy = dir.path().join("my-copy");
        std::fs::create_dir(&copy).unwrap();
        let shipped = Path::new(env!("CARGO_MANIFEST_DIR")).join("templates-spectra");
        for f in ["builtin.fits", "builtin.json"] {
            std::fs::copy(shipped.join(f), copy.join(f)).unwrap();
        }
        assert_eq!(kind_of(&copy), PathKind::TemplateSet);
        assert_eq!(kind_of(&copy.join("builtin.fits")), PathKind::TemplateSet);
        let camp = dir.path().join("camp");
        std::fs::create_dir(&camp).unwrap();
        std::fs::write(camp.join(CAMPAIGN_MANIFEST), "").unwrap();
        assert_eq!(kind_of(&camp), PathKind::Campaign);
        let cat = dir.path().join("phot.csv");
        std::fs::write(&cat, "id,ra,dec,mag_r\n").unwrap();
        assert_eq!(kind_of(&cat), PathKind::Catalogue);
        let spec = dir.path().join("spec.csv");
        std::fs::write(&spec, "wave,flux\n4000,1\n").unwrap();
        assert_eq!(kind_of(&spec), PathKind::Spectra);
        assert_eq!(kind_of(dir.path()), PathKind::Spectra);
        assert!(spectrum_dialog_extensions().contains(&"gz"));
    }
}
