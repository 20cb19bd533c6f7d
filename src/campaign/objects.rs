/*!
The objects of a campaign: catalogue rows through the manifest's column
mapping, spectra through the readers, joined by id with their cached fits;
and the redshift engine that fills the fit cache.
*/
use super::{manifest, Campaign, CampaignError, SurveyObject};
use crate::catalog::{CatalogRow, ColumnMap};
use crate::fit::{Engine, FitResult};
use crate::templates::TemplateSet;
use crate::Spectrum;
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

    /// Every object: the spectra of all inputs, joined with the catalogue by
    /// id, with their cached fits. A file that cannot be read, a repeated id
    /// or a catalogue/fit-cache problem is reported and the rest loads.
    pub fn load_objects(&self) -> Result<(Vec<SurveyObject>, Vec<String>), CampaignError> {
        let opts = self.read_options();
        let mut problems = Vec::new();
        let mut spectra: Vec<Spectrum> = Vec::new();
        let inputs = self.spectra_paths();
        for p in &inputs {
            if !p.exists() {
                problems.push(format!("{}: input not found", p.display()));
            }
        }
        for file in crate::io::expand_inputs(&inputs) {
            match crate::io::read_file(&file, &opts) {
                Ok(mut v) => spectra.append(&mut v),
                Err(e) => problems.push(e.to_string()),
            }
        }
        let mut seen = std::collections::HashSet::new();
        spectra.retain(|s| {
            let fresh = seen.insert(s.meta.id.clone());
            if !fresh {
                problems.push(format!(
                    "object id '{}' appears more than once ({}); the first spectrum is used",
                    s.meta.id,
                    s.meta
                        .source
                        .as_ref()
                        .map_or("?".into(), |p| p.display().to_string())
                ));
            }
            fresh
        });
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

    /// The template set of the manifest.
    pub fn templates(&self) -> Result<TemplateSet, CampaignError> {
        match self.manifest.templates.as_str() {
            "builtin" | "" => Ok(crate::templates::builtin().clone()),
            p => Ok(crate::templates::read_set(&manifest::resolve_path(
                &self.dir,
                Path::new(p),
            ))?),
        }
    }

    /// The redshift engine with the manifest's templates and settings.
    pub fn engine(&self) -> Result<Engine, CampaignError> {
        let config = self.manifest.engine.clone();
        match self.manifest.templates.as_str() {
            "builtin" | "" => Ok(Engine::new(crate::templates::builtin(), config)?),
            _ => Ok(Engine::new(&self.templates()?, config)?),
        }
    }

    /// Fit every object that has no cached fit (all when `refit`), in
    /// parallel, store the fits in `fits.jsonl` and attach them. Returns the
    /// number fitted and the objects that could not be fitted (id: reason).
    pub fn fit_objects(
        &self,
        objects: &mut [SurveyObject],
        refit: bool,
    ) -> Result<(usize, Vec<String>), CampaignError> {
        use rayon::prelude::*;
        let engine = self.engine()?;
        let results: Vec<(usize, Result<FitResult, String>)> = objects
            .par_iter()
            .enumerate()
            .filter(|(_, o)| refit || o.fit.is_none())
            .map(|(i, o)| (i, engine.fit(&o.spectrum).map_err(|e| format!("{}: {e}", o.id()))))
            .collect();
        let mut fitted = Vec::new();
        let mut failed = Vec::new();
        for (i, r) in results {
            match r {
                Ok(f) => {
                    objects[i].fit = Some(f.clone());
                    fitted.push(f);
                }
                Err(e) => failed.push(e),
            }
        }
        self.save_fits(&fitted)?;
        Ok((fitted.len(), failed))
    }
}
