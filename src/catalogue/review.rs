//! Human review: labels kept as history, and promotion of candidates to bursts of a
//! source (by hand or by position and DM).

use std::path::Path;

use rusqlite::{Connection, OptionalExtension, Transaction, named_params, params};
use serde::Serialize;

use super::same_event::SAME_EVENT;
use super::{Catalogue, SourceRecord, catalogue_error};
use crate::error::{Error, Result};
use crate::units::DISPERSION_CONSTANT_S_MHZ2;

/// One judgement of one candidate. Labels are appended, never changed.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Label {
    /// Candidate id.
    pub candidate_id: i64,
    /// The label, free text such as `burst`, `rfi`, `noise`.
    pub label: String,
    /// Who judged.
    pub reviewer: String,
    /// When (ISO 8601 UTC).
    pub labelled_utc: String,
    /// Free text.
    pub comment: String,
}

/// How close a candidate must be to a source to be assigned to it automatically.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AssignTolerance {
    /// Largest angular distance between the observation pointing and the source, degrees.
    pub radius_deg: f64,
    /// Largest |DM − reference DM| in pc cm⁻³.
    pub dm: f64,
}

/// What promoting a candidate did.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Promotion {
    /// The burst's id.
    pub burst_id: i64,
    /// The source it belongs to.
    pub source: String,
    /// False when the candidate already was a burst (nothing changed).
    pub new: bool,
    /// When the burst was promoted from another candidate: that candidate's id (the
    /// same event found by another search run of the observation).
    pub same_event_as: Option<i64>,
}

impl Catalogue {
    /// Appends the same label to each candidate in `ids`, in one transaction, once
    /// per candidate however often its id is given (`book label 1 1` wrote two
    /// identical history rows); returns how many candidates were labelled.
    ///
    /// # Errors
    /// An id that is not in the catalogue (then nothing is labelled), an empty
    /// label, or an SQLite failure.
    pub fn label(
        &mut self,
        ids: &[i64],
        label: &str,
        reviewer: &str,
        comment: &str,
    ) -> Result<usize> {
        if label.trim().is_empty() {
            return Err(Error::Config("label is empty".into()));
        }
        let path = self.path().to_path_buf();
        let now = super::now_utc();
        self.write(|tx| {
            let mut done = std::collections::HashSet::new();
            for &id in ids.iter().filter(|&&id| done.insert(id)) {
                require_candidate(tx, &path, id, "; nothing labelled")?;
                let entry = Label {
                    candidate_id: id,
                    label: label.into(),
                    reviewer: reviewer.into(),
                    labelled_utc: now.clone(),
                    comment: comment.into(),
                };
                append_label(tx, &entry).map_err(|e| super::sql_error(&path, e))?;
            }
            Ok(done.len())
        })
    }

    /// Every label given to candidate `id`, oldest first.
    ///
    /// # Errors
    /// An id that is not in the catalogue, or an SQLite failure.
    pub fn label_history(&self, id: i64) -> Result<Vec<Label>> {
        require_candidate(self.conn(), self.path(), id, "")?;
        let mut stmt = self
            .conn()
            .prepare(
                "SELECT candidate_id, label, reviewer, labelled_utc, comment FROM review_label
                 WHERE candidate_id = ?1 ORDER BY id",
            )
            .map_err(|e| self.err(e))?;
        let rows = stmt
            .query_map([id], |r| {
                Ok(Label {
                    candidate_id: r.get(0)?,
                    label: r.get(1)?,
                    reviewer: r.get(2)?,
                    labelled_utc: r.get(3)?,
                    comment: r.get(4)?,
                })
            })
            .map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<_>>()
            .map_err(|e| self.err(e))
    }

    /// Makes candidate `id` a burst of `source`, or, when `source` is `None`, of the
    /// single source with a reference DM that lies within `tol` of the candidate's
    /// pointing and DM. A candidate already promoted is left as it is, and so is one
    /// whose event another search run of its observation found and had promoted
    /// (`same_event_as` names that candidate): one event, one burst.
    ///
    /// # Errors
    /// Unknown candidate or source; no source or several sources within tolerance.
    pub fn promote(
        &mut self,
        id: i64,
        source: Option<&str>,
        tol: AssignTolerance,
    ) -> Result<Promotion> {
        let mut done = self.promote_all(&[id], source, tol)?;
        Ok(done.pop().expect("one promotion per id"))
    }

