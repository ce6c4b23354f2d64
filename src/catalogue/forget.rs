//! Forgetting an observation recorded under a wrong header. Since a recording is
//! known by its samples ([`super::identity`]), the corrected file is refused while
//! the wrong one is held; forgetting removes, in one transaction, every row that
//! exists only because of the observation: its search runs, their candidates, the
//! candidates' review labels and bursts (with their barycentric TOAs, a column of
//! the burst), the runs' exposure, its injection-completeness results, the
//! observation, and its source when recording it added that source and nothing
//! else refers to it. A burst belongs to one candidate and so to one observation
//! (`burst.candidate_id` is unique; [`super::same_event`] pairs only finds of one
//! observation), so no other observation's burst is touched. Imported exposure
//! (no run) is not the observation's and stays.

use rusqlite::{Connection, OptionalExtension, params};
use serde::Serialize;

use super::{Catalogue, catalogue_error};
use crate::error::Result;

/// How [`Catalogue::forget_observation`] goes about it.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct ForgetOptions {
    /// Remove the observation's bursts too; without it an observation with bursts
    /// is refused, as a burst is usually the result of someone's review.
    pub with_bursts: bool,
    /// Count what would be removed and change nothing.
    pub dry_run: bool,
}

/// What forgetting an observation removed (or, in a dry run, would remove).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Forgotten {
    /// The observation's id.
    pub observation_id: i64,
    /// Its path when first recorded.
    pub path: String,
    /// Its source as its header named it.
    pub source: String,
    /// UTC MJD of its first sample.
    pub start_mjd: f64,
    /// Search runs.
    pub runs: usize,
    /// Candidates of those runs.
    pub candidates: usize,
    /// Review labels of those candidates (every one of their history).
    pub labels: usize,
    /// Exposure intervals of those runs.
    pub exposure_intervals: usize,
    /// Injection-recovery results.
    pub completeness_results: usize,
    /// Bursts promoted from those candidates.
    pub bursts: usize,
    /// Of those bursts, the ones with a stored barycentric TOA.
    pub toas: usize,
    /// Whether its source went too: recording the observation added it (the
    /// header's name and position, no reference DM, no notes) and no other
    /// observation, exposure or burst refers to it.
    pub source_removed: bool,
}

/// Where each table holds the observation's rows (`?1` is the observation), and
/// which count they add to; children before parents, so deleting in this order
/// never leaves a row pointing at a removed one. The observation row goes last.
type Counter = fn(&mut Forgotten) -> &mut usize;
const ROWS: [(&str, &str, Counter); 6] = [
    ("review_label", OF_ITS_CANDIDATES, |f| &mut f.labels),
    ("burst", OF_ITS_CANDIDATES, |f| &mut f.bursts),
    ("exposure", OF_ITS_RUNS, |f| &mut f.exposure_intervals),
    ("candidate", OF_ITS_RUNS, |f| &mut f.candidates),
    ("injection_completeness", "observation_id = ?1", |f| {
        &mut f.completeness_results
    }),
    ("search_run", "observation_id = ?1", |f| &mut f.runs),
];
const OF_ITS_RUNS: &str = "run_id IN (SELECT id FROM search_run WHERE observation_id = ?1)";
const OF_ITS_CANDIDATES: &str = "candidate_id IN (SELECT c.id FROM candidate c
    JOIN search_run r ON r.id = c.run_id WHERE r.observation_id = ?1)";

/// The source that recording observation ?1 added (?2 its header's source name,
/// ?3 and ?4 its position), if nothing but that observation refers to it. Holds
/// the same before and after the observation's rows are removed, so a dry run
/// counts what a real one removes.
const ITS_OWN_SOURCE: &str = "name = ?2 AND ra_deg = ?3 AND dec_deg = ?4
    AND dm_ref IS NULL AND notes = ''
    AND NOT EXISTS (SELECT 1 FROM observation o WHERE o.source_name = ?2 AND o.id <> ?1)
    AND NOT EXISTS (SELECT 1 FROM exposure e WHERE e.source_id = source.id
        AND (e.run_id IS NULL
             OR e.run_id NOT IN (SELECT id FROM search_run WHERE observation_id = ?1)))
    AND NOT EXISTS (SELECT 1 FROM burst b WHERE b.source_id = source.id
        AND b.candidate_id NOT IN (SELECT c.id FROM candidate c
            JOIN search_run r ON r.id = c.run_id WHERE r.observation_id = ?1))";

