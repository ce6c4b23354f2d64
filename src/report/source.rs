//! A source's report from the catalogue: its candidates grouped by observation, and a
//! timeline of the sessions that covered it and its confirmed bursts.

use std::path::{Path, PathBuf};

use super::figure::CaptionedFigure;
use super::html::ObsSection;
use super::load::group_by_observation;
use super::periodicity::timeline_figure;
use crate::catalogue::{BurstFilter, CandidateFilter, Catalogue};
use crate::error::{Error, Result};

/// Everything `write_report` needs for `source`: one section per observation holding
/// its catalogued candidates, and the sessions/bursts timeline when there is exposure.
/// Observation files are found as recorded, or by name in `obs_dir`.
///
/// # Errors
/// Unknown source (no candidates and no exposure), a missing observation file, or a
/// catalogue failure.
pub fn source_report(
    cat: &Catalogue,
    source: &str,
    obs_dir: Option<&Path>,
) -> Result<(Vec<ObsSection>, Vec<CaptionedFigure>)> {
    let cands = cat.candidates(&CandidateFilter {
        source: Some(source.to_string()),
        ..CandidateFilter::default()
    })?;
    let sessions = cat.merged_exposure(source, None).unwrap_or_default();
    if cands.is_empty() && sessions.is_empty() {
        return Err(Error::Catalogue {
            path: cat.path().to_path_buf(),
            msg: format!("has no candidates or exposure for source {source:?}"),
        });
    }
    let in_dir: Vec<PathBuf> = match obs_dir {
        Some(dir) => cands
            .iter()
            .filter_map(|r| Path::new(&r.candidate.file).file_name())
            .map(|name| dir.join(name))
            .filter(|p| p.exists())
            .collect(),
        None => Vec::new(),
    };
    let groups = group_by_observation(
        cands.into_iter().map(|r| r.candidate).collect(),
        None,
        &in_dir,
    )?;
    let sections = groups
        .into_iter()
        .map(|(path, cs)| ObsSection::new(&path, cs))
        .collect::<Result<Vec<_>>>()?;
    let bursts: Vec<f64> = cat
        .bursts(&BurstFilter {
            source: Some(source.to_string()),
            ..BurstFilter::default()
        })?
        .iter()
        .map(|b| b.mjd_utc)
        .collect();
    let mut lead = Vec::new();
    if !sessions.is_empty() || !bursts.is_empty() {
        lead.push((
            format!("{source}: observing sessions and confirmed bursts"),
            timeline_figure(&sessions, &bursts, &[])?,
        ));
    }
    Ok((sections, lead))
}
