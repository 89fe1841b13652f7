-- 0001: the initial schema, the same history as the SQLite backend's
-- schema versions 1 and 2.
--
-- Times are UTC unix nanoseconds (BIGINT), NULL for the zero time, so they
-- round-trip exactly (timestamptz keeps microseconds only).
-- Float vectors (values, DFBETAS) are BYTEA of little-endian IEEE 754
-- float64s; scalars are DOUBLE PRECISION, which holds NaN and infinities.
-- The text of a source line and a file's header are BYTEA: a line is kept
-- byte for byte whatever its encoding (a TEXT column rejects invalid UTF-8
-- and NUL).
-- Text that is sorted (paths, model names, alert ids) sorts bytewise
-- (COLLATE "C"), whatever the database's locale.

CREATE TABLE models (
    id   BIGSERIAL PRIMARY KEY,
    name TEXT NOT NULL UNIQUE
);

-- One row per (model, file): the read state of the file's current generation
-- and what all its generations contributed.
CREATE TABLE sources (
    id              BIGSERIAL PRIMARY KEY,
    model_id        BIGINT  NOT NULL REFERENCES models(id),
    path            TEXT    NOT NULL COLLATE "C",
    generation      INTEGER NOT NULL,
    inode           BIGINT  NOT NULL,
    size            BIGINT  NOT NULL,
    read_offset     BIGINT  NOT NULL,
    line            BIGINT  NOT NULL,
    fingerprint     TEXT    NOT NULL,
    fingerprint_len INTEGER NOT NULL,
    header          BYTEA   NOT NULL,
    rows_total      BIGINT  NOT NULL,
    quarantined     BIGINT  NOT NULL,
    updated_at      BIGINT,
    UNIQUE (model_id, path)
);

-- Observations, with their diagnostics at arrival. verdict IS NULL means
-- the row arrived before the model was judging (no arrival diagnostics).
-- model_id and source_id carry no FOREIGN KEY clause: Ingest takes both
-- from rows it reads (and locks) in the same transaction, and a foreign
-- key check per copied row would slow the bulk copy down.
CREATE TABLE observations (
    id          BIGSERIAL PRIMARY KEY,
    model_id    BIGINT  NOT NULL,
    source_id   BIGINT  NOT NULL,
    generation  INTEGER NOT NULL,
    line        BIGINT  NOT NULL,
    raw         BYTEA   NOT NULL,
    vals        BYTEA,
    t           BIGINT,
    arrived_at  BIGINT,
    leverage    DOUBLE PRECISION,
    residual    DOUBLE PRECISION,
    student_int DOUBLE PRECISION,
    student_ext DOUBLE PRECISION,
    cooks       DOUBLE PRECISION,
    dffits      DOUBLE PRECISION,
    dfbetas     BYTEA,
    covratio    DOUBLE PRECISION,
    outlier_p   DOUBLE PRECISION,
    verdict     TEXT,
    flags       TEXT
);
-- Second guard against counting a row twice (the first is the read offset).
CREATE UNIQUE INDEX observations_provenance ON observations (source_id, line, generation);
CREATE INDEX observations_model ON observations (model_id, id);

CREATE TABLE quarantine (
    id         BIGSERIAL PRIMARY KEY,
    model_id   BIGINT  NOT NULL REFERENCES models(id),
    source_id  BIGINT  NOT NULL REFERENCES sources(id),
    generation INTEGER NOT NULL,
    line       BIGINT  NOT NULL,
    col        INTEGER NOT NULL,
    raw        BYTEA   NOT NULL,
    reason     TEXT    NOT NULL,
    at         BIGINT
);
CREATE INDEX quarantine_model ON quarantine (model_id, id);

CREATE TABLE fits (
    id          BIGSERIAL PRIMARY KEY,
    model_id    BIGINT  NOT NULL REFERENCES models(id),
    at          BIGINT,
    n           BIGINT  NOT NULL,
    p           INTEGER NOT NULL,
    terms       TEXT[],
    estimates   BYTEA,
    std_errors  BYTEA,
    sigma       DOUBLE PRECISION NOT NULL,
    r_squared   DOUBLE PRECISION NOT NULL,
    fragility   INTEGER NOT NULL,
    fragility_k INTEGER NOT NULL,
    detail      TEXT    NOT NULL,
    last_obs_id BIGINT  NOT NULL
);
CREATE INDEX fits_model ON fits (model_id, id);

-- Only the verdicts a refit changed; at most one change per (observation, fit).
CREATE TABLE verdict_changes (
    obs_id       BIGINT NOT NULL REFERENCES observations(id),
    fit_id       BIGINT NOT NULL REFERENCES fits(id),
    model_id     BIGINT NOT NULL REFERENCES models(id),
    at           BIGINT,
    from_verdict TEXT   NOT NULL,
    to_verdict   TEXT   NOT NULL,
    flags        TEXT   NOT NULL,
    PRIMARY KEY (obs_id, fit_id)
);
CREATE INDEX verdict_changes_model ON verdict_changes (model_id, obs_id);

CREATE TABLE model_states (
    model  TEXT PRIMARY KEY COLLATE "C",
    state  TEXT NOT NULL,
    reason TEXT NOT NULL,
    at     BIGINT
);

CREATE TABLE alerts (
    id         TEXT PRIMARY KEY COLLATE "C",
    model      TEXT NOT NULL,
    kind       TEXT NOT NULL,
    subject    TEXT NOT NULL,
    severity   TEXT NOT NULL,
    state      TEXT NOT NULL,
    first_seen BIGINT,
    last_seen  BIGINT,
    doc        TEXT NOT NULL,
    -- Every write counts a revision, so that a conditional write can tell
    -- that the alert changed since it was read (store.ErrChanged).
    revision   BIGINT NOT NULL DEFAULT 0
);
CREATE INDEX alerts_last_seen ON alerts (last_seen DESC NULLS LAST, id);
CREATE INDEX alerts_subject ON alerts (model, kind, subject);

-- The outbox: one row per alert event per route.
CREATE TABLE deliveries (
    id           BIGSERIAL PRIMARY KEY,
    alert_id     TEXT    NOT NULL REFERENCES alerts(id),
    route        TEXT    NOT NULL,
    event_id     TEXT    NOT NULL,
    payload      BYTEA   NOT NULL,
    state        TEXT    NOT NULL,
    attempts     INTEGER NOT NULL,
    next_attempt BIGINT  NOT NULL,
    last_error   TEXT    NOT NULL,
    created_at   BIGINT,
    updated_at   BIGINT
);
-- An event is enqueued once per route, however often PutAlert is retried.
CREATE UNIQUE INDEX deliveries_event ON deliveries (route, event_id) WHERE event_id <> '';
CREATE INDEX deliveries_due ON deliveries (state, next_attempt, id);
CREATE INDEX deliveries_alert ON deliveries (alert_id);
