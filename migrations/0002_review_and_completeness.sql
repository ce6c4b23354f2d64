-- Schema version 2: human review history, a fluence limit on exposure, and
-- injection-recovery completeness per observation and configuration.

-- Every judgement ever made; the newest row per candidate is the current label.
CREATE TABLE review_label (
    id           INTEGER PRIMARY KEY,
    candidate_id INTEGER NOT NULL REFERENCES candidate(id),
    label        TEXT NOT NULL,
    reviewer     TEXT NOT NULL,
    labelled_utc TEXT NOT NULL,
    comment      TEXT NOT NULL DEFAULT ''
);
CREATE INDEX review_label_by_candidate ON review_label (candidate_id, id);

-- Fluence (Jy ms) above which the exposure was complete, when measured.
ALTER TABLE exposure ADD COLUMN fluence_limit_jy_ms REAL;

-- Results of injection-recovery runs; rows are only appended, the newest wins.
CREATE TABLE injection_completeness (
    id               INTEGER PRIMARY KEY,
    observation_id   INTEGER NOT NULL REFERENCES observation(id),
    config_sha256    TEXT NOT NULL,
    snr50            REAL,
    snr90            REAL,
    fluence50_jy_ms  REAL,
    fluence90_jy_ms  REAL,
    result_json      TEXT NOT NULL,
    recorded_utc     TEXT NOT NULL
);
CREATE INDEX injection_by_observation ON injection_completeness (observation_id, config_sha256);
