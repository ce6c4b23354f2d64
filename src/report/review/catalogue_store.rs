//! The catalogue as the review page's label store: candidates come from a filtered
//! query, labels are appended to the catalogue's review-label history.

use std::path::PathBuf;

use super::store::{LabelStore, ReviewItem, ReviewLabel};
use crate::catalogue::{CandidateFilter, Catalogue};
use crate::error::Result;

/// Reviews the catalogue's candidates that match `filter`, highest S/N first.
pub struct CatalogueStore {
    pub catalogue: Catalogue,
    pub filter: CandidateFilter,
    /// Name recorded with every label.
    pub reviewer: String,
    /// Folder to look in (by file name) when a recorded observation path is gone.
    pub obs_dir: Option<PathBuf>,
}

impl LabelStore for CatalogueStore {
    fn items(&mut self) -> Result<Vec<ReviewItem>> {
        let mut rows = self.catalogue.candidates(&self.filter)?;
        rows.sort_by(|a, b| b.candidate.snr.total_cmp(&a.candidate.snr));
        Ok(rows
            .into_iter()
            .map(|r| {
                let recorded = PathBuf::from(&r.candidate.file);
                let obs_path = match (&self.obs_dir, recorded.file_name()) {
                    (Some(dir), Some(name)) if !recorded.exists() => Some(dir.join(name)),
                    _ => None,
                };
                ReviewItem {
                    id: r.id,
                    candidate: r.candidate,
                    label: r.label,
                    obs_path,
                }
            })
            .collect())
    }

    fn record(&mut self, id: i64, label: ReviewLabel, comment: &str) -> Result<()> {
        self.catalogue
            .label(&[id], label.as_str(), &self.reviewer, comment)
    }
}
