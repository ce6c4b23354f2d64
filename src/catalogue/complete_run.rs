//! Keeping the runs of consecutive files whole and without repeats when one is
//! searched after the other (consecutive files are joined: docs/search.md,
//! "Consecutive files"). A run is completed when its recording is searched again
//! with the same configuration but reading on further into the recording that
//! continues it: the earlier run could not search the sweeps crossing into the next
//! file; the new one did, and elsewhere finds exactly what the earlier one found.
//! The next file's run, if recorded before, may hold such a pulse again, found from
//! the part of its sweep after the cut: that repeat is taken out.

use rusqlite::{Transaction, params};

use super::Catalogue;
use super::record::insert_candidates;
use super::same_event::held_finds_of_event;
use crate::candidate::Candidate;
use crate::error::Result;

/// What completing a run changed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Completion {
    /// Candidates added: events the earlier search had not found, or found from a
    /// part of their sweep only.
    pub added: usize,
    /// Earlier candidates taken out, each the same event as an added one (never one
    /// that was reviewed or promoted: that one is kept, and its event not added).
    pub replaced: usize,
}

/// What happens to one candidate of the new search.
enum Fate {
    /// Found by the earlier search exactly so: its row (and id) stay.
    Held,
    /// The same event as an earlier candidate someone reviewed or promoted: that
    /// one stays, this one is not added.
    Judged,
    /// Added, in place of these earlier candidates of its event.
    Added(Vec<i64>),
}

/// Completes run `run_id` with a search of the same recording and configuration
/// that read on `run_on_s` seconds (see the module docs): `None`, changing nothing,
/// unless that is further than the run recorded (a run recorded before reading on
/// was kept counts as 0). Candidates the earlier search found exactly so are kept
/// with their ids; the others are added, each replacing the earlier candidates of
/// its event (`same_event`) that nobody reviewed or promoted. Earlier candidates
/// the new search did not find again stay: nothing recorded is lost.
pub(super) fn complete_run(
    tx: &Transaction<'_>,
    run_id: i64,
    run_on_s: f64,
    candidates: &[Candidate],
) -> rusqlite::Result<Option<Completion>> {
    let held_reach: Option<f64> = tx.query_row(
        "SELECT run_on_s FROM search_run WHERE id = ?1",
        [run_id],
        |r| r.get(0),
    )?;
    if run_on_s <= held_reach.unwrap_or(0.0) {
        return Ok(None);
    }
    // Every fate is decided before anything changes, so that candidates added here
    // are never taken for earlier ones.
    let fates = candidates
        .iter()
        .map(|c| fate(tx, run_id, c))
        .collect::<rusqlite::Result<Vec<Fate>>>()?;
    let mut replaced: Vec<i64> = fates
        .iter()
        .flat_map(|f| match f {
            Fate::Added(ids) => ids.as_slice(),
            _ => &[],
        })
        .copied()
        .collect();
    replaced.sort_unstable();
    replaced.dedup();
    let added: Vec<&Candidate> = candidates
        .iter()
        .zip(&fates)
        .filter(|(_, f)| matches!(f, Fate::Added(_)))
        .map(|(c, _)| c)
        .collect();
    // Added before the replaced ones go, so that none takes the id of one that went
    // (SQLite gives the largest id held plus one).
    insert_candidates(tx, run_id, added.iter().copied())?;
    for id in &replaced {
        tx.execute("DELETE FROM candidate WHERE id = ?1", [id])?;
    }
    tx.execute(
        "UPDATE search_run SET run_on_s = ?2,
             n_candidates = (SELECT count(*) FROM candidate WHERE run_id = ?1)
         WHERE id = ?1",
        params![run_id, run_on_s],
    )?;
    Ok(Some(Completion {
        added: added.len(),
        replaced: replaced.len(),
    }))
}

fn fate(tx: &Transaction<'_>, run_id: i64, c: &Candidate) -> rusqlite::Result<Fate> {
    if held_exactly(tx, run_id, c)?.is_some() {
        return Ok(Fate::Held);
    }
    let earlier = held_finds_of_event(tx, run_id, c)?;
    for &id in &earlier {
        if is_judged(tx, id)? {
            return Ok(Fate::Judged);
        }
    }
    Ok(Fate::Added(earlier))
}

