/*!
The objects of a campaign: catalogue rows through the manifest's column
mapping, spectra through the readers, joined by id with their cached fits;
and the redshift engine that fills the fit cache.
*/
use super::{manifest, Campaign, CampaignError, SurveyObject};
use crate::catalog::{CatalogRow, ColumnMap};
use crate::fit::Engine;
use crate::templates::TemplateSet;
use std::collections::BTreeMap;
use std::path::Path;

impl Campaign {
    /// The catalogue rows by id, read with the manifest's column mapping
    /// (empty without a catalogue). Repeated ids are reported and the first
    /// row kept.
    pub fn load_catalog(&self) -> Result<(BTreeMap<String, CatalogRow>, Vec<String>), CampaignError> {
        let Some(cat) = &self.manifest.catalog else {
            return Ok(Default::default());
        };
        let mut map = ColumnMap::default();
        for (field, column) in &cat.columns {
            map.set(field, column)?;
        }
        let path = manifest::resolve_path(&self.dir, &cat.path);
        let mut rows = BTreeMap::new();
        let mut problems = Vec::new();
        for r in crate::catalog::read_csv(&path, &map)? {
            if rows.contains_key(&r.id) {
                problems.push(format!(
                    "{}: id '{}' appears more than once; the first row is used",
                    path.display(),
                    r.id
                ));
                continue;
            }
            rows.insert(r.id.clone(), r);
        }
        Ok((rows, problems))
    }

    /// The reader options of the manifest.
    pub fn read_options(&self) -> crate::io::ReadOptions {
        self.manifest.read.clone()
    }

    /// The spectrum files of the campaign's inputs (through the pipeline's
    /// input search: safe folder walks, the campaign's own files never read
    /// back, tables that are not spectra skipped). Notes and problems come
    /// back as text.
    pub fn input_files(&self) -> (Vec<std::path::PathBuf>, Vec<String>) {
        let exclude = [
            self.dir.join(super::FITS_FILE),
            self.dir.join(super::MANIFEST_FILE),
        ];
        let found = crate::pipeline::find(&self.spectra_paths(), &exclude, &self.read_options());
        let mut problems = found.problems;
        problems.extend(found.notes.into_iter().map(|n| format!("note: {n}")));
        (found.files, problems)
    }

    /// Every object: the spectra of all inputs, joined with the catalogue by
    /// id, with their cached fits. A file that cannot be read, a repeated id
    /// or a catalogue/fit-cache problem is reported and the rest loads.
    pub fn load_objects(&self) -> Result<(Vec<SurveyObject>, Vec<String>), CampaignError> {
        let (files, mut problems) = self.input_files();
        let (spectra, read_problems) = crate::pipeline::read_all(files, &self.read_options());
        problems.extend(read_problems);
        let (mut catalog, cat_problems) = self.load_catalog()?;
        problems.extend(cat_problems);
        if self.manifest.catalog.is_some() {
            let ids: Vec<&str> = spectra.iter().map(|s| s.meta.id.as_str()).collect();
            let cat_ids: Vec<&String> = catalog.keys().collect();
            problems.extend(crate::catalog::match_summary(&ids, &cat_ids));
        }
        let (mut fits, fit_problems) = self.load_fits()?;
        problems.extend(fit_problems);
        let objects = spectra
            .into_iter()
            .map(|s| SurveyObject {
                catalog: catalog.remove(&s.meta.id),
                fit: fits.remove(&s.meta.id),
                spectrum: s,
            })
            .collect();
        Ok((objects, problems))
    }

    /// The template-set path of the manifest (`None`: the built-in set).
    pub fn templates_path(&self) -> Option<std::path::PathBuf> {
        match self.manifest.templates.as_str() {
            "builtin" | "" => None,
            p => Some(manifest::resolve_path(&self.dir, Path::new(p))),
        }
    }

    /// The template set of the manifest.
    pub fn templates(&self) -> Result<TemplateSet, CampaignError> {
        Ok(crate::pipeline::load_templates(self.templates_path().as_deref())?.into_owned())
    }

    /// The redshift engine with the manifest's templates and settings.
    pub fn engine(&self) -> Result<Engine, CampaignError> {
        Ok(crate::pipeline::build_engine(
            self.templates_path().as_deref(),
            self.manifest.engine.clone(),
        )?)
    }

    /// Fit every object that has no cached fit (all when `refit`), in
    /// parallel, store the fits in `fits.jsonl` and attach them. Returns the
    /// number fitted and the objects that could not be fitted (id: reason).
    pub fn fit_objects(
        &self,
        objects: &mut [SurveyObject],
        refit: bool,
    ) -> Result<(usize, Vec<String>), CampaignError> {
        let engine = self.engine()?;
        let todo: Vec<usize> = (0..objects.len())
            .filter(|&i| refit || objects[i].fit.is_none())
            .collect();
        let spectra: Vec<&crate::Spectrum> = todo.iter().map(|&i| &objects[i].spectrum).collect();
        let results = crate::pipeline::fit_all(&engine, &spectra);
        let method = crate::pipeline::method_name(&engine);
        let mut records = Vec::new();
        let mut failed = Vec::new();
        for (i, r) in todo.into_iter().zip(results) {
            match r {
                Ok(f) => {
                    objects[i].fit = Some(f.clone());
                    records.push(crate::pipeline::FitRecord::fitted(
                        f,
                        &crate::pipeline::source_of(&objects[i].spectrum),
                        method,
                    ));
                }
                Err(e) => failed.push(format!("{}: {e}", objects[i].id())),
            }
        }
        self.save_records(&records)?;
        Ok((records.len(), failed))
    }
}
