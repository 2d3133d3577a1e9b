-- Metadata of the embedded store. Long arrays live in Parquet files beside
-- the database; a row here names its file. Times are UTC ISO 8601 strings.
PRAGMA user_version = 4;

CREATE TABLE IF NOT EXISTS histories (
    id              TEXT PRIMARY KEY,
    name            TEXT,
    created_at      TEXT NOT NULL,
    sample_count    INTEGER NOT NULL,
    sample_rate_hz  REAL,
    duration_s      REAL,
    channels        TEXT NOT NULL,   -- JSON: [{name, unit, min_mpa, max_mpa}, ...]
    file            TEXT NOT NULL    -- Parquet file, relative to the data directory
);

CREATE TABLE IF NOT EXISTS assessments (
    id              TEXT PRIMARY KEY,
    history_id      TEXT REFERENCES histories(id) ON DELETE SET NULL,
    created_at      TEXT NOT NULL,
    state           TEXT NOT NULL,   -- done | failed
    request         TEXT NOT NULL,   -- JSON: the settings as posted
    result          TEXT,            -- JSON: per-point results
    samples_file    TEXT             -- Parquet file of the samples assessed (MPa): the
                                     -- history's file, or a copy of inline samples;
                                     -- cycle tables are recounted from it on request
);

CREATE INDEX IF NOT EXISTS assessments_history ON assessments(history_id);

CREATE TABLE IF NOT EXISTS jobs (
    id              TEXT PRIMARY KEY,
    kind            TEXT NOT NULL,   -- assessment
    state           TEXT NOT NULL,   -- queued | running | done | failed
    created_at      TEXT NOT NULL,
    updated_at      TEXT NOT NULL,
    points_total    INTEGER NOT NULL,
    points_done     INTEGER NOT NULL DEFAULT 0,
    assessment_id   TEXT,
    error           TEXT             -- JSON problem details when failed
);

-- What users enter themselves: S-N curves (from points or Basquin constants)
-- and materials (strengths from a tensile test or a data sheet), by name.
CREATE TABLE IF NOT EXISTS user_curves (
    name            TEXT PRIMARY KEY,
    created_at      TEXT NOT NULL,
    definition      TEXT NOT NULL    -- JSON: {curve_points | basquin, below_limit?, source?}
);

CREATE TABLE IF NOT EXISTS materials (
    name            TEXT PRIMARY KEY,
    created_at      TEXT NOT NULL,
    properties      TEXT NOT NULL    -- JSON: strengths in MPa, walker_exponent, source
);

-- Inline samples of an assessment (small by nature: they came in a JSON
-- body), kept in the same transaction as its result, as float64 bytes in MPa.
CREATE TABLE IF NOT EXISTS assessment_samples (
    assessment_id   TEXT NOT NULL REFERENCES assessments(id) ON DELETE CASCADE,
    point           TEXT NOT NULL,
    samples         BLOB NOT NULL,
    PRIMARY KEY (assessment_id, point)
);