/// The id of the candidate of run `run_id` that is `c` exactly, if any.
fn held_exactly(tx: &Transaction<'_>, run_id: i64, c: &Candidate) -> rusqlite::Result<Option<i64>> {
    use rusqlite::OptionalExtension;
    tx.prepare_cached(
        "SELECT id FROM candidate WHERE run_id = ?1
             AND t_inf_s = ?2 AND dm = ?3 AND width_ms = ?4 AND snr = ?5",
    )?
    .query_row(params![run_id, c.t_inf_s, c.dm, c.width_ms, c.snr], |r| {
        r.get(0)
    })
    .optional()
}

/// Whether someone reviewed candidate `id` or promoted it to a burst.
fn is_judged(tx: &Transaction<'_>, id: i64) -> rusqlite::Result<bool> {
    tx.prepare_cached(
        "SELECT EXISTS (SELECT 1 FROM review_label WHERE candidate_id = ?1)
             OR EXISTS (SELECT 1 FROM burst WHERE candidate_id = ?1)",
    )?
    .query_row([id], |r| r.get(0))
}

impl Catalogue {
    /// Takes `repeats` out of run `run_id`, in one transaction, and returns those
    /// taken out: the finds of a recording that repeat a pulse the recording it
    /// continues found whole, across the cut (`search::drop_repeats_across_cut`),
    /// when that one was searched, reading on, after this run was recorded. A
    /// repeat someone reviewed or promoted stays, as does one the run does not
    /// hold exactly.
    ///
    /// # Errors
    /// An SQLite failure (then nothing changed).
    pub fn take_out_repeats(
        &mut self,
        run_id: i64,
        repeats: &[Candidate],
    ) -> Result<Vec<Candidate>> {
        let path = self.path().to_path_buf();
        self.write(|tx| take_out(tx, run_id, repeats).map_err(|e| super::sql_error(&path, e)))
    }
}

fn take_out(
    tx: &Transaction<'_>,
    run_id: i64,
    repeats: &[Candidate],
) -> rusqlite::Result<Vec<Candidate>> {
    let mut taken = Vec::new();
    for c in repeats {
        let Some(id) = held_exactly(tx, run_id, c)? else {
            continue;
        };
        if !is_judged(tx, id)? {
            tx.execute("DELETE FROM candidate WHERE id = ?1", [id])?;
            taken.push(c.clone());
        }
    }
    tx.execute(
        "UPDATE search_run
         SET n_candidates = (SELECT count(*) FROM candidate WHERE run_id = ?1)
         WHERE id = ?1",
        [run_id],
    )?;
    Ok(taken)
}

#[cfg(test)]
mod tests {
    use crate::candidate::Candidate;
    use crate::catalogue::synthetic::{assert_whole, candidate_ids, candidates, observation, run};
    use crate::catalogue::{CandidateFilter, Catalogue, Completion, RecordOutcome};

    /// An earlier search's four finds, the last from part of its sweep (cut at the
    /// file's end), and a later search that read on: the first three again exactly,
    /// the last one's event whole (0.8 higher in DM, 2 ms later, 1.5 times wider),
    /// and an event the earlier search missed.
    fn searches() -> (
        crate::catalogue::ObservationRecord,
        Vec<Candidate>,
        Vec<Candidate>,
    ) {
        let obs = observation("FIELD-7", 3);
        let mut earlier = candidates(&obs, 4, 3);
        earlier.sort_by(|a, b| a.t_inf_s.total_cmp(&b.t_inf_s));
        let mut later = earlier.clone();
        let whole = &mut later[3];
        (whole.dm, whole.dm_lo, whole.dm_hi) =
            (whole.dm + 0.8, whole.dm_lo + 0.8, whole.dm_hi + 0.8);
        whole.t_inf_s += 2e-3;
        whole.width_ms *= 1.5;
        whole.snr += 5.0;
        let mut missed = earlier[0].clone();
        missed.t_inf_s = obs.header.duration_s() - 0.5;
        (missed.dm, missed.dm_lo, missed.dm_hi) = (1500.0, 1490.0, 1510.0);
        later.push(missed);
        (obs, earlier, later)
    }

    /// A catalogue holding the earlier of [`searches`], recorded as having read on
    /// `run_on_s`.
    struct Recorded {
        _dir: tempfile::TempDir,
        cat: Catalogue,
        obs: crate::catalogue::ObservationRecord,
        earlier: Vec<Candidate>,
        later: Vec<Candidate>,
        run_id: i64,
    }

    fn recorded(run_on_s: Option<f64>) -> Recorded {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let (obs, earlier, later) = searches();
        let RecordOutcome::Inserted { run_id } = record(&mut cat, &obs, &earlier, run_on_s) else {
            panic!("first search not inserted")
        };
        Recorded {
            _dir: dir,
            cat,
            obs,
            earlier,
            later,
            run_id,
        }
    }

