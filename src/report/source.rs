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
    let sessions = cat.merged_exposure(source, None)?;
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
    let (inside, outside) = inside_sessions(&sessions, &bursts);
    match activity(&sessions, &inside) {
        Ok(mut figures) => {
            if let (1.., Some(first)) = (outside, figures.first_mut()) {
                first.0 += &format!("; {outside} burst(s) outside every session left out");
            }
            lead.extend(figures)
        }
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

/// The bursts (UTC MJD) inside a session, and how many are not. A burst promoted from
/// another pointing's search arrived while the source was not being searched, and an
/// exposure-aware fold has no place for it: as `book summary` leaves it out of the
/// rate and `period activity --source` out of the fold, the report leaves it out of
/// the search (it refused the search over one such burst).
fn inside_sessions(sessions_mjd: &[(f64, f64)], bursts_mjd: &[f64]) -> (Vec<f64>, usize) {
    let inside: Vec<f64> = bursts_mjd
        .iter()
        .copied()
        .filter(|t| sessions_mjd.iter().any(|&(a, b)| (a..=b).contains(t)))
        .collect();
    let outside = bursts_mjd.len() - inside.len();
    (inside, outside)
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

#[cfg(test)]
mod tests {
    use super::*;

    /// Bursts in the first 3 days of a 16-day cycle, seen in 6-hour sessions every 2
    /// days over 192 days, and one burst between sessions: the search refuses all of
    /// them and runs on the others.
    #[test]
    fn a_burst_outside_every_session_is_left_out_of_the_search() {
        let sessions: Vec<(f64, f64)> = (0..96)
            .map(|d| 60_000.0 + 2.0 * d as f64)
            .map(|s| (s, s + 0.25))
            .collect();
        let mut bursts: Vec<f64> = sessions
            .iter()
            .filter(|s| (s.0 - 60_000.0).rem_euclid(16.0) < 3.0)
            .map(|s| s.0 + 0.1)
            .collect();
        let n = bursts.len();
        bursts.push(60_001.0);
        let (inside, outside) = inside_sessions(&sessions, &bursts);
        assert_eq!((inside.len(), outside), (n, 1));
        assert!(activity(&sessions, &bursts).is_err());
        let figures = activity(&sessions, &inside).unwrap();
        assert_eq!(figures.len(), 3);
    }
}
