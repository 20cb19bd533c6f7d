/*!
A review campaign: the objects under review and, on disk, a campaign folder
(manifest, cached fits, review logs, exports). (Folder handling: under construction.)
*/
use crate::catalog::CatalogRow;
use crate::fit::FitResult;
use crate::Spectrum;

/// One object under review: its spectrum, its catalogue row and its automatic fit.
#[derive(Debug, Clone)]
pub struct SurveyObject {
    /// The spectrum (its `meta.id` is the object id).
    pub spectrum: Spectrum,
    /// The photometric catalogue row, if the id matched.
    pub catalog: Option<CatalogRow>,
    /// The automatic fit, once computed.
    pub fit: Option<FitResult>,
}

impl SurveyObject {
    /// The object id.
    pub fn id(&self) -> &str {
        &self.spectrum.meta.id
    }
}
