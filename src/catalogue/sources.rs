//! Sources: named sky positions with an optional reference DM.

use rusqlite::{OptionalExtension, params};
use serde::Serialize;

use super::{Catalogue, catalogue_error};
use crate::error::{Error, Result};
use crate::obs::check_sky_position;

/// A source in the catalogue.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SourceRecord {
    /// Catalogue id (0 before it is stored).
    pub id: i64,
    /// Unique name.
    pub name: String,
    /// ICRS right ascension in degrees.
    pub ra_deg: f64,
    /// ICRS declination in degrees.
    pub dec_deg: f64,
    /// Reference DM in pc cm⁻³, used to assign bursts automatically.
    pub dm_ref: Option<f64>,
    /// Free text.
    pub notes: String,
}

impl SourceRecord {
    /// Angular distance in degrees to (`ra_deg`, `dec_deg`) by the haversine
    /// formula (well-conditioned at small separations; common practice).
    pub fn separation_deg(&self, ra_deg: f64, dec_deg: f64) -> f64 {
        let (d1, d2) = (self.dec_deg.to_radians(), dec_deg.to_radians());
        let dra = (ra_deg - self.ra_deg).to_radians();
        let h = ((d2 - d1) / 2.0).sin().powi(2) + d1.cos() * d2.cos() * (dra / 2.0).sin().powi(2);
        (2.0 * h.sqrt().min(1.0).asin()).to_degrees()
    }

    fn validate(&self) -> Result<()> {
        if self.name.trim().is_empty() {
            return Err(Error::Config("source name is empty".into()));
        }
        check_sky_position(self.ra_deg, self.dec_deg).map_err(Error::Config)?;
        if let Some(dm) = self.dm_ref
            && !(dm.is_finite() && dm >= 0.0)
        {
            return Err(Error::Config(format!(
                "reference DM must be >= 0, got {dm}"
            )));
        }
        Ok(())
    }
}

/// A source to add or update; a `None` DM or notes keeps the stored value (none for
/// a new source).
#[derive(Debug, Clone, PartialEq)]
pub struct SourceEdit {
    /// Unique name.
    pub name: String,
    /// ICRS right ascension in degrees.
    pub ra_deg: f64,
    /// ICRS declination in degrees.
    pub dec_deg: f64,
    /// Reference DM in pc cm⁻³.
    pub dm_ref: Option<f64>,
    /// Free text.
    pub notes: Option<String>,
}

/// What [`Catalogue::upsert_source`] did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SourceUpdate {
    /// The source's id.
    pub id: i64,
    /// Whether it was added (else updated).
    pub new: bool,
    /// Stored barycentric TOAs of its bursts removed because its position changed.
    pub toas_cleared: usize,
}

impl Catalogue {
    /// Adds a source, or replaces position, DM and notes of an existing one with the
    /// same name (see [`Catalogue::edit_source`] to keep what is not given). When the
    /// position changes, the stored barycentric TOAs of the
    /// source's bursts are removed in the same transaction: they were computed
    /// towards the old position (0.5° moves one by up to 1.7 s), and a period search
    /// must not use them unsaid; `book barycentre` stores new ones, and until then
    /// the period commands compute them and say so.
    ///
    /// # Errors
    /// Invalid position or DM, or an SQLite failure.
    pub fn upsert_source(&mut self, s: &SourceRecord) -> Result<SourceUpdate> {
        s.validate()?;
        let path = self.path().to_path_buf();
        self.write(|tx| {
            let e = |e| super::sql_error(&path, e);
            let existing: Option<(i64, f64, f64)> = tx
                .query_row(
                    "SELECT id, ra_deg, dec_deg FROM source WHERE name = ?1",
                    [&s.name],
                    |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
                )
                .optional()
                .map_err(e)?;
            tx.execute(
                "INSERT INTO source (name, ra_deg, dec_deg, dm_ref, notes)
                 VALUES (?1, ?2, ?3, ?4, ?5)
                 ON CONFLICT (name) DO UPDATE SET ra_deg = excluded.ra_deg,
                     dec_deg = excluded.dec_deg, dm_ref = excluded.dm_ref, notes = excluded.notes",
                params![s.name, s.ra_deg, s.dec_deg, s.dm_ref, s.notes],
            )
            .map_err(e)?;
            let id = tx
                .query_row("SELECT id FROM source WHERE name = ?1", [&s.name], |r| {
                    r.get(0)
                })
                .map_err(e)?;
            let moved = existing.is_some_and(|(_, ra, dec)| (ra, dec) != (s.ra_deg, s.dec_deg));
            let toas_cleared = if moved {
                tx.execute(
                    "UPDATE burst SET toa_tdb_mjd = NULL
                     WHERE source_id = ?1 AND toa_tdb_mjd IS NOT NULL",
                    [id],
                )
                .map_err(e)?
            } else {
                0
            };
            Ok(SourceUpdate {
                id,
                new: existing.is_none(),
                toas_cleared,
            })
        })
    }

