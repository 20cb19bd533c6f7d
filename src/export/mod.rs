/*!
The training catalogue: one row per vetted object, joining the photometric
catalogue (position, magnitudes, colours, photometric class and redshift), the
automatic fit and the merged verdict, with provenance. Written as
- plain CSV (header row first, nothing else, so `pandas.read_csv(F)` and
  astropy's `Table.read(F)` read it with no options) with the provenance,
  units and column descriptions in a JSON sidecar `F.csv.json`;
- ECSV (astropy's Enhanced CSV, ECSV 1.0): units, types, descriptions and
  provenance in its YAML header;
- a FITS binary table (provenance as header keywords, units in TUNITn).

All are read back by this module (columns found by name, see [`COLUMNS`]).
*/
mod columns;
mod csv;
mod ecsv;
mod fits;

pub use columns::{column, Access, Cell, ColumnSpec, Kind, Precision, COLUMNS};
pub use csv::{read_csv, sidecar_path, write_csv};
pub use ecsv::{read_ecsv, write_ecsv};
pub use fits::{from_ascii, read_fits, to_ascii, write_fits, FITS_EXTNAME};

use crate::campaign::{Campaign, CampaignError, EngineSettings};
use crate::catalog::CatalogRow;
use crate::fit::FitResult;
use crate::review::merge::{ConsensusState, Merged};
use crate::review::{Confidence, Flag, VerdictClass, ZSource};
use crate::ObjectClass;
use chrono::{DateTime, Utc};
use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// What can go wrong while exporting or reading an export back.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ExportError {
    /// A file could not be read or written.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// The FITS library failed.
    #[error("{}: FITS: {message}", path.display())]
    Fits {
        /// The file.
        path: PathBuf,
        /// Its message.
        message: String,
    },
    /// A catalogue file with unexpected contents.
    #[error("{0}")]
    Format(String),
    /// The output name has none of `.csv`, `.ecsv`, `.fits`/`.fit`.
    #[error("{}: the output must end in .csv, .ecsv or .fits", .0.display())]
    UnknownFormat(PathBuf),
    /// The campaign could not be read.
    #[error(transparent)]
    Campaign(#[from] CampaignError),
    /// Stopped on request (Ctrl-C) before a step; nothing was written.
    #[error("stopped by the interrupt before {0}; the output was not written")]
    Interrupted(String),
}

/// One row of the training catalogue.
#[derive(Debug, Clone, PartialEq)]
pub struct ExportRow {
    /// The object's id and catalogue facts (position, photometry, photometric
    /// class and z); all empty but the id when the catalogue has no row.
    pub catalog: CatalogRow,
    /// Automatic class.
    pub auto_class: Option<ObjectClass>,
    /// Automatic redshift.
    pub auto_z: Option<f64>,
    /// Its error.
    pub auto_z_err: Option<f64>,
    /// Δχ² to the runner-up.
    pub auto_delta_chi2: Option<f64>,
    /// Engine warning names.
    pub auto_warnings: String,
    /// Vetted class.
    pub vetted_class: VerdictClass,
    /// Vetted redshift.
    pub vetted_z: Option<f64>,
    /// Its error.
    pub vetted_z_err: Option<f64>,
    /// Where it came from.
    pub z_source: Option<ZSource>,
    /// Confidence.
    pub confidence: Option<Confidence>,
    /// Flags.
    pub flags: BTreeSet<Flag>,
    /// Notes.
    pub note: String,
    /// Inspectors whose verdicts counted.
    pub inspectors: Vec<String>,
    /// Consensus state.
    pub consensus: ConsensusState,
    /// Emission lines of the automatic fit, in [`EXPORT_LINES`] order.
    pub lines: [LineCells; EXPORT_LINES.len()],
    /// Drawn into the campaign's audit sample ([`crate::audit`]).
    pub in_audit_sample: bool,
    /// Weight for estimates over the whole catalogue: for audit-sample
    /// objects N_h / (vetted sample objects of the stratum), the inverse
    /// inclusion probability corrected for sample objects not yet vetted;
    /// 1 for every other object (chosen by the review queue, not at random,
    /// it stands only for itself and must not enter catalogue-wide estimates).
    pub weight: Option<f64>,
}

