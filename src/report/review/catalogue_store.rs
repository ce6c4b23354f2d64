//! The catalogue as the review page's label store: candidates come from a filtered
//! query, labels are appended to the catalogue's review-label history.

use std::path::PathBuf;

use super::store::{LabelStore, ReviewItem, ReviewLabel};
use crate::catalogue::{CandidateFilter, Catalogue};
use crate::error::Result;
use crate::report::load::{ObsLookup, locate};

/// Reviews the catalogue's candidates that match `filter`, highest S/N first.
pub struct CatalogueStore {
    pub catalogue: Catalogue,
    pub filter: CandidateFilter,
    /// Name recorded with every label.
    pub reviewer: String,
    /// Folder holding moved observation files, looked in by file name ahead of the
    /// recorded paths, as `report --obs-dir` does.
    pub obs_dir: Option<PathBuf>,
}

impl LabelStore for CatalogueStore {
    fn items(&mut self) -> Result<Vec<ReviewItem>> {
        let mut rows = self.catalogue.candidates(&self.filter)?;
        rows.sort_by(|a, b| b.candidate.snr.total_cmp(&a.candidate.snr));
        Ok(rows
            .into_iter()
            .map(|r| {
                let lookup = ObsLookup::Dir(self.obs_dir.as_deref());
                let obs_path = locate(&r.candidate.file, None, lookup);
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
            .map(|_| ())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::synthetic::{candidates, observation, run};

    /// A moved observation is found in the folder by name, as `report --obs-dir` finds
    /// it; without the folder the recorded path stands.
    #[test]
    fn moved_observations_are_found_in_the_folder_by_name() {
        let dir = tempfile::tempdir().unwrap();
        let obs = observation("SRC", 3);
        let mut cands = candidates(&obs, 2, 3);
        let gone = dir.path().join("gone").join("scan.json");
        cands
            .iter_mut()
            .for_each(|c| c.file = gone.display().to_string());
        let mut catalogue = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        catalogue.record_search(&obs, &run(7.0), &cands).unwrap();
        let moved = dir.path().join("moved");
        std::fs::create_dir(&moved).unwrap();
        std::fs::write(moved.join("scan.json"), "{}").unwrap();
        let mut store = CatalogueStore {
            catalogue,
            filter: CandidateFilter::default(),
            reviewer: "tester".into(),
            obs_dir: Some(moved.clone()),
        };
        let items = store.items().unwrap();
        assert_eq!(items.len(), 2);
        assert!(
            items
                .iter()
                .all(|i| i.observation() == moved.join("scan.json"))
        );
        store.obs_dir = None;
        let items = store.items().unwrap();
        assert!(items.iter().all(|i| i.observation() == gone));
    }
}