impl Catalogue {
    /// Removes observation `id` and everything that exists only because of it (see
    /// the module docs), all in one transaction, and says what went; with
    /// [`ForgetOptions::dry_run`] only counts. Searching the same samples again
    /// then records them as a new observation, under whatever header they now have.
    ///
    /// # Errors
    /// [`crate::Error::Catalogue`] when there is no observation `id`, or when it
    /// has bursts and [`ForgetOptions::with_bursts`] is not set (naming how many,
    /// of which sources); an SQLite failure. Then nothing is removed.
    pub fn forget_observation(&mut self, id: i64, how: ForgetOptions) -> Result<Forgotten> {
        let path = self.path().to_path_buf();
        let forget = |conn: &Connection| -> Result<Forgotten> {
            let sql = |e| super::sql_error(&path, e);
            let Some((mut gone, ra_deg, dec_deg)) = describe(conn, id).map_err(sql)? else {
                return Err(catalogue_error(
                    &path,
                    format!("has no observation {id}; nothing was removed"),
                ));
            };
            let bursts = bursts_by_source(conn, id).map_err(sql)?;
            if !bursts.is_empty() && !how.with_bursts {
                return Err(catalogue_error(&path, refusal(id, &bursts)));
            }
            gone.toas = bursts.iter().map(|b| b.toas).sum();
            for (table, condition, count) in ROWS {
                *count(&mut gone) =
                    rows(conn, how.dry_run, table, condition, params![id]).map_err(sql)?;
            }
            rows(conn, how.dry_run, "observation", "id = ?1", params![id]).map_err(sql)?;
            let source = params![id, gone.source, ra_deg, dec_deg];
            gone.source_removed =
                rows(conn, how.dry_run, "source", ITS_OWN_SOURCE, source).map_err(sql)? > 0;
            Ok(gone)
        };
        self.write_unless_dry_run(how.dry_run, forget)
    }
}

/// Counts the rows of `table` that meet `condition`, or deletes them when not a
/// `dry_run`; either way, how many.
fn rows(
    conn: &Connection,
    dry_run: bool,
    table: &str,
    condition: &str,
    params: impl rusqlite::Params,
) -> rusqlite::Result<usize> {
    if dry_run {
        let sql = format!("SELECT count(*) FROM {table} WHERE {condition}");
        conn.query_row(&sql, params, |r| r.get::<_, i64>(0))
            .map(|n| n as usize)
    } else {
        conn.execute(&format!("DELETE FROM {table} WHERE {condition}"), params)
    }
}

/// Observation `id` as a [`Forgotten`] with nothing counted yet, and its
/// header's position; `None` if there is no such observation.
fn describe(conn: &Connection, id: i64) -> rusqlite::Result<Option<(Forgotten, f64, f64)>> {
    conn.query_row(
        "SELECT path, source_name, start_mjd, ra_deg, dec_deg FROM observation WHERE id = ?1",
        [id],
        |r| {
            let gone = Forgotten {
                observation_id: id,
                path: r.get(0)?,
                source: r.get(1)?,
                start_mjd: r.get(2)?,
                runs: 0,
                candidates: 0,
                labels: 0,
                exposure_intervals: 0,
                completeness_results: 0,
                bursts: 0,
                toas: 0,
                source_removed: false,
            };
            Ok((gone, r.get(3)?, r.get(4)?))
        },
    )
    .optional()
}

/// The bursts of one source promoted from an observation's candidates.
struct SourceBursts {
    source: String,
    bursts: usize,
    toas: usize,
}

