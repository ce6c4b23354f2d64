//! When two candidates of one observation, found by different search runs (the
//! recording searched again with another configuration), are one event: their
//! clusters' DM ranges overlap and their arrival times at infinite frequency differ
//! by at most half the sum of their boxcar widths plus the shift a DM difference δ
//! can cause, k·δ/ν_lo² (docs/search.md: a DM error shifts t_inf by k·δ·⟨ν⁻²⟩).
//! Finds of one run are distinct events, as clustering left them. Promotion uses it
//! so an event becomes one burst; `book check` uses it to find bursts promoted twice
//! before promotion did.

use rusqlite::{Connection, named_params};

use super::Catalogue;
use crate::candidate::Candidate;
use crate::error::Result;
use crate::units::DISPERSION_CONSTANT_S_MHZ2;

/// The SQL condition that candidates `c` and `x` (rows of `candidate`) of
/// observation `o` are one event; `:k` is the dispersion constant in s MHz²
/// ([`DISPERSION_CONSTANT_S_MHZ2`]). The caller makes sure their runs differ.
pub(super) const SAME_EVENT: &str = "c.dm_lo <= x.dm_hi AND x.dm_lo <= c.dm_hi
    AND abs(c.t_inf_s - x.t_inf_s) <= (c.width_ms + x.width_ms) / 2000.0
        + :k * abs(c.dm - x.dm) / (o.freq_lo_mhz * o.freq_lo_mhz)";

/// From candidate `c` (joined already) to the finds `x` of the other search runs
/// of its observation `o`, for [`SAME_EVENT`] to pair.
const FINDS_OF_OTHER_RUNS: &str = "JOIN search_run rc ON rc.id = c.run_id
    JOIN observation o ON o.id = rc.observation_id
    JOIN search_run rx ON rx.observation_id = o.id AND rx.id <> rc.id
    JOIN candidate x ON x.run_id = rx.id";

/// Two bursts that are one event (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TwinBursts {
    /// The burst promoted first (lower id) and the one promoted again.
    pub burst_ids: (i64, i64),
    /// The candidates they were promoted from, in the same order.
    pub candidate_ids: (i64, i64),
}

impl Catalogue {
    /// Pairs of bursts that are one event found by two search runs of an
    /// observation: promoted twice by a burstbook that did not yet check (they stay
    /// until someone takes one back, [`Catalogue::demote`]).
    ///
    /// # Errors
    /// An SQLite failure.
    pub fn twin_bursts(&self) -> Result<Vec<TwinBursts>> {
        twins(self.conn()).map_err(|e| self.err(e))
    }
}

fn twins(conn: &Connection) -> rusqlite::Result<Vec<TwinBursts>> {
    let sql = format!(
        "SELECT bc.id, bx.id, c.id, x.id FROM burst bc
         JOIN candidate c ON c.id = bc.candidate_id
         {FINDS_OF_OTHER_RUNS}
         JOIN burst bx ON bx.candidate_id = x.id AND bx.id > bc.id
         WHERE {SAME_EVENT}
         ORDER BY bc.id, bx.id"
    );
    let mut stmt = conn.prepare(&sql)?;
    let rows = stmt.query_map(named_params! {":k": DISPERSION_CONSTANT_S_MHZ2}, |r| {
        Ok(TwinBursts {
            burst_ids: (r.get(0)?, r.get(1)?),
            candidate_ids: (r.get(2)?, r.get(3)?),
        })
    })?;
    rows.collect()
}

/// The candidates of other search runs of candidate `id`'s observation that are
/// its event, by id.
pub(super) fn same_event_as(conn: &Connection, id: i64) -> rusqlite::Result<Vec<i64>> {
    let sql = format!(
        "SELECT x.id FROM candidate c {FINDS_OF_OTHER_RUNS}
         WHERE c.id = :id AND {SAME_EVENT} ORDER BY x.id"
    );
    let mut stmt = conn.prepare_cached(&sql)?;
    let rows = stmt.query_map(
        named_params! {":id": id, ":k": DISPERSION_CONSTANT_S_MHZ2},
        |r| r.get(0),
    )?;
    rows.collect()
}

/// The candidates of run `run_id` that are the event of `c` (a find of another
/// search of the same recording, not yet recorded), by id.
pub(super) fn held_finds_of_event(
    conn: &Connection,
    run_id: i64,
    c: &Candidate,
) -> rusqlite::Result<Vec<i64>> {
    let sql = format!(
        "WITH c (t_inf_s, dm, dm_lo, dm_hi, width_ms) AS
             (VALUES (:t_inf_s, :dm, :dm_lo, :dm_hi, :width_ms))
         SELECT x.id FROM c, candidate x
             JOIN search_run r ON r.id = x.run_id
             JOIN observation o ON o.id = r.observation_id
         WHERE x.run_id = :run AND {SAME_EVENT} ORDER BY x.id"
    );
    let mut stmt = conn.prepare_cached(&sql)?;
    let rows = stmt.query_map(
        named_params! {
            ":t_inf_s": c.t_inf_s, ":dm": c.dm, ":dm_lo": c.dm_lo, ":dm_hi": c.dm_hi,
            ":width_ms": c.width_ms, ":run": run_id, ":k": DISPERSION_CONSTANT_S_MHZ2,
        },
        |r| r.get(0),
    )?;
    rows.collect()
}

#[cfg(test)]
mod tests {
    use crate::catalogue::AssignTolerance;
    use crate::catalogue::synthetic::searched_twice;

    /// A catalogue written before promotion checked for the same event: both runs'
    /// finds of two bursts are bursts. The twins are found in pairs; a DM-0 flash at
    /// the same instant, also a burst, is another event.
    #[test]
    fn bursts_promoted_twice_are_found_as_twins() {
        let dir = tempfile::tempdir().unwrap();
        let (mut cat, ids) = searched_twice(dir.path());
        let tol = AssignTolerance {
            radius_deg: 0.5,
            dm: 5.0,
        };
        cat.promote_all(&ids, Some("FIELD-7"), tol).unwrap();
        assert!(cat.twin_bursts().unwrap().is_empty());
        // As an older burstbook left it: the second run's finds promoted too.
        for &id in &ids[2..4] {
            cat.conn()
                .execute(
                    "INSERT INTO burst (candidate_id, source_id, mjd_utc, snr, width_ms, dm,
                         promoted_utc)
                     SELECT id, 1, mjd_inf, snr, width_ms, dm, 'then' FROM candidate WHERE id = ?1",
                    [id],
                )
                .unwrap();
        }
        let twins = cat.twin_bursts().unwrap();
        let pairs: Vec<_> = twins.iter().map(|t| t.candidate_ids).collect();
        assert_eq!(pairs, [(ids[0], ids[2]), (ids[1], ids[3])]);
    }
}
