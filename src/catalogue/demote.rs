//! Taking a burst back out of its source's list: a promotion that was a mistake
//! (the wrong source, or a candidate later judged interference) is undone without
//! losing anything the review produced. In one transaction the burst row goes, and
//! with it its barycentric TOA (a column of the burst); its candidate stays, with
//! its whole review history, to which a [`DEMOTED`] label is appended saying which
//! burst of which source it was and why. That label is then the candidate's
//! current one, so promoting by label again (`book promote --label-is burst`) does
//! not bring the burst back unasked, while promoting it by id, to any source, does.
//!
//! Promotion makes one event found by several search runs of an observation one
//! burst ([`super::same_event`]), so taking the burst back takes the event back:
//! the other runs' finds of it that are no burst themselves get the label too, or
//! a promotion by label would return the event through one of them.

use std::collections::HashSet;

use rusqlite::{Connection, OptionalExtension};
use serde::Serialize;

use super::review::append_label;
use super::same_event::same_event_as;
use super::{Catalogue, Label, catalogue_error};
use crate::error::{Error, Result};

/// The label a demotion appends to the review history of the burst's candidate.
pub const DEMOTED: &str = "demoted";

/// Who takes bursts back, why, and whether only to see what would go.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DemoteOptions<'a> {
    /// Who decided, as in a review label.
    pub reviewer: &'a str,
    /// Why; required, as it is what the catalogue keeps of the burst.
    pub comment: &'a str,
    /// Find what would be taken back and change nothing.
    pub dry_run: bool,
}

/// A burst taken back (or, in a dry run, that would be).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Demotion {
    /// The burst's id.
    pub burst_id: i64,
    /// The source it was a burst of.
    pub source: String,
    /// The candidate it was promoted from, which stays.
    pub candidate_id: i64,
    /// Topocentric UTC MJD of arrival at infinite frequency.
    pub mjd_utc: f64,
    /// DM in pc cm⁻³.
    pub dm: f64,
    /// Its stored barycentric TDB MJD, which goes with it.
    pub toa_tdb_mjd: Option<f64>,
    /// When it was promoted.
    pub promoted_utc: String,
    /// Finds of the same event by other search runs of its observation, no burst
    /// themselves, that are labelled [`DEMOTED`] too.
    pub same_event: Vec<i64>,
}

impl Catalogue {
    /// Takes the bursts `ids` back, all in one transaction (see the module docs):
    /// each burst row goes and each candidate it was promoted from, with the other
    /// runs' finds of its event, gets a [`DEMOTED`] label carrying `how.comment`.
    /// An id given twice is taken back once. With [`DemoteOptions::dry_run`] only
    /// says what would go.
    ///
    /// # Errors
    /// [`Error::Config`] for an empty comment; [`crate::Error::Catalogue`] naming
    /// every id that is no burst; an SQLite failure. Then nothing is changed.
    pub fn demote(&mut self, ids: &[i64], how: DemoteOptions<'_>) -> Result<Vec<Demotion>> {
        if how.comment.trim().is_empty() {
            return Err(Error::Config(
                "a demotion needs a comment saying why (the candidate's review history keeps it)"
                    .into(),
            ));
        }
        let path = self.path().to_path_buf();
        let now = super::now_utc();
        self.write_unless_dry_run(how.dry_run, |conn| {
            let sql = |e| super::sql_error(&path, e);
            let mut seen = HashSet::new();
            let (mut found, mut unknown) = (Vec::new(), Vec::new());
            for &id in ids.iter().filter(|&&id| seen.insert(id)) {
                match burst(conn, id).map_err(sql)? {
                    Some(d) => found.push(d),
                    None => unknown.push(id),
                }
            }
            if !unknown.is_empty() {
                return Err(catalogue_error(&path, refusal(&unknown)));
            }
            find_same_event(conn, &mut found).map_err(sql)?;
            if !how.dry_run {
                for d in &found {
                    take_back(conn, d, how, &now).map_err(sql)?;
                }
            }
            Ok(found)
        })
    }
}

/// Burst `id` as a [`Demotion`] with no same-event finds yet; `None` if there is
/// no such burst.
fn burst(conn: &Connection, id: i64) -> rusqlite::Result<Option<Demotion>> {
    conn.query_row(
        "SELECT b.candidate_id, s.name, b.mjd_utc, b.dm, b.toa_tdb_mjd, b.promoted_utc
         FROM burst b JOIN source s ON s.id = b.source_id WHERE b.id = ?1",
        [id],
        |r| {
            Ok(Demotion {
                burst_id: id,
                candidate_id: r.get(0)?,
                source: r.get(1)?,
                mjd_utc: r.get(2)?,
                dm: r.get(3)?,
                toa_tdb_mjd: r.get(4)?,
                promoted_utc: r.get(5)?,
                same_event: Vec::new(),
            })
        },
    )
    .optional()
}

