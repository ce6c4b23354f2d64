-- Schema version 5: a burst's id is never given to another burst. Bursts can be
-- taken back (`book demote`), and without AUTOINCREMENT SQLite gives the newest
-- id again to the next promotion, so an id in a published VOEvent packet or in
-- someone's notes would come to name another burst. The table is rebuilt with the
-- same columns and rows; the counter starts at the largest id held.
CREATE TABLE burst_v5 (
    id            INTEGER PRIMARY KEY AUTOINCREMENT,
    candidate_id  INTEGER NOT NULL UNIQUE REFERENCES candidate(id),
    source_id     INTEGER NOT NULL REFERENCES source(id),
    mjd_utc       REAL NOT NULL,          -- topocentric UTC MJD at infinite frequency
    snr           REAL NOT NULL,
    width_ms      REAL NOT NULL,
    dm            REAL NOT NULL,
    fluence_jy_ms REAL,                   -- only when the SEFD was known
    toa_tdb_mjd   REAL,                   -- barycentric TDB MJD, filled by the timing stage
    promoted_utc  TEXT NOT NULL
);
INSERT INTO burst_v5 (id, candidate_id, source_id, mjd_utc, snr, width_ms, dm, fluence_jy_ms,
                      toa_tdb_mjd, promoted_utc)
    SELECT id, candidate_id, source_id, mjd_utc, snr, width_ms, dm, fluence_jy_ms,
           toa_tdb_mjd, promoted_utc FROM burst;
DROP TABLE burst;
ALTER TABLE burst_v5 RENAME TO burst;
CREATE INDEX burst_by_source ON burst (source_id);