    /// Adds or updates a source as `book source add` does: a DM or notes the edit
    /// does not give keep their stored values, so refining a position loses nothing.
    ///
    /// # Errors
    /// As [`Catalogue::upsert_source`].
    pub fn edit_source(&mut self, edit: &SourceEdit) -> Result<SourceUpdate> {
        let stored = self.sources()?.into_iter().find(|s| s.name == edit.name);
        let record = SourceRecord {
            id: 0,
            name: edit.name.clone(),
            ra_deg: edit.ra_deg,
            dec_deg: edit.dec_deg,
            dm_ref: edit.dm_ref.or(stored.as_ref().and_then(|s| s.dm_ref)),
            notes: edit
                .notes
                .clone()
                .or(stored.map(|s| s.notes))
                .unwrap_or_default(),
        };
        self.upsert_source(&record)
    }

    /// All sources, by name.
    ///
    /// # Errors
    /// An SQLite failure.
    pub fn sources(&self) -> Result<Vec<SourceRecord>> {
        let mut stmt = self
            .conn()
            .prepare("SELECT id, name, ra_deg, dec_deg, dm_ref, notes FROM source ORDER BY name")
            .map_err(|e| self.err(e))?;
        let rows = stmt
            .query_map([], |r| {
                Ok(SourceRecord {
                    id: r.get(0)?,
                    name: r.get(1)?,
                    ra_deg: r.get(2)?,
                    dec_deg: r.get(3)?,
                    dm_ref: r.get(4)?,
                    notes: r.get(5)?,
                })
            })
            .map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<_>>()
            .map_err(|e| self.err(e))
    }

    /// The source called `name`.
    ///
    /// # Errors
    /// [`Error::Catalogue`] if there is none.
    pub fn source(&self, name: &str) -> Result<SourceRecord> {
        self.sources()?
            .into_iter()
            .find(|s| s.name == name)
            .ok_or_else(|| {
                catalogue_error(
                    self.path(),
                    format!(
                        "has no source named {name:?} (add it with `burstbook book source add`)"
                    ),
                )
            })
    }

    /// Refuses a filter naming a source the catalogue does not hold: a mistyped
    /// name must be an error, not an empty answer that reads as "nothing there".
    /// `None` (every source) passes.
    ///
    /// # Errors
    /// [`Error::Catalogue`] naming the unknown source.
    pub fn check_source_filter(&self, name: Option<&str>) -> Result<()> {
        name.map_or(Ok(()), |n| self.source(n).map(drop))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn src(ra: f64, dec: f64) -> SourceRecord {
        SourceRecord {
            id: 0,
            name: "S".into(),
            ra_deg: ra,
            dec_deg: dec,
            dm_ref: None,
            notes: String::new(),
        }
    }

    #[test]
    fn separation_matches_spherical_trigonometry() {
        // Along a meridian the separation is the Dec difference; on the equator,
        // the RA difference; pole to equator is 90 degrees.
        assert!((src(10.0, 20.0).separation_deg(10.0, 21.5) - 1.5).abs() < 1e-12);
        assert!((src(359.5, 0.0).separation_deg(0.5, 0.0) - 1.0).abs() < 1e-12);
        assert!((src(0.0, 90.0).separation_deg(123.0, 0.0) - 90.0).abs() < 1e-12);
        // At Dec 60 a 2-degree RA step is about 1 degree on the sky:
        // cos(d) = sin²60 + cos²60·cos 2° (spherical law of cosines).
        let exact = (0.75f64 + 0.25 * 2f64.to_radians().cos())
            .acos()
            .to_degrees();
        assert!((src(10.0, 60.0).separation_deg(12.0, 60.0) - exact).abs() < 1e-9);
    }

    #[test]
    fn upsert_updates_in_place_and_rejects_bad_positions() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let added = cat.upsert_source(&src(10.0, 20.0)).unwrap();
        assert!(added.new);
        let mut moved = src(11.0, 21.0);
        moved.dm_ref = Some(350.0);
        let updated = cat.upsert_source(&moved).unwrap();
        assert_eq!((updated.id, updated.new), (added.id, false));
        let back = cat.source("S").unwrap();
        assert_eq!((back.ra_deg, back.dm_ref), (11.0, Some(350.0)));
        assert!(cat.upsert_source(&src(400.0, 0.0)).is_err());
        assert!(cat.upsert_source(&src(10.0, -91.0)).is_err());
        assert!(cat.source("nope").is_err());
    }