/// Fills each demotion's finds of the same event by other runs, leaving out any
/// that is a burst (a twin promoted by an older burstbook stays a burst until taken
/// back itself) and any that is already labelled for an earlier one, so every
/// candidate gets one trace however the ids were given.
fn find_same_event(conn: &Connection, found: &mut [Demotion]) -> rusqlite::Result<()> {
    let mut traced: HashSet<i64> = found.iter().map(|d| d.candidate_id).collect();
    let mut is_burst = conn.prepare_cached("SELECT 1 FROM burst WHERE candidate_id = ?1")?;
    for d in found.iter_mut() {
        for x in same_event_as(conn, d.candidate_id)? {
            if !is_burst.exists([x])? && traced.insert(x) {
                d.same_event.push(x);
            }
        }
    }
    Ok(())
}

/// Removes `d`'s burst and appends the [`DEMOTED`] labels that record it.
fn take_back(
    conn: &Connection,
    d: &Demotion,
    how: DemoteOptions<'_>,
    now: &str,
) -> rusqlite::Result<()> {
    conn.execute("DELETE FROM burst WHERE id = ?1", [d.burst_id])?;
    let trace = |candidate_id, comment| Label {
        candidate_id,
        label: DEMOTED.into(),
        reviewer: how.reviewer.into(),
        labelled_utc: now.into(),
        comment,
    };
    let why = how.comment.trim();
    let own = format!(
        "was burst {} of {}, promoted {}: {why}",
        d.burst_id, d.source, d.promoted_utc
    );
    append_label(conn, &trace(d.candidate_id, own))?;
    for &x in &d.same_event {
        let twin = format!(
            "the event of burst {} of {} (candidate {}), taken back: {why}",
            d.burst_id, d.source, d.candidate_id
        );
        append_label(conn, &trace(x, twin))?;
    }
    Ok(())
}

