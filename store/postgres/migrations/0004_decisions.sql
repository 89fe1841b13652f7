-- 0004: recorded decisions after an alert and the audit trail, the same
-- tables as the SQLite backend's schema version 4.
--
-- The audit trail is append-only: each record carries the SHA-256 of its
-- canonical encoding and of the previous record's hash (store.AuditHash),
-- so an edit, a deletion or a reordering is detected by store.VerifyAudit.
-- The triggers refuse UPDATE, DELETE and TRUNCATE through SQL; they stop
-- mistakes, not the tables' owner (who can disable them), which is what
-- the chain is for. Times are UTC unix nanoseconds, as everywhere.
--
-- Every write of these tables appends an audit record, and every append
-- first takes a transaction-level advisory lock of the schema's trail
-- (decide.go): writers in every process that shares the database append
-- one after the other, so no two records get the same number. The ids of
-- decisions, re-baselines and quiet periods are taken under that lock too
-- (MAX(id) + 1, as the SQLite backend does), so a copied history keeps
-- them and no sequence needs more than USAGE.

CREATE FUNCTION plumb_refuse_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION '%', TG_ARGV[0] USING ERRCODE = 'integrity_constraint_violation';
END
$$;

CREATE TABLE audit (
    seq     BIGINT PRIMARY KEY,
    at      BIGINT NOT NULL,
    actor   TEXT   NOT NULL,
    action  TEXT   NOT NULL,
    model   TEXT   NOT NULL,
    subject TEXT   NOT NULL,
    reason  TEXT   NOT NULL,
    before  TEXT   NOT NULL,
    after   TEXT   NOT NULL,
    prev    TEXT   NOT NULL,
    hash    TEXT   NOT NULL
);
CREATE INDEX audit_at ON audit (at);
CREATE TRIGGER audit_append_only BEFORE UPDATE OR DELETE ON audit
    FOR EACH ROW EXECUTE FUNCTION plumb_refuse_change('the audit trail is append-only');
CREATE TRIGGER audit_append_only_truncate BEFORE TRUNCATE ON audit
    FOR EACH STATEMENT EXECUTE FUNCTION plumb_refuse_change('the audit trail is append-only');

-- Exclusions and reinstatements of readings. The reading itself is never
-- touched; the latest decision on an observation is its state.
CREATE TABLE decisions (
    id        BIGINT PRIMARY KEY,
    model     TEXT   NOT NULL,
    obs_id    BIGINT NOT NULL REFERENCES observations(id),
    action    TEXT   NOT NULL CHECK (action IN ('exclude', 'reinstate')),
    actor     TEXT   NOT NULL,
    reason    TEXT   NOT NULL,
    at        BIGINT NOT NULL,
    subject   TEXT   NOT NULL,
    audit_seq BIGINT NOT NULL REFERENCES audit(seq)
);
CREATE INDEX decisions_model ON decisions (model, id);
CREATE INDEX decisions_obs ON decisions (obs_id, id);
CREATE TRIGGER decisions_append_only BEFORE UPDATE OR DELETE ON decisions
    FOR EACH ROW EXECUTE FUNCTION plumb_refuse_change('decisions are append-only');
CREATE TRIGGER decisions_append_only_truncate BEFORE TRUNCATE ON decisions
    FOR EACH STATEMENT EXECUTE FUNCTION plumb_refuse_change('decisions are append-only');

-- Re-baseline events: the drift baseline restarts at from_t.
CREATE TABLE rebaselines (
    id        BIGINT PRIMARY KEY,
    model     TEXT   NOT NULL,
    from_t    BIGINT NOT NULL,
    actor     TEXT   NOT NULL,
    reason    TEXT   NOT NULL,
    recorded  BIGINT NOT NULL,
    audit_seq BIGINT NOT NULL REFERENCES audit(seq)
);
CREATE INDEX rebaselines_model ON rebaselines (model, id);
CREATE TRIGGER rebaselines_append_only BEFORE UPDATE OR DELETE ON rebaselines
    FOR EACH ROW EXECUTE FUNCTION plumb_refuse_change('re-baselines are append-only');
CREATE TRIGGER rebaselines_append_only_truncate BEFORE TRUNCATE ON rebaselines
    FOR EACH STATEMENT EXECUTE FUNCTION plumb_refuse_change('re-baselines are append-only');

-- Quiet periods (model '' for all models). Ending one early updates end_t,
-- ended_by, end_reason and audit_seq (the record of the end).
CREATE TABLE quiet_periods (
    id         BIGINT PRIMARY KEY,
    model      TEXT   NOT NULL,
    start_t    BIGINT NOT NULL,
    end_t      BIGINT NOT NULL,
    owner      TEXT   NOT NULL,
    reason     TEXT   NOT NULL,
    created    BIGINT NOT NULL,
    ended_by   TEXT   NOT NULL DEFAULT '',
    end_reason TEXT   NOT NULL DEFAULT '',
    audit_seq  BIGINT NOT NULL REFERENCES audit(seq)
);
CREATE INDEX quiet_periods_end ON quiet_periods (end_t);
CREATE TRIGGER quiet_periods_no_delete BEFORE DELETE ON quiet_periods
    FOR EACH ROW EXECUTE FUNCTION plumb_refuse_change('quiet periods are kept');
CREATE TRIGGER quiet_periods_no_truncate BEFORE TRUNCATE ON quiet_periods
    FOR EACH STATEMENT EXECUTE FUNCTION plumb_refuse_change('quiet periods are kept');