    fn record(
        cat: &mut Catalogue,
        obs: &crate::catalogue::ObservationRecord,
        found: &[Candidate],
        run_on_s: Option<f64>,
    ) -> RecordOutcome {
        let mut searched = run(7.0);
        searched.run_on_s = run_on_s;
        cat.record_search(obs, &searched, found).unwrap()
    }

    fn held(cat: &Catalogue) -> Vec<(i64, f64, f64)> {
        let mut rows: Vec<_> = cat
            .candidates(&CandidateFilter::default())
            .unwrap()
            .into_iter()
            .map(|r| (r.id, r.candidate.t_inf_s, r.candidate.dm))
            .collect();
        rows.sort_by(|a, b| a.1.total_cmp(&b.1));
        rows
    }

    // Searched again reading on, the run keeps the three finds made again exactly
    // (with their ids), takes the whole event in place of its part, adds the missed
    // one, and records how far it read; the same search again changes nothing.
    #[test]
    fn a_run_searched_again_reading_on_is_completed_without_repeats() {
        // The directory is kept (bound) while the catalogue in it is open.
        let Recorded {
            _dir: _kept,
            mut cat,
            obs,
            later,
            run_id,
            ..
        } = recorded(Some(0.0));
        let before = held(&cat);
        let outcome = record(&mut cat, &obs, &later, Some(2.5));
        let completion = Completion {
            added: 2,
            replaced: 1,
        };
        assert_eq!(outcome, RecordOutcome::Completed { run_id, completion });
        let after = held(&cat);
        assert_eq!(after.len(), 5);
        assert_eq!(after[..3], before[..3]);
        assert!(!after.iter().any(|h| h.0 == before[3].0));
        assert_eq!(after[3].2, later[3].dm);
        assert_eq!(after[4].2, 1500.0);
        assert_whole(&cat);
        let reach: f64 = cat
            .conn()
            .query_row(
                "SELECT run_on_s FROM search_run WHERE id = ?1",
                [run_id],
                |r| r.get(0),
            )
            .unwrap();
        assert_eq!(reach, 2.5);
        for run_on_s in [Some(2.5), Some(1.0), None] {
            let again = record(&mut cat, &obs, &later, run_on_s);
            assert_eq!(again, RecordOutcome::AlreadyPresent { run_id });
            assert_eq!(held(&cat), after);
        }
    }

    // A find someone judged is kept, and its event from the later search not added;
    // a run recorded before reading on was kept (NULL) counts as not having read on.
    #[test]
    fn a_reviewed_find_is_kept_in_place_of_its_later_event() {
        // The directory is kept (bound) while the catalogue in it is open.
        let Recorded {
            _dir: _kept,
            mut cat,
            obs,
            later,
            ..
        } = recorded(None);
        let part = held(&cat)[3].0;
        cat.label(&[part], "burst", "tester", "").unwrap();
        let outcome = record(&mut cat, &obs, &later, Some(2.5));
        let RecordOutcome::Completed { completion, .. } = outcome else {
            panic!("{outcome:?}")
        };
        assert_eq!(
            completion,
            Completion {
                added: 1,
                replaced: 0
            }
        );
        let ids = candidate_ids(&cat, &CandidateFilter::default());
        assert_eq!(ids.len(), 5);
        assert!(ids.contains(&part));
        assert_whole(&cat);
    }

    // Repeats are taken out of the run, except one someone reviewed and one the run
    // does not hold exactly; the run's count follows.
    #[test]
    fn repeats_are_taken_out_unless_judged() {
        // The directory is kept (bound) while the catalogue in it is open.
        let Recorded {
            _dir: _kept,
            mut cat,
            earlier,
            run_id,
            ..
        } = recorded(Some(0.0));
        let ids = held(&cat);
        cat.label(&[ids[1].0], "burst", "tester", "").unwrap();
        let mut not_held = earlier[2].clone();
        not_held.snr += 1.0;
        let repeats = [earlier[0].clone(), earlier[1].clone(), not_held];
        let taken = cat.take_out_repeats(run_id, &repeats).unwrap();
        assert_eq!(taken, [earlier[0].clone()]);
        let left: Vec<i64> = held(&cat).iter().map(|h| h.0).collect();
        assert_eq!(left, [ids[1].0, ids[2].0, ids[3].0]);
        assert_whole(&cat);
    }
}