/// One exported emission line (or doublet): flux, its 1σ error and the
/// rest-frame equivalent width, as measured by [`crate::fit::emission`].
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct LineCells {
    /// Integrated flux (the spectra's flux unit × Å); a line that is not
    /// detected keeps its measured value (a 3σ upper limit is 3 × the error).
    pub flux: Option<f64>,
    /// Its 1σ error.
    pub flux_err: Option<f64>,
    /// Rest-frame equivalent width (Å, positive for emission) against the
    /// continuum under the line, stellar absorption included.
    pub ew: Option<f64>,
}

/// The exported lines: column stem and the line-list names summed into it
/// (a doublet's two lines as one flux; the error adds the two errors in
/// quadrature, which ignores their covariance — an overestimate when the
/// doublet is blended and the two fluxes trade off).
pub const EXPORT_LINES: [(&str, &[&str]); 8] = [
    ("halpha", &["Hα"]),
    ("hbeta", &["Hβ"]),
    ("hgamma", &["Hγ"]),
    ("hdelta", &["Hδ"]),
    ("oiii_5008", &["[O III] 5008"]),
    ("nii_6585", &["[N II] 6585"]),
    ("oii_3727_3730", &["[O II] 3727", "[O II] 3730"]),
    ("sii_6718_6733", &["[S II] 6718", "[S II] 6733"]),
];

/// Largest velocity difference (km/s) between the vetted and the automatic
/// redshift at which the automatic fit's line measurements are exported:
/// the largest line offset the line fit allows for galaxies
/// ([`crate::fit::emission::table::limits`]). Beyond it the lines were
/// measured at another redshift and the line columns stay empty.
pub const LINE_EXPORT_MAX_DV_KMS: f64 = 500.0;

/// The [`EXPORT_LINES`] values of a fit's line measurements.
pub fn line_cells(lines: &[crate::fit::LineMeasurement]) -> [LineCells; EXPORT_LINES.len()] {
    EXPORT_LINES.map(|(_, names)| {
        let found: Vec<&crate::fit::LineMeasurement> = names
            .iter()
            .filter_map(|n| lines.iter().find(|l| l.name == *n))
            .collect();
        if found.len() != names.len() {
            return LineCells::default();
        }
        let flux: f64 = found.iter().map(|l| l.flux).sum();
        let err = found.iter().map(|l| l.flux_err * l.flux_err).sum::<f64>().sqrt();
        let ew: f64 = found.iter().map(|l| l.ew_rest).sum();
        LineCells {
            flux: finite(flux),
            flux_err: finite(err),
            ew: finite(ew),
        }
    })
}

/// Which vetted objects to keep.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ExportOptions {
    /// Keep only objects at or above this confidence (objects without a
    /// confidence are dropped when set).
    pub min_confidence: Option<Confidence>,
    /// Drop objects with any of these flags.
    pub exclude_flags: Vec<Flag>,
}

/// Where the catalogue came from, written into its header.
#[derive(Debug, Clone, PartialEq)]
pub struct Provenance {
    /// zvet version.
    pub zvet_version: String,
    /// Campaign name.
    pub campaign: String,
    /// Template set (`builtin` or a path).
    pub template_set: String,
    /// Engine settings.
    pub engine: EngineSettings,
    /// When the export was made.
    pub date: DateTime<Utc>,
    /// Merge tolerance on |Δz|/(1+z).
    pub tolerance: f64,
    /// The confidence filter used.
    pub min_confidence: Option<Confidence>,
    /// The flag filter used.
    pub exclude_flags: Vec<Flag>,
}

impl Provenance {
    /// Provenance of an export of `campaign` made now.
    pub fn for_campaign(campaign: &Campaign, merged: &Merged, opts: &ExportOptions) -> Provenance {
        let m = campaign.manifest();
        Provenance {
            zvet_version: env!("CARGO_PKG_VERSION").into(),
            campaign: m.name.clone(),
            template_set: m.templates.clone(),
            engine: m.engine.clone(),
            date: Utc::now(),
            tolerance: merged.tolerance,
            min_confidence: opts.min_confidence,
            exclude_flags: opts.exclude_flags.clone(),
        }
    }
}

/// The `format` value of the sidecar and ECSV provenance.
pub const FORMAT_NAME: &str = "zvet training catalogue";

