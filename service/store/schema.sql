-- Metadata of the embedded store. Long arrays live in Parquet files beside
-- the database; a row here names its file. Times are UTC ISO 8601 strings.
PRAGMA user_version = 11;

-- Every stored thing belongs to a project (a namespace); an API key sees
-- its own project's rows only. Without keys the service runs as project
-- "default" (loopback only).

CREATE TABLE IF NOT EXISTS api_keys (
    id              TEXT PRIMARY KEY,    -- k_..., the public half of a key
    project         TEXT NOT NULL,
    name            TEXT,
    scopes          TEXT NOT NULL,       -- space separated: read write admin
    secret_hash     TEXT NOT NULL UNIQUE,-- sha256 hex of the whole secret
    created_at      TEXT NOT NULL,
    revoked_at      TEXT,
    rate_per_s      REAL                 -- requests a second; null = the service default
);

CREATE TABLE IF NOT EXISTS histories (
    id              TEXT PRIMARY KEY,
    project         TEXT NOT NULL,
    name            TEXT,
    created_at      TEXT NOT NULL,
    sample_count    INTEGER NOT NULL,
    sample_rate_hz  REAL,
    duration_s      REAL,
    channels        TEXT NOT NULL,   -- JSON: [{name, unit, min_mpa, max_mpa}, ...]
    file            TEXT NOT NULL    -- Parquet file, relative to the data directory
);

CREATE INDEX IF NOT EXISTS histories_project ON histories(project, created_at);