    /// Promotes every candidate in `ids`, all or nothing: each one's source is settled
    /// first, so one candidate without a matching source leaves the catalogue as it was.
    ///
    /// # Errors
    /// As [`Catalogue::promote`], for the first candidate at fault.
    pub fn promote_all(
        &mut self,
        ids: &[i64],
        source: Option<&str>,
        tol: AssignTolerance,
    ) -> Result<Vec<Promotion>> {
        for &id in ids {
            require_candidate(self.conn(), self.path(), id, "; nothing promoted")?;
        }
        let chosen = ids
            .iter()
            .map(|&id| match source {
                Some(name) => self.source(name).map(Some),
                // A burst already stays as it is, so it needs no match (the sources
                // may have changed since, and re-running a promotion must not fail).
                None if held_burst(self.conn(), id)
                    .map_err(|e| self.err(e))?
                    .is_some() =>
                {
                    Ok(None)
                }
                None => self.match_source(id, tol).map(Some),
            })
            .collect::<Result<Vec<_>>>()?;
        let path = self.path().to_path_buf();
        self.write(|tx| {
            ids.iter()
                .zip(&chosen)
                .map(|(&id, src)| {
                    promote_in(tx, id, src.as_ref())
                        .map_err(|e| super::sql_error(&path, e))?
                        .ok_or_else(|| catalogue_error(&path, changed_meanwhile(id)))
                })
                .collect()
        })
    }