impl Provenance {
    /// Provenance as JSON: the CSV sidecar and the ECSV `meta` hold these keys.
    pub fn to_json(&self) -> Result<serde_json::Value, ExportError> {
        let engine = serde_json::to_value(&self.engine)
            .map_err(|e| ExportError::Format(format!("engine settings: {e}")))?;
        Ok(serde_json::json!({
            "format": FORMAT_NAME,
            "zvet_version": self.zvet_version,
            "campaign": self.campaign,
            "template_set": self.template_set,
            "engine": engine,
            "date": self.date.to_rfc3339_opts(chrono::SecondsFormat::AutoSi, true),
            "merge_tolerance": self.tolerance,
            "min_confidence": self.min_confidence.map(|c| c.as_str()),
            "exclude_flags": self.exclude_flags.iter().map(|f| f.as_str()).collect::<Vec<_>>(),
        }))
    }

    /// Read [`Provenance::to_json`]'s keys back.
    pub fn from_json(v: &serde_json::Value) -> Result<Provenance, String> {
        let text = |k: &str| -> Result<String, String> {
            v.get(k)
                .and_then(|x| x.as_str())
                .map(String::from)
                .ok_or_else(|| format!("provenance: '{k}' is missing or not text"))
        };
        if text("format")? != FORMAT_NAME {
            return Err(format!("provenance: format is not '{FORMAT_NAME}'"));
        }
        let engine: EngineSettings = serde_json::from_value(v.get("engine").cloned().unwrap_or_default())
            .map_err(|e| format!("provenance 'engine': {e}"))?;
        let date = chrono::DateTime::parse_from_rfc3339(&text("date")?)
            .map_err(|e| format!("provenance 'date': {e}"))?
            .with_timezone(&Utc);
        let tolerance = v
            .get("merge_tolerance")
            .and_then(|x| x.as_f64())
            .ok_or("provenance: 'merge_tolerance' is missing or not a number")?;
        let word = |w: &str| format!("\"{w}\"");
        let min_confidence = match v.get("min_confidence").and_then(|x| x.as_str()) {
            None => None,
            Some(w) => Some(
                serde_json::from_str::<Confidence>(&word(w))
                    .map_err(|_| format!("provenance 'min_confidence': unknown level {w}"))?,
            ),
        };
        let exclude_flags = v
            .get("exclude_flags")
            .and_then(|x| x.as_array())
            .map(|a| a.iter().filter_map(|x| x.as_str()).collect::<Vec<_>>())
            .unwrap_or_default()
            .into_iter()
            .map(|w| {
                serde_json::from_str::<Flag>(&word(w))
                    .map_err(|_| format!("provenance 'exclude_flags': unknown flag {w}"))
            })
            .collect::<Result<_, _>>()?;
        Ok(Provenance {
            zvet_version: text("zvet_version")?,
            campaign: text("campaign")?,
            template_set: text("template_set")?,
            engine,
            date,
            tolerance,
            min_confidence,
            exclude_flags,
        })
    }
}

/// Units, types and descriptions of the columns as JSON (CSV sidecar).
pub(crate) fn columns_json() -> serde_json::Value {
    COLUMNS
        .iter()
        .map(|c| {
            serde_json::json!({
                "name": c.name,
                "datatype": ecsv::datatype(c.kind()),
                "unit": c.unit,
                "description": c.doc,
            })
        })
        .collect()
}

fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// Rows for every object with a complete consensus verdict
/// ([`crate::review::Verdict::is_complete`]) that passes the filters, sorted
/// by id. Conflicts have no verdict and are left out, and so are incomplete
/// verdicts (e.g. a class without a redshift in an old log).
pub fn build_rows(
    merged: &Merged,
    catalog: &BTreeMap<String, CatalogRow>,
    fits: &BTreeMap<String, FitResult>,
    opts: &ExportOptions,
) -> Vec<ExportRow> {
    let mut rows = Vec::new();
    for (id, c) in &merged.objects {
        let Some(v) = &c.verdict else { continue };
        let Some(class) = v.class.filter(|_| v.is_complete()) else {
            continue;
        };
        if let Some(min) = opts.min_confidence {
            if v.confidence.is_none_or(|x| x < min) {
                continue;
            }
        }
        if opts.exclude_flags.iter().any(|f| v.flags.contains(f)) {
            continue;
        }
        let cat = catalog.get(id);
        let best = fits.get(id).and_then(|f| f.best().map(|b| (f, b)));
        // lines measured at (nearly) the vetted redshift, else none
        let lines = match (best, v.z) {
            (Some((f, b)), Some(z)) if crate::fit::velocity_sep_kms(b.z, z) <= LINE_EXPORT_MAX_DV_KMS => {
                line_cells(&f.lines)
            }
            _ => Default::default(),
        };
        rows.push(ExportRow {
            catalog: CatalogRow {
                id: id.clone(),
                ..cat.cloned().unwrap_or_default()
            },
            auto_class: best.map(|(_, b)| b.class),
            auto_z: best.and_then(|(_, b)| finite(b.z)),
            auto_z_err: best.and_then(|(_, b)| finite(b.z_err)),
            auto_delta_chi2: best.and_then(|(f, _)| finite(f.delta_chi2)),
            auto_warnings: best.map_or(String::new(), |(f, _)| f.warnings.names()),
            vetted_class: class,
            vetted_z: v.z,
            vetted_z_err: v.z_err,
            z_source: v.z_source,
            confidence: v.confidence,
            flags: v.flags.clone(),
            note: v.note.clone(),
            inspectors: c.inspectors.clone(),
            consensus: c.state,
            lines,
            in_audit_sample: false,
            weight: Some(1.0),
        });
    }
    rows
}