/// The bursts promoted from observation `id`'s candidates, per source, by name.
fn bursts_by_source(conn: &Connection, id: i64) -> rusqlite::Result<Vec<SourceBursts>> {
    let mut stmt = conn.prepare(&format!(
        "SELECT s.name, count(*), count(b.toa_tdb_mjd) FROM burst b
         JOIN source s ON s.id = b.source_id WHERE b.{OF_ITS_CANDIDATES}
         GROUP BY s.name ORDER BY s.name"
    ))?;
    let rows = stmt.query_map([id], |r| {
        Ok(SourceBursts {
            source: r.get(0)?,
            bursts: r.get::<_, i64>(1)? as usize,
            toas: r.get::<_, i64>(2)? as usize,
        })
    })?;
    rows.collect()
}

/// The one line refusing to forget observation `id`, which has `bursts`.
fn refusal(id: i64, bursts: &[SourceBursts]) -> String {
    let total: usize = bursts.iter().map(|b| b.bursts).sum();
    let per_source: Vec<String> = bursts
        .iter()
        .map(|b| format!("{} of {}", b.bursts, b.source))
        .collect();
    format!(
        "observation {id} has {total} burst(s) promoted from its candidates ({}); nothing was \
         removed (--with-bursts removes them too, with their barycentric TOAs)",
        per_source.join(", ")
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::synthetic::{
        add_other_source, assert_whole, candidate_ids, candidates, fluence_completeness,
        observation, row_counts, run, searched_twice,
    };
    use crate::catalogue::{
        AssignTolerance, BurstFilter, CandidateFilter, RecordOutcome, SourceEdit,
    };

    const TOL: AssignTolerance = AssignTolerance {
        radius_deg: 0.5,
        dm: 5.0,
    };
    const REAL: ForgetOptions = ForgetOptions {
        with_bursts: false,
        dry_run: false,
    };
    const DRY: ForgetOptions = ForgetOptions {
        with_bursts: false,
        dry_run: true,
    };

    fn ids_of(cat: &Catalogue, source: &str) -> Vec<i64> {
        let only = CandidateFilter {
            source: Some(source.into()),
            ..Default::default()
        };
        candidate_ids(cat, &only)
    }

    /// Observation 1 ("WRONG", a mistyped source) searched twice, labelled and
    /// measured for completeness; observation 2 (FIELD-9) with a label and a burst
    /// with its TOA, and imported exposure.
    fn two_observations(dir: &std::path::Path) -> Catalogue {
        let mut cat = Catalogue::open(&dir.join("c.sqlite")).unwrap();
        let wrong = observation("WRONG", 1);
        cat.record_search(&wrong, &run(7.0), &candidates(&wrong, 5, 1))
            .unwrap();
        cat.record_search(&wrong, &run(8.0), &candidates(&wrong, 3, 2))
            .unwrap();
        let ids = ids_of(&cat, "WRONG");
        cat.label(&ids[..3], "burst", "ana", "").unwrap();
        cat.label(&ids[..1], "rfi", "ben", "").unwrap();
        cat.record_completeness(&wrong, &fluence_completeness(&run(7.0)))
            .unwrap();
        let other = observation("FIELD-9", 2);
        cat.record_search(&other, &run(7.0), &candidates(&other, 4, 3))
            .unwrap();
        let b = ids_of(&cat, "FIELD-9")[0];
        cat.label(&[b], "burst", "ana", "").unwrap();
        let p = cat.promote(b, Some("FIELD-9"), TOL).unwrap();
        cat.set_barycentric_toas(&[(p.burst_id, 60002.5)]).unwrap();
        let csv = "FIELD-9,59990.0,59990.5\n";
        cat.import_exposure_csv(std::path::Path::new("x.csv"), csv.as_bytes())
            .unwrap();
        cat
    }

    /// Everything the catalogue says about FIELD-9, which must not change.
    fn field_9(cat: &Catalogue) -> String {
        let only = CandidateFilter {
            source: Some("FIELD-9".into()),
            ..Default::default()
        };
        let labels = ids_of(cat, "FIELD-9")
            .iter()
            .map(|&id| cat.label_history(id).unwrap())
            .collect::<Vec<_>>();
        format!(
            "{:?} {labels:?} {:?} {:?} {:?}",
            cat.candidates(&only).unwrap(),
            cat.bursts(&BurstFilter::default()).unwrap(),
            cat.exposure(Some("FIELD-9")).unwrap(),
            cat.source("FIELD-9").unwrap(),
        )
    }

    #[test]
    fn forgetting_removes_the_observations_rows_and_nothing_else() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = two_observations(dir.path());
        let before = row_counts(&cat);
        assert_eq!(before, [2, 2, 3, 12, 4, 1, 5, 1]);
        let kept = field_9(&cat);

        let counted = cat.forget_observation(1, DRY).unwrap();
        assert_eq!(row_counts(&cat), before, "a dry run changed something");
        let gone = cat.forget_observation(1, REAL).unwrap();
        assert_eq!(gone, counted, "the dry run counts what goes");
        let wrong = observation("WRONG", 1);
        assert_eq!(
            gone,
            Forgotten {
                observation_id: 1,
                path: wrong.path.clone(),
                source: "WRONG".into(),
                start_mjd: wrong.span_mjd().0,
                runs: 2,
                candidates: 8,
                labels: 4,
                exposure_intervals: 2,
                completeness_results: 1,
                bursts: 0,
                toas: 0,
                source_removed: true,
            }
        );
        assert_eq!(row_counts(&cat), [1, 1, 1, 4, 2, 1, 1, 0]);
        assert_eq!(field_9(&cat), kept);
        assert_whole(&cat);
        // Gone is gone: a second time it is unknown.
        let err = cat.forget_observation(1, REAL).unwrap_err().to_string();
        assert!(
            err.ends_with("has no observation 1; nothing was removed"),
            "{err}"
        );
    }

    /// A failure part-way (here a trigger refusing to delete a run, after the
    /// labels and candidates went) leaves every row where it was.
    #[test]
    fn a_forget_that_fails_part_way_removes_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = two_observations(dir.path());
        let before = row_counts(&cat);
        cat.conn()
            .execute_batch(
                "CREATE TRIGGER keep_runs BEFORE DELETE ON search_run
                 BEGIN SELECT RAISE(ABORT, 'runs are kept'); END",
            )
            .unwrap();
        let err = cat.forget_observation(1, REAL).unwrap_err().to_string();
        assert!(err.contains("runs are kept"), "{err}");
        assert_eq!(row_counts(&cat), before);
        for unknown in [0, 3, -1] {
            let err = cat.forget_observation(unknown, REAL).unwrap_err();
            assert!(
                err.to_string()
                    .contains(&format!("has no observation {unknown};"))
            );
        }
        assert_eq!(row_counts(&cat), before);
    }

    /// Bursts are the fruit of a review: forgetting their observation is refused
    /// unless asked for, naming them per source; asked for, they go (TOAs with
    /// them), and another observation's burst of the same source stays.
    #[test]
    fn bursts_are_removed_only_when_asked_for() {
        let dir = tempfile::tempdir().unwrap();
        let (mut cat, ids) = searched_twice(dir.path());
        add_other_source(&mut cat);
        cat.promote_all(&ids[..2], Some("FIELD-7"), TOL).unwrap();
        let flash = cat.promote(ids[4], Some("OTHER"), TOL).unwrap();
        cat.set_barycentric_toas(&[(flash.burst_id, 60003.5)])
            .unwrap();
        let later = observation("FIELD-7", 9);
        cat.record_search(&later, &run(7.0), &candidates(&later, 2, 4))
            .unwrap();
        let kept = cat.promote(
            *ids_of(&cat, "FIELD-7").last().unwrap(),
            Some("FIELD-7"),
            TOL,
        );
        let kept = kept.unwrap().burst_id;
        let before = row_counts(&cat);
        assert_eq!(before, [2, 2, 3, 7, 3, 4, 0, 0]);

        for how in [REAL, DRY] {
            let err = cat.forget_observation(1, how).unwrap_err().to_string();
            assert!(
                err.ends_with(
                    "observation 1 has 3 burst(s) promoted from its candidates \
                     (2 of FIELD-7, 1 of OTHER); nothing was removed (--with-bursts \
                     removes them too, with their barycentric TOAs)"
                ),
                "{err}"
            );
            assert_eq!(row_counts(&cat), before);
        }
        let with_bursts = ForgetOptions {
            with_bursts: true,
            ..DRY
        };
        let counted = cat.forget_observation(1, with_bursts).unwrap();
        assert_eq!((counted.bursts, counted.toas), (3, 1));
        assert_eq!(row_counts(&cat), before);
        let gone = cat
            .forget_observation(
                1,
                ForgetOptions {
                    dry_run: false,
                    ..with_bursts
                },
            )
            .unwrap();
        assert_eq!(gone, counted);
        assert_eq!((gone.runs, gone.candidates, gone.bursts), (2, 5, 3));
        assert!(!gone.source_removed, "FIELD-7 has another observation");
        let left: Vec<i64> = cat
            .bursts(&BurstFilter::default())
            .unwrap()
            .iter()
            .map(|b| b.id)
            .collect();
        assert_eq!(left, [kept]);
        assert_eq!(row_counts(&cat), [2, 1, 1, 2, 1, 1, 0, 0]);
        assert_whole(&cat);
    }

    /// A source is the observation's own only while it is as recording added it
    /// and nothing else uses it: a reference DM, a moved position or imported
    /// exposure keep it (another observation of it: see the bursts test).
    #[test]
    fn a_source_someone_else_uses_or_edited_is_kept() {
        let only_dm = |cat: &mut Catalogue| {
            let s = cat.source("S").unwrap();
            let edit = SourceEdit {
                name: s.name,
                ra_deg: s.ra_deg,
                dec_deg: s.dec_deg,
                dm_ref: Some(300.0),
                notes: None,
            };
            cat.edit_source(&edit).unwrap();
        };
        let imported = |cat: &mut Catalogue| {
            let csv = "S,59990.0,59990.5\n";
            cat.import_exposure_csv(std::path::Path::new("x.csv"), csv.as_bytes())
                .unwrap();
        };
        let moved = |cat: &mut Catalogue| {
            let mut s = cat.source("S").unwrap();
            s.ra_deg += 1.0;
            cat.upsert_source(&s).unwrap();
        };
        let untouched = |_: &mut Catalogue| {};
        type Touch = fn(&mut Catalogue);
        let touches: [(Touch, bool); 4] = [
            (untouched, true),
            (only_dm, false),
            (imported, false),
            (moved, false),
        ];
        for (touch, removed) in touches {
            let dir = tempfile::tempdir().unwrap();
            let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
            let obs = observation("S", 1);
            cat.record_search(&obs, &run(7.0), &candidates(&obs, 2, 1))
                .unwrap();
            touch(&mut cat);
            let gone = cat.forget_observation(1, REAL).unwrap();
            assert_eq!(gone.source_removed, removed);
            assert_eq!(cat.source("S").is_ok(), !removed);
            assert_whole(&cat);
        }
    }

    /// The way out of a refused header: forget the observation recorded under the
    /// wrong one, and the corrected file is recorded as a new observation.
    #[test]
    fn after_forgetting_the_corrected_header_is_recorded() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let wrong = observation("A", 1);
        cat.record_search(&wrong, &run(7.0), &candidates(&wrong, 3, 1))
            .unwrap();
        let mut corrected = wrong.clone();
        corrected.header.start = corrected.header.start.plus_seconds(60.0);
        corrected.content_sha256 = "the corrected header file".into();
        let err = cat
            .record_search(&corrected, &run(7.0), &[])
            .unwrap_err()
            .to_string();
        assert!(err.contains("(observation 1)"), "{err}");
        assert!(err.contains("forget 1` and search again"), "{err}");
        cat.forget_observation(1, REAL).unwrap();
        let again = cat.record_search(&corrected, &run(7.0), &[]).unwrap();
        assert!(matches!(again, RecordOutcome::Inserted { .. }));
        let start: f64 = cat
            .conn()
            .query_row("SELECT start_mjd FROM observation", [], |r| r.get(0))
            .unwrap();
        assert_eq!(start, corrected.span_mjd().0);
        assert_whole(&cat);
    }
}
