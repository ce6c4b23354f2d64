//! What the review page needs from wherever labels live: the candidates to walk
//! through and a way to append a label. The catalogue implements it; tests can use
//! [`MemoryStore`].

use std::path::PathBuf;

use crate::candidate::Candidate;
use crate::error::{Error, Result};

/// One candidate to review.
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewItem {
    /// Stable id the label is recorded against.
    pub id: i64,
    pub candidate: Candidate,
    /// Newest label, if any.
    pub label: Option<String>,
    /// Observation file the figure is drawn from (the candidate's own `file` if `None`).
    pub obs_path: Option<PathBuf>,
}

impl ReviewItem {
    /// The observation file to re-read for this item's figure.
    pub fn observation(&self) -> PathBuf {
        self.obs_path
            .clone()
            .unwrap_or_else(|| PathBuf::from(&self.candidate.file))
    }
}

/// A label given on the review page.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReviewLabel {
    Astrophysical,
    Interference,
    Unsure,
}

impl ReviewLabel {
    /// The text stored in the label history (the verdict vocabulary of triage).
    pub fn as_str(self) -> &'static str {
        match self {
            ReviewLabel::Astrophysical => "astrophysical",
            ReviewLabel::Interference => "rfi",
            ReviewLabel::Unsure => "unsure",
        }
    }

    /// Parses the stored text.
    pub fn parse(s: &str) -> Option<ReviewLabel> {
        [
            ReviewLabel::Astrophysical,
            ReviewLabel::Interference,
            ReviewLabel::Unsure,
        ]
        .into_iter()
        .find(|l| l.as_str() == s)
    }
}

/// Where review labels are read from and appended to.
pub trait LabelStore: Send {
    /// The candidates to review, in the order to show them.
    ///
    /// # Errors
    /// The store cannot be read.
    fn items(&mut self) -> Result<Vec<ReviewItem>>;

    /// Appends `label` (with a free-text `comment`, possibly empty) to candidate `id`'s
    /// label history.
    ///
    /// # Errors
    /// Unknown id, or the store cannot be written.
    fn record(&mut self, id: i64, label: ReviewLabel, comment: &str) -> Result<()>;
}

/// Labels kept in memory (lost on exit): for tests of the page and server.
#[derive(Debug, Clone, Default)]
pub struct MemoryStore {
    pub items: Vec<ReviewItem>,
    /// Every label recorded, in order: `(id, label, comment)`.
    pub history: Vec<(i64, ReviewLabel, String)>,
}

impl LabelStore for MemoryStore {
    fn items(&mut self) -> Result<Vec<ReviewItem>> {
        Ok(self.items.clone())
    }

    fn record(&mut self, id: i64, label: ReviewLabel, comment: &str) -> Result<()> {
        let item = self
            .items
            .iter_mut()
            .find(|i| i.id == id)
            .ok_or_else(|| Error::Config(format!("no candidate {id} to label")))?;
        item.label = Some(label.as_str().to_string());
        self.history.push((id, label, comment.to_string()));
        Ok(())
    }
}