    /// The unique source within `tol` of candidate `id`.
    fn match_source(&self, id: i64, tol: AssignTolerance) -> Result<SourceRecord> {
        let (ra, dec, dm): (f64, f64, f64) = self
            .conn()
            .query_row(
                "SELECT o.ra_deg, o.dec_deg, c.dm FROM candidate c
                 JOIN search_run r ON r.id = c.run_id JOIN observation o ON o.id = r.observation_id
                 WHERE c.id = ?1",
                [id],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
            )
            .optional()
            .map_err(|e| self.err(e))?
            .ok_or_else(|| catalogue_error(self.path(), format!("has no candidate {id}")))?;
        let near: Vec<SourceRecord> = self
            .sources()?
            .into_iter()
            .filter(|s| s.separation_deg(ra, dec) <= tol.radius_deg)
            .filter(|s| s.dm_ref.is_some_and(|d| (d - dm).abs() <= tol.dm))
            .collect();
        match near.len() {
            1 => Ok(near.into_iter().next().expect("one element")),
            0 => Err(catalogue_error(
                self.path(),
                format!(
                    "no source with a reference DM lies within {} deg and {} pc cm^-3 of candidate {id} (DM {dm:.2}); name one with --to",
                    tol.radius_deg, tol.dm
                ),
            )),
            _ => Err(catalogue_error(
                self.path(),
                format!(
                    "candidate {id} matches several sources ({}); name one with --to",
                    near.iter()
                        .map(|s| s.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )),
        }
    }
}

/// Appends `entry` to its candidate's review history (the candidate must exist).
pub(super) fn append_label(conn: &Connection, entry: &Label) -> rusqlite::Result<()> {
    conn.prepare_cached(
        "INSERT INTO review_label (candidate_id, label, reviewer, labelled_utc, comment)
         VALUES (?1, ?2, ?3, ?4, ?5)",
    )?
    .execute(params![
        entry.candidate_id,
        entry.label,
        entry.reviewer,
        entry.labelled_utc,
        entry.comment
    ])
    .map(drop)
}

/// Why candidate `id` could not be promoted after all: another process demoted its
/// burst or forgot it between choosing its source and writing.
fn changed_meanwhile(id: i64) -> String {
    format!(
        "candidate {id} changed while being promoted (its burst taken back, or its \
         observation forgotten, by another process); nothing promoted, promote again"
    )
}

/// Refuses an `id` that is not a candidate of the catalogue at `path`; `then` ends
/// the message (what was therefore not done).
fn require_candidate(conn: &Connection, path: &Path, id: i64, then: &str) -> Result<()> {
    let found = conn
        .prepare_cached("SELECT 1 FROM candidate WHERE id = ?1")
        .and_then(|mut q| q.exists([id]))
        .map_err(|e| super::sql_error(path, e))?;
    if found {
        Ok(())
    } else {
        Err(catalogue_error(
            path,
            format!("has no candidate {id}{then}"),
        ))
    }
}

/// A burst that candidate `id` already is.
struct HeldBurst {
    burst_id: i64,
    source: String,
    /// The candidate the burst was promoted from, when that is not `id` itself.
    same_event_as: Option<i64>,
}

/// The burst of candidate `id`: its own, or that of the same event found by another
/// search run of its observation (re-searched with another configuration; see
/// [`super::same_event`]).
fn held_burst(conn: &Connection, id: i64) -> rusqlite::Result<Option<HeldBurst>> {
    conn.prepare_cached(&format!(
        "SELECT b.id, s.name, c.id FROM candidate x
         JOIN search_run rx ON rx.id = x.run_id
         JOIN observation o ON o.id = rx.observation_id
         JOIN search_run r ON r.observation_id = rx.observation_id
         JOIN candidate c ON c.run_id = r.id
         JOIN burst b ON b.candidate_id = c.id
         JOIN source s ON s.id = b.source_id
         WHERE x.id = :id AND (c.id = x.id OR (r.id <> rx.id AND {SAME_EVENT}))
         ORDER BY c.id <> x.id, abs(c.t_inf_s - x.t_inf_s) LIMIT 1"
    ))?
    .query_row(
        named_params! {":id": id, ":k": DISPERSION_CONSTANT_S_MHZ2},
        |r| {
            let candidate: i64 = r.get(2)?;
            Ok(HeldBurst {
                burst_id: r.get(0)?,
                source: r.get(1)?,
                same_event_as: (candidate != id).then_some(candidate),
            })
        },
    )
    .optional()
}

/// Promotes `id` to `source`; a candidate already a burst, itself or as the same
/// event found by another run, is left as it is. `None` when that cannot be done
/// because the candidate changed since `source` was chosen, before the write: its
/// burst taken back (`source` is `None` only for a burst) or the candidate forgotten.
fn promote_in(
    tx: &Transaction<'_>,
    id: i64,
    source: Option<&SourceRecord>,
) -> rusqlite::Result<Option<Promotion>> {
    if let Some(held) = held_burst(tx, id)? {
        return Ok(Some(Promotion {
            burst_id: held.burst_id,
            source: held.source,
            new: false,
            same_event_as: held.same_event_as,
        }));
    }
    let Some(source) = source else {
        return Ok(None);
    };
    let n = tx.execute(
        "INSERT INTO burst (candidate_id, source_id, mjd_utc, snr, width_ms, dm, fluence_jy_ms, promoted_utc)
         SELECT id, ?2, mjd_inf, snr, width_ms, dm, fluence_jy_ms, ?3 FROM candidate WHERE id = ?1",
        params![id, source.id, super::now_utc()],
    )?;
    Ok((n > 0).then(|| Promotion {
        burst_id: tx.last_insert_rowid(),
        source: source.name.clone(),
        new: true,
        same_event_as: None,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::synthetic::{candidates, observation, run, searched_twice};
    use crate::catalogue::{BurstFilter, CandidateFilter};

    const TOL: AssignTolerance = AssignTolerance {
        radius_deg: 0.5,
        dm: 5.0,
    };

    fn setup() -> (tempfile::TempDir, Catalogue, Vec<i64>) {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("FIELD-7", 3);
        cat.record_search(&obs, &run(7.0), &candidates(&obs, 10, 3))
            .unwrap();
        let ids = cat
            .candidates(&CandidateFilter::default())
            .unwrap()
            .iter()
            .map(|r| r.id)
            .collect();
        (dir, cat, ids)
    }

    #[test]
    fn labels_are_history_and_the_newest_one_filters() {
        let (_d, mut cat, ids) = setup();
        cat.label(&ids[..3], "burst", "ana", "bright").unwrap();
        cat.label(&ids[..1], "rfi", "ben", "on second look")
            .unwrap();
        let h = cat.label_history(ids[0]).unwrap();
        assert_eq!(
            h.iter().map(|l| l.label.as_str()).collect::<Vec<_>>(),
            ["burst", "rfi"]
        );
        let f = |l: &str| CandidateFilter {
            label: Some(l.into()),
            ..Default::default()
        };
        assert_eq!(cat.candidates(&f("burst")).unwrap().len(), 2);
        assert_eq!(cat.candidates(&f("rfi")).unwrap().len(), 1);
        assert_eq!(cat.candidates(&f("none")).unwrap().len(), ids.len() - 3);
        // An id given twice is labelled once.
        assert_eq!(cat.label(&[ids[4], ids[4]], "burst", "ana", "").unwrap(), 1);
        assert_eq!(cat.label_history(ids[4]).unwrap().len(), 1);
        // An unknown id labels nothing at all.
        assert!(cat.label(&[ids[5], 999_999], "burst", "ana", "").is_err());
        assert!(cat.label_history(ids[5]).unwrap().is_empty());
        // Nor has an unknown id a history (it used to be an empty one).
        let err = cat.label_history(999_999).unwrap_err().to_string();
        assert!(err.ends_with("has no candidate 999999"), "{err}");
    }

    #[test]
    fn promotion_by_position_and_dm_picks_the_unique_match() {
        let (_d, mut cat, ids) = setup();
        let dm = cat.candidates(&CandidateFilter::default()).unwrap()[0]
            .candidate
            .dm;
        let src = |name: &str, ra: f64, dm_ref: f64| SourceRecord {
            id: 0,
            name: name.into(),
            ra_deg: ra,
            dec_deg: -12.5,
            dm_ref: Some(dm_ref),
            notes: String::new(),
        };
        // The synthetic pointing is RA 123.25, Dec -12.5.
        cat.upsert_source(&src("NEAR", 123.3, dm + 2.0)).unwrap();
        cat.upsert_source(&src("FAR", 130.0, dm)).unwrap();
        cat.upsert_source(&src("WRONG-DM", 123.25, dm + 50.0))
            .unwrap();
        let p = cat.promote(ids[0], None, TOL).unwrap();
        assert_eq!((p.source.as_str(), p.new), ("NEAR", true));
        // Promoting again changes nothing.
        let again = cat.promote(ids[0], Some("FAR"), TOL).unwrap();
        assert_eq!((again.burst_id, again.new), (p.burst_id, false));
        let b = cat.bursts(&BurstFilter::default()).unwrap();
        assert_eq!(b.len(), 1);
        assert_eq!((b[0].source.as_str(), b[0].dm), ("NEAR", dm));
        // Two matches are refused rather than guessed.
        cat.upsert_source(&src("NEAR-TWIN", 123.2, dm - 1.0))
            .unwrap();
        let err = cat.promote(ids[1], None, AssignTolerance { dm: 1e4, ..TOL });
        assert!(err.unwrap_err().to_string().contains("several sources"));
        // A burst already made needs no match: re-running a promotion by position
        // after the sources changed leaves it as it is instead of failing.
        let again = cat.promote(ids[0], None, TOL).unwrap();
        assert_eq!((again.burst_id, again.new), (p.burst_id, false));
        // A batch with one candidate that cannot be promoted promotes none of them,
        // though the other alone goes in.
        let before = cat.bursts(&BurstFilter::default()).unwrap().len();
        let err = cat.promote_all(&[ids[2], 999_999], Some("FAR"), TOL);
        assert!(
            err.unwrap_err()
                .to_string()
                .ends_with("has no candidate 999999; nothing promoted"),
            "an unknown candidate fails the batch, named"
        );
        assert_eq!(cat.bursts(&BurstFilter::default()).unwrap().len(), before);
        assert!(cat.promote_all(&[ids[2]], Some("FAR"), TOL).unwrap()[0].new);
    }

    /// Searching an observation again with another configuration finds its bursts
    /// again, as candidates of a second run. Promoting those must not give each burst
    /// a twin: the rate would count it twice and the periodicity tests would see two
    /// arrivals 0 s apart. The second run measures the same events a little
    /// differently, and finds a DM-0 flash at the same instant, another event
    /// (`synthetic::found_again`).
    #[test]
    fn a_burst_found_again_by_another_run_is_not_promoted_twice() {
        let dir = tempfile::tempdir().unwrap();
        let (mut cat, ids) = searched_twice(dir.path());
        assert_eq!(ids.len(), 5);
        cat.promote_all(&ids[..2], Some("FIELD-7"), TOL).unwrap();
        let p = cat.promote_all(&ids[2..], Some("FIELD-7"), TOL).unwrap();
        let seen: Vec<_> = p.iter().map(|p| (p.new, p.same_event_as)).collect();
        assert_eq!(
            seen,
            [(false, Some(ids[0])), (false, Some(ids[1])), (true, None)]
        );
        assert_eq!(cat.bursts(&BurstFilter::default()).unwrap().len(), 3);
        // Both runs' finds promoted in one batch give one burst per event too.
        let dir = tempfile::tempdir().unwrap();
        let (mut fresh, _) = searched_twice(dir.path());
        fresh.promote_all(&ids, Some("FIELD-7"), TOL).unwrap();
        assert_eq!(fresh.bursts(&BurstFilter::default()).unwrap().len(), 3);
    }
}
