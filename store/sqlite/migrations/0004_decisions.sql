-- 0004: recorded decisions after an alert and the audit trail.
--
-- The audit trail is append-only: each record carries the SHA-256 of its
-- canonical encoding and of the previous record's hash (store.AuditHash),
-- so an edit, a deletion or a reordering is detected by store.VerifyAudit.
-- The triggers refuse UPDATE and DELETE through SQL; they stop mistakes,
-- not a determined editor (who can drop them), which is what the chain is
-- for. Times are UTC unix nanoseconds, as everywhere.

CREATE TABLE audit (
    seq     INTEGER PRIMARY KEY,
    at      INTEGER NOT NULL,
    actor   TEXT    NOT NULL,
    action  TEXT    NOT NULL,
    model   TEXT    NOT NULL,
    subject TEXT    NOT NULL,
    reason  TEXT    NOT NULL,
    before  TEXT    NOT NULL,
    after   TEXT    NOT NULL,
    prev    TEXT    NOT NULL,
    hash    TEXT    NOT NULL
);
CREATE INDEX audit_at ON audit (at);
CREATE TRIGGER audit_append_only_update BEFORE UPDATE ON audit
BEGIN SELECT RAISE(ABORT, 'the audit trail is append-only'); END;
CREATE TRIGGER audit_append_only_delete BEFORE DELETE ON audit
BEGIN SELECT RAISE(ABORT, 'the audit trail is append-only'); END;

-- Exclusions and reinstatements of readings. The reading itself is never
-- touched; the latest decision on an observation is its state.
CREATE TABLE decisions (
    id        INTEGER PRIMARY KEY,
    model     TEXT    NOT NULL,
    obs_id    INTEGER NOT NULL REFERENCES observations(id),
    action    TEXT    NOT NULL CHECK (action IN ('exclude', 'reinstate')),
    actor     TEXT    NOT NULL,
    reason    TEXT    NOT NULL,
    at        INTEGER NOT NULL,
    subject   TEXT    NOT NULL,
    audit_seq INTEGER NOT NULL REFERENCES audit(seq)
);
CREATE INDEX decisions_model ON decisions (model, id);
CREATE INDEX decisions_obs ON decisions (obs_id, id);
CREATE TRIGGER decisions_append_only_update BEFORE UPDATE ON decisions
BEGIN SELECT RAISE(ABORT, 'decisions are append-only'); END;
CREATE TRIGGER decisions_append_only_delete BEFORE DELETE ON decisions
BEGIN SELECT RAISE(ABORT, 'decisions are append-only'); END;

-- Re-baseline events: the drift baseline restarts at from_t.
CREATE TABLE rebaselines (
    id        INTEGER PRIMARY KEY,
    model     TEXT    NOT NULL,
    from_t    INTEGER NOT NULL,
    actor     TEXT    NOT NULL,
    reason    TEXT    NOT NULL,
    recorded  INTEGER NOT NULL,
    audit_seq INTEGER NOT NULL REFERENCES audit(seq)
);
CREATE INDEX rebaselines_model ON rebaselines (model, id);
CREATE TRIGGER rebaselines_append_only_update BEFORE UPDATE ON rebaselines
BEGIN SELECT RAISE(ABORT, 're-baselines are append-only'); END;
CREATE TRIGGER rebaselines_append_only_delete BEFORE DELETE ON rebaselines
BEGIN SELECT RAISE(ABORT, 're-baselines are append-only'); END;

-- Quiet periods (model '' for all models). Ending one early updates end_t,
-- ended_by, end_reason and audit_seq (the record of the end).
CREATE TABLE quiet_periods (
    id         INTEGER PRIMARY KEY,
    model      TEXT    NOT NULL,
    start_t    INTEGER NOT NULL,
    end_t      INTEGER NOT NULL,
    owner      TEXT    NOT NULL,
    reason     TEXT    NOT NULL,
    created    INTEGER NOT NULL,
    ended_by   TEXT    NOT NULL DEFAULT '',
    end_reason TEXT    NOT NULL DEFAULT '',
    audit_seq  INTEGER NOT NULL REFERENCES audit(seq)
);
CREATE INDEX quiet_periods_end ON quiet_periods (end_t);
CREATE TRIGGER quiet_periods_no_delete BEFORE DELETE ON quiet_periods
BEGIN SELECT RAISE(ABORT, 'quiet periods are kept'); END;
