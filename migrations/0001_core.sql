-- burstbook catalogue, schema version 1: sources, observations, search runs,
-- candidates, exposure and bursts. Times are UTC MJD unless the column says TDB.

CREATE TABLE source (
    id          INTEGER PRIMARY KEY,
    name        TEXT NOT NULL UNIQUE,
    ra_deg      REAL NOT NULL,            -- ICRS right ascension, degrees
    dec_deg     REAL NOT NULL,            -- ICRS declination, degrees
    dm_ref      REAL,                     -- reference DM, pc cm^-3 (NULL: not known yet)
    notes       TEXT NOT NULL DEFAULT ''
);

-- One row per distinct file content (SHA-256 of the bytes; native: header + .npy).
CREATE TABLE observation (
    id              INTEGER PRIMARY KEY,
    content_sha256  TEXT NOT NULL UNIQUE,
    path            TEXT NOT NULL,        -- path when first recorded
    source_name     TEXT NOT NULL,        -- as written in the header
    ra_deg          REAL NOT NULL,
    dec_deg         REAL NOT NULL,
    site            TEXT NOT NULL,
    start_mjd       REAL NOT NULL,        -- UTC MJD of the first sample
    duration_s      REAL NOT NULL,
    freq_lo_mhz     REAL NOT NULL,
    freq_hi_mhz     REAL NOT NULL,
    masked_fraction REAL NOT NULL,        -- fraction of channels with weight 0
    header_json     TEXT NOT NULL,
    recorded_utc    TEXT NOT NULL
);
CREATE INDEX observation_by_source ON observation (source_name);

-- One row per (observation, configuration): a run is written whole or not at all.
CREATE TABLE search_run (
    id                INTEGER PRIMARY KEY,
    observation_id    INTEGER NOT NULL REFERENCES observation(id),
    config_sha256     TEXT NOT NULL,
    burstbook_version TEXT NOT NULL,
    config_json       TEXT NOT NULL,
    dm_plan_json      TEXT NOT NULL,
    snr_threshold     REAL,
    started_utc       TEXT NOT NULL,
    finished_utc      TEXT NOT NULL,
    status            TEXT NOT NULL CHECK (status IN ('complete', 'failed')),
    n_candidates      INTEGER NOT NULL,
    UNIQUE (observation_id, config_sha256)
);

CREATE TABLE candidate (
    id               INTEGER PRIMARY KEY,
    run_id           INTEGER NOT NULL REFERENCES search_run(id),
    file             TEXT NOT NULL,
    t_inf_s          REAL NOT NULL,
    mjd_inf          REAL NOT NULL,       -- topocentric UTC MJD at infinite frequency
    dm               REAL NOT NULL,       -- pc cm^-3
    dm_lo            REAL NOT NULL,
    dm_hi            REAL NOT NULL,
    width_ms         REAL NOT NULL,
    snr              REAL NOT NULL,
    cluster_size     INTEGER NOT NULL,
    verdict          TEXT NOT NULL CHECK (verdict IN ('astrophysical', 'rfi', 'unsure')),
    reasons_json     TEXT NOT NULL,
    snr_dm0_ratio    REAL NOT NULL,
    dm_curve_misfit  REAL NOT NULL,
    band_fraction    REAL NOT NULL,
    modulation_index REAL NOT NULL,
    fluence_jy_ms    REAL
);
-- (run_id, dm) serves both "candidates of a run" and "source + DM range" queries.
CREATE INDEX candidate_by_run_dm ON candidate (run_id, dm);
CREATE INDEX candidate_by_dm ON candidate (dm);
CREATE INDEX candidate_by_mjd ON candidate (mjd_inf);

-- Time on a source that was searched, from our runs (run_id set) or imported.
CREATE TABLE exposure (
    id            INTEGER PRIMARY KEY,
    source_id     INTEGER NOT NULL REFERENCES source(id),
    start_mjd     REAL NOT NULL,
    end_mjd       REAL NOT NULL CHECK (end_mjd > start_mjd),
    snr_threshold REAL,                   -- S/N above which the search was complete
    run_id        INTEGER REFERENCES search_run(id)
);
CREATE UNIQUE INDEX exposure_unique ON exposure (
    source_id, start_mjd, end_mjd, IFNULL(snr_threshold, -1), IFNULL(run_id, -1)
);

-- Candidates confirmed astrophysical and assigned to a source.
CREATE TABLE burst (
    id            INTEGER PRIMARY KEY,
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
CREATE INDEX burst_by_source ON burst (source_id);
