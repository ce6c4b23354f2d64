//! A source's report from the catalogue: its candidates grouped by observation, and
//! the activity-cycle figures of its confirmed bursts against its sessions (or just
//! their timeline when there are too few for a search).

use std::path::Path;

use super::activity::activity_figures;
use super::figure::CaptionedFigure;
use super::html::ObsSection;
use super::load::{ObsLookup, group_by_observation};
use super::periodicity::timeline_figure;
use crate::catalogue::{BurstFilter, CandidateFilter, Catalogue};
use crate::error::{Error, Result};
use crate::period::activity::{ActivityConfig, search_activity};

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
    let groups = group_by_observation(
        cands.into_iter().map(|r| r.candidate).collect(),
        None,
        ObsLookup::Dir(obs_dir),
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
        // UTC like the exposure: TDB would push bursts near a session's end outside it,
        // and at activity time scales (hours to days) UTC loses nothing.
        .map(|b| b.mjd_utc)
        .collect();
    let mut lead = Vec::new();
    match activity(&sessions, &bursts) {
        Ok(figures) => lead.extend(figures),
        Err(why) if !sessions.is_empty() || !bursts.is_empty() => lead.push((
            format!(
                "{source}: observing sessions and confirmed bursts (no activity search: {why})"
            ),
            timeline_figure(&sessions, &bursts, &[])?,
        )),
        Err(_) => {}
    }
    Ok((sections, lead))
}

/// Activity-cycle search (default settings) on the bursts and sessions, as figures.
fn activity(sessions_mjd: &[(f64, f64)], bursts_mjd: &[f64]) -> Result<Vec<CaptionedFigure>> {
    let ref_mjd = sessions_mjd
        .iter()
        .map(|s| s.0)
        .chain(bursts_mjd.iter().copied())
        .fold(f64::INFINITY, f64::min);
    if !ref_mjd.is_finite() {
        return Err(Error::Config("no sessions or bursts".into()));
    }
    let ref_mjd = ref_mjd.floor() as i64;
    let days = |m: f64| m - ref_mjd as f64;
    let sessions: Vec<(f64, f64)> = sessions_mjd
        .iter()
        .map(|&(a, b)| (days(a), days(b)))
        .collect();
    let t: Vec<f64> = bursts_mjd.iter().map(|&m| days(m)).collect();
    let r = search_activity(&t, &sessions, ref_mjd, &ActivityConfig::default(), &|_| {})?;
    activity_figures(&r, sessions_mjd, bursts_mjd)
}