CREATE TABLE IF NOT EXISTS assessments (
    id              TEXT PRIMARY KEY,
    project         TEXT NOT NULL,
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
CREATE INDEX IF NOT EXISTS assessments_project ON assessments(project, created_at);

CREATE TABLE IF NOT EXISTS jobs (
    id              TEXT PRIMARY KEY,
    project         TEXT NOT NULL,
    kind            TEXT NOT NULL,   -- assessment
    state           TEXT NOT NULL,   -- queued | running | done | failed
    created_at      TEXT NOT NULL,
    updated_at      TEXT NOT NULL,
    points_total    INTEGER NOT NULL,
    points_done     INTEGER NOT NULL DEFAULT 0,
    assessment_id   TEXT,
    superposition_id TEXT,
    error           TEXT,            -- JSON problem details when failed
    request         TEXT,            -- JSON: what re-runs the job after a restart
    input_file      TEXT             -- Parquet: inline samples or loads the job reads
);

-- Finite-element unit-load stresses (per node and load case) and the
-- superpositions run with them: damage per node under measured loads.
CREATE TABLE IF NOT EXISTS unit_stress_sets (
    id              TEXT PRIMARY KEY,
    project         TEXT NOT NULL,
    name            TEXT,
    created_at      TEXT NOT NULL,
    nodes           INTEGER NOT NULL,
    load_cases      TEXT NOT NULL,   -- JSON list, in the order of the stored array
    components      INTEGER NOT NULL,-- 3 (plane stress) or 6
    file            TEXT NOT NULL    -- Parquet: node, load_case, components (MPa per load unit)
);

CREATE TABLE IF NOT EXISTS superpositions (
    id              TEXT PRIMARY KEY,
    project         TEXT NOT NULL,
    unit_stress_id  TEXT,
    created_at      TEXT NOT NULL,
    request         TEXT NOT NULL,   -- JSON: settings as posted (without the loads)
    result          TEXT NOT NULL,   -- JSON: summary and the worst nodes in full
    nodes_file      TEXT NOT NULL    -- Parquet: node, damage, max_abs_equivalent
);

-- Duty cycles: stored events combined into a design life, with their result.
CREATE TABLE IF NOT EXISTS duty_cycles (
    id              TEXT PRIMARY KEY,
    project         TEXT NOT NULL,
    name            TEXT,
    created_at      TEXT NOT NULL,
    request         TEXT NOT NULL,   -- JSON: events, target, settings, variants as posted
    result          TEXT NOT NULL    -- JSON: per point design damage, verdict, event shares
);
CREATE INDEX IF NOT EXISTS duty_cycles_project ON duty_cycles(project, created_at);

-- Spectral assessments: PSD load cases of a vibration test profile, with their result.
CREATE TABLE IF NOT EXISTS spectra (
    id              TEXT PRIMARY KEY,
    project         TEXT NOT NULL,
    name            TEXT,
    created_at      TEXT NOT NULL,
    request         TEXT NOT NULL,   -- JSON: load cases (PSD tables or history references)
    result          TEXT NOT NULL    -- JSON: per method damage, life, reserve factor
);
CREATE INDEX IF NOT EXISTS spectra_project ON spectra(project, created_at);

-- Edited drive signals (shorter recordings that keep the damage) and their report.
CREATE TABLE IF NOT EXISTS edits (
    id              TEXT PRIMARY KEY,
    project         TEXT NOT NULL,
    history_id      TEXT REFERENCES histories(id) ON DELETE SET NULL,
    created_at      TEXT NOT NULL,
    request         TEXT NOT NULL,   -- JSON: as posted
    result          TEXT NOT NULL,   -- JSON: per channel damage and length kept
    file            TEXT NOT NULL    -- Parquet: source_index, time_s?, channels (MPa)
);
CREATE INDEX IF NOT EXISTS edits_project ON edits(project, created_at);

-- What users enter themselves: S-N curves (from points or Basquin constants)
-- and materials (strengths from a tensile test or a data sheet), by name.
CREATE TABLE IF NOT EXISTS user_curves (
    project         TEXT NOT NULL,
    name            TEXT NOT NULL,
    created_at      TEXT NOT NULL,
    definition      TEXT NOT NULL,   -- JSON: {curve_points | basquin, below_limit?, source?}
    PRIMARY KEY (project, name)
);

CREATE TABLE IF NOT EXISTS materials (
    project         TEXT NOT NULL,
    name            TEXT NOT NULL,
    created_at      TEXT NOT NULL,
    properties      TEXT NOT NULL,   -- JSON: strengths in MPa, walker_exponent, source
    PRIMARY KEY (project, name)
);

-- Inline samples of an assessment (small by nature: they came in a JSON
-- body), kept in the same transaction as its result, as float64 bytes in MPa.
CREATE TABLE IF NOT EXISTS assessment_samples (
    assessment_id   TEXT NOT NULL REFERENCES assessments(id) ON DELETE CASCADE,
    point           TEXT NOT NULL,
    samples         BLOB NOT NULL,
    PRIMARY KEY (assessment_id, point)
);

-- The ledger: running damage per asset and point over successive blocks.
-- An asset's name is unique in its project; the tables below hold its id.
CREATE TABLE IF NOT EXISTS assets (
    id              TEXT PRIMARY KEY,
    project         TEXT NOT NULL,
    name            TEXT NOT NULL,
    created_at      TEXT NOT NULL,
    description     TEXT,
    UNIQUE (project, name)
);

CREATE TABLE IF NOT EXISTS ledger_points (
    asset_id        TEXT NOT NULL REFERENCES assets(id) ON DELETE CASCADE,
    point           TEXT NOT NULL,
    created_at      TEXT NOT NULL,
    unit            TEXT NOT NULL,
    youngs_modulus  REAL,
    settings_version INTEGER NOT NULL,
    -- running state under the current settings version
    last_seq        INTEGER,         -- highest sequence number posted (voided included)
    counting_state  TEXT,            -- JSON CountingState: the residue carried forward
    damage          REAL NOT NULL DEFAULT 0,   -- Miner sum of the closed cycles
    residue_damage  REAL NOT NULL DEFAULT 0,   -- what closing the residue now would add
    cycles          REAL NOT NULL DEFAULT 0,
    hours           REAL NOT NULL DEFAULT 0,   -- recorded hours counted
    overload        INTEGER NOT NULL DEFAULT 0,
    last_block_at   TEXT,            -- recording time of the latest block counted
    updated_at      TEXT NOT NULL,
    PRIMARY KEY (asset_id, point)
);

CREATE TABLE IF NOT EXISTS point_settings (
    asset_id        TEXT NOT NULL,
    point           TEXT NOT NULL,
    version         INTEGER NOT NULL,
    created_at      TEXT NOT NULL,
    settings        TEXT NOT NULL,   -- JSON, as given
    resolved        TEXT NOT NULL,   -- JSON, materials and user curves resolved
    PRIMARY KEY (asset_id, point, version)
);

CREATE TABLE IF NOT EXISTS blocks (
    id              TEXT PRIMARY KEY,
    asset_id        TEXT NOT NULL REFERENCES assets(id) ON DELETE CASCADE,
    seq             INTEGER NOT NULL,
    created_at      TEXT NOT NULL,
    recorded_at     TEXT,
    idempotency_key TEXT,
    content_hash    TEXT NOT NULL,
    sample_rate_hz  REAL NOT NULL,
    sample_count    INTEGER NOT NULL,
    points          TEXT NOT NULL,   -- JSON list of point names
    file            TEXT NOT NULL,   -- Parquet of the block's samples (MPa)
    voided_at       TEXT,
    response        TEXT             -- JSON: the first answer, replayed on a retry
);
CREATE UNIQUE INDEX IF NOT EXISTS blocks_key ON blocks(asset_id, idempotency_key)
    WHERE idempotency_key IS NOT NULL;

CREATE TABLE IF NOT EXISTS block_points (
    asset_id        TEXT NOT NULL,
    point           TEXT NOT NULL,
    seq             INTEGER NOT NULL,
    block_id        TEXT NOT NULL REFERENCES blocks(id) ON DELETE CASCADE,
    PRIMARY KEY (asset_id, point, seq)
);

-- Every change of a point's totals: a block, a voided block, new settings.
CREATE TABLE IF NOT EXISTS point_totals (
    asset_id        TEXT NOT NULL,
    point           TEXT NOT NULL,
    at              TEXT NOT NULL,
    reason          TEXT NOT NULL,   -- block | void | settings | late_block
    block_id        TEXT,
    settings_version INTEGER NOT NULL,
    damage          REAL,            -- null = infinite (static overload)
    residue_damage  REAL,
    hours           REAL NOT NULL,
    cycles          REAL NOT NULL
);
CREATE INDEX IF NOT EXISTS point_totals_point ON point_totals(asset_id, point, at);

-- Answers to POSTs that carried an Idempotency-Key (histories, assessments):
-- a retry with the same key and the same request gets the same answer and
-- creates nothing; the same key with another request is a conflict.
CREATE TABLE IF NOT EXISTS idempotency (
    project         TEXT NOT NULL,
    route           TEXT NOT NULL,
    key             TEXT NOT NULL,
    request_hash    TEXT NOT NULL,   -- sha256 of the query and the body
    status          INTEGER NOT NULL,
    body            TEXT NOT NULL,   -- the JSON answered
    location        TEXT,
    created_at      TEXT NOT NULL,
    PRIMARY KEY (project, route, key)
);

-- Who changed what: every request that changed something (POST, PUT,
-- DELETE answered 2xx) and every key made or revoked on the command line.
CREATE TABLE IF NOT EXISTS audit (
    seq             INTEGER PRIMARY KEY AUTOINCREMENT,
    project         TEXT NOT NULL,
    at              TEXT NOT NULL,
    key_id          TEXT,            -- the API key that asked (null: open mode or the CLI)
    action          TEXT NOT NULL,   -- e.g. ledger.post_block, histories.delete, keys.revoke
    method          TEXT,
    path            TEXT,
    status          INTEGER,
    target          TEXT             -- the id of what was made or changed, when known
);
CREATE INDEX IF NOT EXISTS audit_project ON audit(project, seq);
