-- 0001: the initial schema.
--
-- Times are UTC unix nanoseconds (INTEGER), NULL for the zero time.
-- Float vectors (values, DFBETAS, estimates, standard errors) are BLOBs of
-- little-endian IEEE 754 float64s, so NaN and infinities round-trip.
-- Scalar diagnostics are REAL columns; NaN is stored as NULL and read back
-- as NaN (SQLite has no NaN).

CREATE TABLE models (
    id   INTEGER PRIMARY KEY,
    name TEXT NOT NULL UNIQUE
);

-- One row per (model, file): the read state of the file's current generation
-- and what all its generations contributed.
CREATE TABLE sources (
    id              INTEGER PRIMARY KEY,
    model_id        INTEGER NOT NULL REFERENCES models(id),
    path            TEXT    NOT NULL,
    generation      INTEGER NOT NULL,
    inode           INTEGER NOT NULL,
    size            INTEGER NOT NULL,
    read_offset     INTEGER NOT NULL,
    line            INTEGER NOT NULL,
    fingerprint     TEXT    NOT NULL,
    fingerprint_len INTEGER NOT NULL,
    header          TEXT    NOT NULL,
    rows_total      INTEGER NOT NULL,
    quarantined     INTEGER NOT NULL,
    updated_at      INTEGER,
    UNIQUE (model_id, path)
);

-- Observations, with their diagnostics at arrival. verdict IS NULL means
-- the row arrived before the model was judging (no arrival diagnostics).
-- model_id and source_id carry no FOREIGN KEY clause: Ingest takes both
-- from rows it reads in the same transaction, and the two parent lookups
-- per row would cost about a quarter of the ingest rate.
CREATE TABLE observations (
    id          INTEGER PRIMARY KEY,
    model_id    INTEGER NOT NULL,
    source_id   INTEGER NOT NULL,
    generation  INTEGER NOT NULL,
    line        INTEGER NOT NULL,
    raw         TEXT    NOT NULL,
    vals        BLOB,
    t           INTEGER,
    arrived_at  INTEGER,
    leverage    REAL,
    residual    REAL,
    student_int REAL,
    student_ext REAL,
    cooks       REAL,
    dffits      REAL,
    dfbetas     BLOB,
    covratio    REAL,
    outlier_p   REAL,
    verdict     TEXT,
    flags       TEXT
);
-- Second guard against counting a row twice (the first is the read offset).
CREATE UNIQUE INDEX observations_provenance ON observations (source_id, line, generation);
CREATE INDEX observations_model ON observations (model_id, id);

CREATE TABLE quarantine (
    id         INTEGER PRIMARY KEY,
    model_id   INTEGER NOT NULL REFERENCES models(id),
    source_id  INTEGER NOT NULL REFERENCES sources(id),
    generation INTEGER NOT NULL,
    line       INTEGER NOT NULL,
    col        INTEGER NOT NULL,
    raw        TEXT    NOT NULL,
    reason     TEXT    NOT NULL,
    at         INTEGER
);
CREATE INDEX quarantine_model ON quarantine (model_id, id);

CREATE TABLE fits (
    id          INTEGER PRIMARY KEY,
    model_id    INTEGER NOT NULL REFERENCES models(id),
    at          INTEGER,
    n           INTEGER NOT NULL,
    p           INTEGER NOT NULL,
    terms       TEXT    NOT NULL, -- JSON array of coefficient names
    estimates   BLOB,
    std_errors  BLOB,
    sigma       REAL,
    r_squared   REAL,
    fragility   INTEGER NOT NULL,
    fragility_k INTEGER NOT NULL,
    detail      TEXT    NOT NULL,
    last_obs_id INTEGER NOT NULL
);
CREATE INDEX fits_model ON fits (model_id, id);

-- Only the verdicts a refit changed; at most one change per (observation, fit).
CREATE TABLE verdict_changes (
    obs_id       INTEGER NOT NULL REFERENCES observations(id),
    fit_id       INTEGER NOT NULL REFERENCES fits(id),
    model_id     INTEGER NOT NULL REFERENCES models(id),
    at           INTEGER,
    from_verdict TEXT    NOT NULL,
    to_verdict   TEXT    NOT NULL,
    flags        TEXT    NOT NULL,
    PRIMARY KEY (obs_id, fit_id)
) WITHOUT ROWID;
CREATE INDEX verdict_changes_model ON verdict_changes (model_id, obs_id);

CREATE TABLE model_states (
    model  TEXT PRIMARY KEY,
    state  TEXT NOT NULL,
    reason TEXT NOT NULL,
    at     INTEGER
) WITHOUT ROWID;

CREATE TABLE alerts (
    id         TEXT PRIMARY KEY,
    model      TEXT NOT NULL,
    kind       TEXT NOT NULL,
    subject    TEXT NOT NULL,
    severity   TEXT NOT NULL,
    state      TEXT NOT NULL,
    first_seen INTEGER,
    last_seen  INTEGER,
    doc        TEXT NOT NULL
);
CREATE INDEX alerts_last_seen ON alerts (last_seen DESC, id);
CREATE INDEX alerts_subject ON alerts (model, kind, subject);

-- The outbox: one row per alert event per route.
CREATE TABLE deliveries (
    id           INTEGER PRIMARY KEY,
    alert_id     TEXT    NOT NULL REFERENCES alerts(id),
    route        TEXT    NOT NULL,
    event_id     TEXT    NOT NULL,
    payload      BLOB,
    state        TEXT    NOT NULL,
    attempts     INTEGER NOT NULL,
    next_attempt INTEGER NOT NULL,
    last_error   TEXT    NOT NULL,
    created_at   INTEGER,
    updated_at   INTEGER
);
-- An event is enqueued once per route, however often PutAlert is retried.
CREATE UNIQUE INDEX deliveries_event ON deliveries (route, event_id) WHERE event_id <> '';
CREATE INDEX deliveries_due ON deliveries (state, next_attempt, id);
CREATE INDEX deliveries_alert ON deliveries (alert_id);