/// The one line refusing ids that are no burst.
fn refusal(unknown: &[i64]) -> String {
    let ids: Vec<String> = unknown.iter().map(i64::to_string).collect();
    let noun = if unknown.len() == 1 {
        "burst"
    } else {
        "bursts"
    };
    format!("has no {noun} {}; nothing was demoted", ids.join(", "))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::synthetic::{
        add_other_source, assert_whole, candidate_ids, candidates, observation, row_counts, run,
        searched_twice,
    };
    use crate::catalogue::{AssignTolerance, BurstFilter, CandidateFilter};

    const TOL: AssignTolerance = AssignTolerance {
        radius_deg: 0.5,
        dm: 5.0,
    };
    const WHY: &str = "satellite on second look";
    const REAL: DemoteOptions = DemoteOptions {
        reviewer: "cleo",
        comment: WHY,
        dry_run: false,
    };
    const DRY: DemoteOptions = DemoteOptions {
        dry_run: true,
        ..REAL
    };

    /// One observation of FIELD-7 with six candidates, three labelled; the first
    /// two promoted to FIELD-7 (the first with its TOA), the third to OTHER. The
    /// candidate ids and the burst ids, in order.
    fn reviewed(dir: &std::path::Path) -> (Catalogue, Vec<i64>, Vec<i64>) {
        let mut cat = Catalogue::open(&dir.join("c.sqlite")).unwrap();
        let obs = observation("FIELD-7", 1);
        cat.record_search(&obs, &run(7.0), &candidates(&obs, 6, 1))
            .unwrap();
        add_other_source(&mut cat);
        let ids = candidate_ids(&cat, &CandidateFilter::default());
        cat.label(&ids[..3], "burst", "ana", "clear sweep").unwrap();
        cat.label(&ids[..1], "astrophysical", "ben", "").unwrap();
        let mut bursts: Vec<i64> = cat
            .promote_all(&ids[..2], Some("FIELD-7"), TOL)
            .unwrap()
            .iter()
            .map(|p| p.burst_id)
            .collect();
        bursts.push(cat.promote(ids[2], Some("OTHER"), TOL).unwrap().burst_id);
        cat.set_barycentric_toas(&[(bursts[0], 60001.5)]).unwrap();
        (cat, ids, bursts)
    }

    /// Every candidate as the search recorded it, with its run and observation:
    /// what a demotion must leave as it was.
    fn recorded(cat: &Catalogue) -> Vec<String> {
        let rows = cat.candidates(&CandidateFilter::default()).unwrap();
        rows.iter()
            .map(|r| {
                format!(
                    "{} {} {} {:?}",
                    r.id, r.run_id, r.observation_id, r.candidate
                )
            })
            .collect()
    }

    fn labelled(cat: &Catalogue, label: &str) -> Vec<i64> {
        let only = CandidateFilter {
            label: Some(label.into()),
            ..Default::default()
        };
        candidate_ids(cat, &only)
    }

    fn n_bursts(cat: &Catalogue, source: &str) -> u64 {
        cat.summary(source, None, 0.95).unwrap().n_bursts
    }

    #[test]
    fn demoting_removes_the_burst_and_keeps_the_candidate_with_a_trace() {
        let dir = tempfile::tempdir().unwrap();
        let (mut cat, ids, bursts) = reviewed(dir.path());
        let before = row_counts(&cat);
        assert_eq!(before, [2, 1, 1, 6, 1, 3, 4, 0]);
        let candidates = recorded(&cat);
        let history = cat.label_history(ids[0]).unwrap();
        let mut kept_bursts = cat.bursts(&BurstFilter::default()).unwrap();
        kept_bursts.retain(|b| b.id != bursts[0]);
        assert_eq!((n_bursts(&cat, "FIELD-7"), n_bursts(&cat, "OTHER")), (2, 1));

        let would = cat.demote(&[bursts[0], bursts[0]], DRY).unwrap();
        assert_eq!(row_counts(&cat), before, "a dry run changed something");
        let done = cat.demote(&[bursts[0]], REAL).unwrap();
        assert_eq!(done, would, "the dry run says what goes");
        let all = cat.candidates(&CandidateFilter::default()).unwrap();
        let first = all.iter().find(|r| r.id == ids[0]).unwrap();
        let d = &done[0];
        assert_eq!(done.len(), 1);
        assert_eq!(
            (d.burst_id, d.source.as_str(), d.candidate_id),
            (bursts[0], "FIELD-7", ids[0])
        );
        assert_eq!(
            (d.mjd_utc, d.dm),
            (first.candidate.mjd_inf, first.candidate.dm)
        );
        assert_eq!(d.toa_tdb_mjd, Some(60001.5));
        assert!(d.same_event.is_empty());

        // One burst fewer, one label more, every other row as it was.
        assert_eq!(row_counts(&cat), [2, 1, 1, 6, 1, 2, 5, 0]);
        assert_eq!(recorded(&cat), candidates);
        assert_eq!(cat.bursts(&BurstFilter::default()).unwrap(), kept_bursts);
        let now = cat.label_history(ids[0]).unwrap();
        assert_eq!(now[..2], history[..]);
        let trace = &now[2];
        assert_eq!(
            (trace.label.as_str(), trace.reviewer.as_str()),
            (DEMOTED, "cleo")
        );
        let promoted = &d.promoted_utc;
        assert_eq!(
            trace.comment,
            format!(
                "was burst {} of FIELD-7, promoted {promoted}: {WHY}",
                bursts[0]
            )
        );
        assert_eq!(labelled(&cat, DEMOTED), [ids[0]]);
        assert_eq!(labelled(&cat, "burst"), [ids[1], ids[2]]);
        assert_eq!((n_bursts(&cat, "FIELD-7"), n_bursts(&cat, "OTHER")), (1, 1));
        assert_eq!(cat.burst_timing("FIELD-7").unwrap().len(), 1);
        assert_whole(&cat);

        // Gone is gone; the candidate can be promoted again, to another source,
        // and its old TOA does not come back with it.
        let err = cat.demote(&[bursts[0]], REAL).unwrap_err().to_string();
        assert!(
            err.ends_with(&format!("has no burst {}; nothing was demoted", bursts[0])),
            "{err}"
        );
        let again = cat.promote(ids[0], Some("OTHER"), TOL).unwrap();
        assert!(again.new && again.same_event_as.is_none());
        assert_eq!((n_bursts(&cat, "FIELD-7"), n_bursts(&cat, "OTHER")), (1, 2));
        let timing = cat.burst_timing("OTHER").unwrap();
        let back = timing.iter().find(|b| b.burst_id == again.burst_id);
        assert_eq!(back.unwrap().toa_tdb_mjd, None);
        assert_eq!(cat.label_history(ids[0]).unwrap(), now);
        assert_eq!(row_counts(&cat), [2, 1, 1, 6, 1, 3, 5, 0]);
        assert_whole(&cat);
        // The newest burst's id, taken back, is not given again.
        cat.demote(&[again.burst_id], REAL).unwrap();
        let next = cat.promote(ids[3], Some("OTHER"), TOL).unwrap();
        assert_eq!(next.burst_id, again.burst_id + 1);
    }

    /// An unknown id anywhere in the list, a missing reason or a failure part-way
    /// (a trigger refusing the trace, after the first burst went) leaves every row
    /// where it was.
    #[test]
    fn a_refused_or_failed_demotion_changes_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let (mut cat, _, bursts) = reviewed(dir.path());
        let before = row_counts(&cat);
        for how in [REAL, DRY] {
            let list = [bursts[1], 999, bursts[2], 998, 999];
            let err = cat.demote(&list, how).unwrap_err().to_string();
            assert!(
                err.ends_with("has no bursts 999, 998; nothing was demoted"),
                "{err}"
            );
            let err = cat.demote(
                &[bursts[1]],
                DemoteOptions {
                    comment: " ",
                    ..how
                },
            );
            let err = err.unwrap_err().to_string();
            assert!(
                err.contains("a demotion needs a comment saying why"),
                "{err}"
            );
            assert_eq!(row_counts(&cat), before);
        }
        cat.conn()
            .execute_batch(
                "CREATE TRIGGER keep_reviews BEFORE INSERT ON review_label
                 BEGIN SELECT RAISE(ABORT, 'reviews are closed'); END",
            )
            .unwrap();
        let err = cat.demote(&bursts, REAL).unwrap_err().to_string();
        assert!(err.contains("reviews are closed"), "{err}");
        assert_eq!(row_counts(&cat), before);
        // A dry run writes no label, so the trigger does not stop it.
        assert_eq!(cat.demote(&bursts, DRY).unwrap().len(), 3);
    }

    /// One event found by two runs is one burst; taking it back labels the other
    /// run's find as well, so that promoting by label does not return it, while by
    /// id it is promoted again and the first find then counts as its event. A twin
    /// burst an older burstbook made is taken back alone, its pair left a burst.
    #[test]
    fn the_event_goes_back_with_its_burst() {
        let dir = tempfile::tempdir().unwrap();
        let (mut cat, ids) = searched_twice(dir.path());
        // ids: the first run's two events, the second run's finds of them, a flash.
        let p = cat.promote_all(&ids[..2], Some("FIELD-7"), TOL).unwrap();
        cat.label(&[ids[2]], "burst", "ana", "").unwrap();
        let before = row_counts(&cat);
        assert_eq!(before, [1, 1, 2, 5, 2, 2, 1, 0]);

        let would = cat.demote(&[p[0].burst_id], DRY).unwrap();
        assert_eq!(row_counts(&cat), before);
        let done = cat.demote(&[p[0].burst_id], REAL).unwrap();
        assert_eq!(done, would);
        assert_eq!(done[0].same_event, [ids[2]]);
        assert_eq!(row_counts(&cat), [1, 1, 2, 5, 2, 1, 3, 0]);
        let twin = cat.label_history(ids[2]).unwrap();
        assert_eq!(twin.len(), 2);
        assert_eq!(
            (twin[1].label.as_str(), twin[1].comment.clone()),
            (
                DEMOTED,
                format!(
                    "the event of burst {} of FIELD-7 (candidate {}), taken back: {WHY}",
                    p[0].burst_id, ids[0]
                )
            )
        );
        assert_eq!(labelled(&cat, DEMOTED), [ids[0], ids[2]]);
        assert_eq!(labelled(&cat, "none"), [ids[1], ids[3], ids[4]]);

        // By id, through the other run's find: a new burst, which the first find
        // is then the event of.
        let again = cat.promote(ids[2], Some("FIELD-7"), TOL).unwrap();
        assert!(again.new && again.same_event_as.is_none());
        let first = cat.promote(ids[0], Some("FIELD-7"), TOL).unwrap();
        assert_eq!(
            (first.burst_id, first.new, first.same_event_as),
            (again.burst_id, false, Some(ids[2]))
        );
        assert!(cat.twin_bursts().unwrap().is_empty());

        // As an older burstbook left it: the second event promoted twice.
        cat.conn()
            .execute(
                "INSERT INTO burst (candidate_id, source_id, mjd_utc, snr, width_ms, dm,
                     promoted_utc)
                 SELECT id, 1, mjd_inf, snr, width_ms, dm, 'then' FROM candidate WHERE id = ?1",
                [ids[3]],
            )
            .unwrap();
        let extra = cat.conn().last_insert_rowid();
        assert_eq!(cat.twin_bursts().unwrap().len(), 1);
        let done = cat.demote(&[extra], REAL).unwrap();
        assert!(done[0].same_event.is_empty(), "its pair is a burst");
        assert!(cat.twin_bursts().unwrap().is_empty());
        assert!(cat.label_history(ids[1]).unwrap().is_empty());
        let left: Vec<i64> = cat
            .bursts(&BurstFilter::default())
            .unwrap()
            .iter()
            .map(|b| b.candidate_id)
            .collect();
        assert_eq!(left.len(), 2);
        assert!(left.contains(&ids[1]) && left.contains(&ids[2]));
        assert_whole(&cat);
    }
}