    /// A stored barycentric TOA depends on the source position: 0.5° moves it by up to
    /// 1.7 s (500 light-seconds × 0.5° in radians; common practice), 0.41 s for an
    /// invented source at RA 84.6°. Moving a source must not leave the old TOAs for
    /// the periodicity tests to use unsaid; a DM or notes change keeps them.
    #[test]
    fn moving_a_source_clears_its_stored_toas() {
        use crate::catalogue::synthetic::{candidates, observation, run};
        use crate::catalogue::{AssignTolerance, CandidateFilter};
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("S", 4);
        cat.record_search(&obs, &run(7.0), &candidates(&obs, 3, 4))
            .unwrap();
        let tol = AssignTolerance {
            radius_deg: 1.0,
            dm: 1.0,
        };
        for r in cat.candidates(&CandidateFilter::default()).unwrap() {
            cat.promote(r.id, Some("S"), tol).unwrap();
        }
        let toas: Vec<(i64, f64)> = cat
            .burst_timing("S")
            .unwrap()
            .iter()
            .map(|b| (b.burst_id, b.mjd_utc + 0.005))
            .collect();
        cat.set_barycentric_toas(&toas).unwrap();
        let stored = |cat: &Catalogue| {
            cat.burst_timing("S")
                .unwrap()
                .iter()
                .filter(|b| b.toa_tdb_mjd.is_some())
                .count()
        };
        let mut same_place = cat.source("S").unwrap();
        same_place.dm_ref = Some(42.0);
        same_place.notes = "repeater".into();
        assert_eq!(cat.upsert_source(&same_place).unwrap().toas_cleared, 0);
        assert_eq!(stored(&cat), 3);
        let mut moved = same_place.clone();
        moved.ra_deg += 0.5;
        let update = cat.upsert_source(&moved).unwrap();
        assert_eq!((update.new, update.toas_cleared), (false, 3));
        assert_eq!(stored(&cat), 0);
    }

    /// Refining a position (`book source add NAME --ra … --dec …`) must not wipe what
    /// the command did not mention: the reference DM (which sets the summary's sweep
    /// windows and automatic promotion) and the notes were lost that way.
    #[test]
    fn an_update_keeps_the_dm_and_notes_it_does_not_give() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let edit = |ra: f64, dm_ref: Option<f64>, notes: Option<&str>| SourceEdit {
            name: "S".into(),
            ra_deg: ra,
            dec_deg: 20.0,
            dm_ref,
            notes: notes.map(Into::into),
        };
        let added = cat.edit_source(&edit(10.0, Some(412.7), Some("repeater")));
        assert!(added.unwrap().new);
        cat.edit_source(&edit(10.01, None, None)).unwrap();
        let back = cat.source("S").unwrap();
        assert_eq!(
            (back.ra_deg, back.dm_ref, back.notes.as_str()),
            (10.01, Some(412.7), "repeater")
        );
        cat.edit_source(&edit(10.01, Some(413.0), Some("refined")))
            .unwrap();
        let back = cat.source("S").unwrap();
        assert_eq!((back.dm_ref, back.notes.as_str()), (Some(413.0), "refined"));
        let fresh = cat.edit_source(&SourceEdit {
            name: "T".into(),
            ..edit(1.0, None, None)
        });
        assert!(fresh.unwrap().new);
        let t = cat.source("T").unwrap();
        assert_eq!((t.dm_ref, t.notes.as_str()), (None, ""));
    }
}