/// Mark the audit-sample rows and give them their weight N_h / v_h, where
/// v_h counts the stratum's sample objects with a complete consensus verdict
/// (filters of the export do not change it, so the weights agree with the
/// report's estimates).
pub fn apply_audit_weights(
    rows: &mut [ExportRow],
    sample: &crate::audit::sample::AuditSample,
    merged: &Merged,
) {
    let mut vetted = vec![0usize; sample.strata.len()];
    let index = sample.index();
    for (id, &(h, _)) in &index {
        let complete = merged
            .objects
            .get(*id)
            .and_then(|c| c.verdict.as_ref())
            .is_some_and(|v| v.is_complete());
        if complete {
            vetted[h] += 1;
        }
    }
    for r in rows {
        if let Some(&(h, _)) = index.get(r.catalog.id.as_str()) {
            r.in_audit_sample = true;
            r.weight = (vetted[h] > 0).then(|| sample.strata[h].population as f64 / vetted[h] as f64);
        }
    }
}

/// Output format by file name.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Plain CSV, provenance in the `.json` sidecar.
    Csv,
    /// astropy's Enhanced CSV (ECSV 1.0).
    Ecsv,
    /// FITS binary table.
    Fits,
}

impl Format {
    /// From the extension (`.csv`, `.ecsv`, `.fits`, `.fit`, `.fts`; case-insensitive).
    pub fn of(path: &Path) -> Result<Format, ExportError> {
        let ext = path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase);
        match ext.as_deref() {
            Some("csv") => Ok(Format::Csv),
            Some("ecsv") => Ok(Format::Ecsv),
            Some("fits" | "fit" | "fts") => Ok(Format::Fits),
            _ => Err(ExportError::UnknownFormat(path.to_path_buf())),
        }
    }
}

/// Write rows to `path` in the format its extension names (atomically).
pub fn write(path: &Path, rows: &[ExportRow], prov: &Provenance) -> Result<(), ExportError> {
    match Format::of(path)? {
        Format::Csv => write_csv(path, rows, prov),
        Format::Ecsv => write_ecsv(path, rows, prov),
        Format::Fits => write_fits(path, rows, prov),
    }
}

/// Read an export back (any format).
pub fn read(path: &Path) -> Result<(Vec<ExportRow>, Provenance), ExportError> {
    match Format::of(path)? {
        Format::Csv => read_csv(path),
        Format::Ecsv => read_ecsv(path),
        Format::Fits => read_fits(path),
    }
}

/// What [`export_campaign`] did.
#[derive(Debug, Clone, PartialEq)]
pub struct ExportSummary {
    /// Rows written.
    pub rows: usize,
    /// Objects with a consensus verdict dropped by the filters.
    pub filtered: usize,
    /// Conflicts left out (no consensus yet).
    pub conflicts: usize,
    /// Consensus verdicts left out because they are incomplete.
    pub incomplete: usize,
    /// Problems met while reading logs, fits and catalogue.
    pub problems: Vec<String>,
}

/// Merge the campaign's logs and write the training catalogue to `out`
/// (format from the extension).
pub fn export_campaign(
    campaign: &Campaign,
    out: &Path,
    opts: &ExportOptions,
) -> Result<ExportSummary, ExportError> {
    export_campaign_steps(campaign, out, opts, &mut |_| true)
}

/// [`export_campaign`], telling `step` the name of each step before it
/// starts (merging, reading the fits, reading the catalogue, writing); when
/// `step` returns false the export stops there with
/// [`ExportError::Interrupted`] and `out` is not touched.
pub fn export_campaign_steps(
    campaign: &Campaign,
    out: &Path,
    opts: &ExportOptions,
    step: &mut dyn FnMut(&str) -> bool,
) -> Result<ExportSummary, ExportError> {
    let mut go = |name: &str| {
        if step(name) {
            Ok(())
        } else {
            Err(ExportError::Interrupted(name.to_string()))
        }
    };
    Format::of(out)?;
    go("merging the review logs")?;
    let (merged, mut problems) = campaign.merge(None)?;
    go("reading the fit cache")?;
    // read line by line; only each fit's summary is kept, and the
    // exported line cells of the best solution
    let mut cells: BTreeMap<String, (f64, [LineCells; EXPORT_LINES.len()])> = BTreeMap::new();
    let (fits, p) = campaign.load_fit_summaries_with(|id, f| {
        if let Some(b) = f.best() {
            cells.insert(id.to_string(), (b.z, line_cells(&f.lines)));
        }
    })?;
    problems.extend(p);
    go("reading the catalogue")?;
    let (catalog, p) = campaign.load_catalog()?;
    problems.extend(p);
    if campaign.catalog_path().is_some() {
        let ids: Vec<&String> = fits.keys().collect();
        let cat_ids: Vec<&String> = catalog.keys().collect();
        problems.extend(crate::catalog::match_summary(&ids, &cat_ids));
    }
    let mut rows = build_rows(&merged, &catalog, &fits, opts);
    // the summaries hold no line measurements: the same rule as build_rows,
    // on the cells kept while reading
    for r in &mut rows {
        if let (Some((z_auto, c)), Some(z)) = (cells.get(&r.catalog.id), r.vetted_z) {
            if crate::fit::velocity_sep_kms(*z_auto, z) <= LINE_EXPORT_MAX_DV_KMS {
                r.lines = *c;
            }
        }
    }
    if let Some(sample) = crate::audit::campaign::load_sample(campaign)? {
        apply_audit_weights(&mut rows, &sample, &merged);
    }
    let conflicts = merged.conflicts().count();
    let incomplete = merged
        .objects
        .values()
        .filter(|c| c.verdict.as_ref().is_some_and(|v| !v.is_complete()))
        .count();
    let with_verdict = merged.objects.len() - conflicts - incomplete;
    let prov = Provenance::for_campaign(campaign, &merged, opts);
    // the rows hold all that is written: free the rest before the writer
    // lays the rows out (memory peaks once, not twice)
    drop((merged, fits, catalog));
    go("writing")?;
    write(out, &rows, &prov)?;
    Ok(ExportSummary {
        rows: rows.len(),
        filtered: with_verdict - rows.len(),
        conflicts,
        incomplete,
        problems,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::LineMeasurement;

    fn line(name: &str, flux: f64, err: f64, ew: f64) -> LineMeasurement {
        LineMeasurement {
            name: name.into(),
            rest_wave: crate::lines::wave_of(name),
            obs_wave: f64::NAN,
            flux,
            flux_err: err,
            sigma_kms: 80.0,
            ew_rest: ew,
            snr: flux / err,
            width_fitted: true,
            continuum: 1.0,
            abs_ew_rest: None,
        }
    }

    #[test]
    fn line_columns_take_single_lines_and_sum_doublets() {
        let lines = vec![
            line("Hα", 300.0, 6.0, 40.0),
            line("[S II] 6718", 30.0, 3.0, 4.0),
            line("[S II] 6733", 20.0, 4.0, 3.0),
            line("[O II] 3727", 10.0, 1.0, f64::NAN),
            // its partner is missing: the pair stays empty
        ];
        let cells = line_cells(&lines);
        let at = |stem: &str| cells[EXPORT_LINES.iter().position(|l| l.0 == stem).unwrap()];
        assert_eq!(
            at("halpha"),
            LineCells {
                flux: Some(300.0),
                flux_err: Some(6.0),
                ew: Some(40.0)
            }
        );
        let s2 = at("sii_6718_6733");
        assert_eq!((s2.flux, s2.ew), (Some(50.0), Some(7.0)));
        assert!((s2.flux_err.unwrap() - 5.0).abs() < 1e-12); // √(3² + 4²)
        assert_eq!(at("oii_3727_3730"), LineCells::default());
        assert_eq!(at("hbeta"), LineCells::default());
        // every exported name is a line of the line list
        for (_, names) in EXPORT_LINES {
            for n in names {
                assert!(crate::lines::find(n).is_some(), "{n}");
            }
        }
    }
}
