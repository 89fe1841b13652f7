-- 0004: recorded decisions after an alert and the audit trail, as the
-- SQLite backend's 0004.
--
-- The audit trail is append-only: each record carries the SHA-256 of its
-- canonical encoding and of the previous record's hash (store.Seal), so
-- an edit, a deletion or a reordering is detected by store.VerifyAudit.
-- The triggers refuse UPDATE and DELETE through SQL; they stop mistakes,
-- not a determined editor, which is what the chain is for. Writers of
-- the trail take a transaction-level advisory lock first, so the records
-- of several processes are chained one after the other. Times are UTC
-- unix nanoseconds (BIGINT), as everywhere: the hash covers them exactly.

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

CREATE FUNCTION plumb_append_only() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION '% is append-only', TG_TABLE_NAME;
END;
$$;
CREATE TRIGGER audit_append_only BEFORE UPDATE OR DELETE ON audit
    FOR EACH ROW EXECUTE FUNCTION plumb_append_only();

CREATE TABLE decisions (
    id        BIGSERIAL PRIMARY KEY,
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
    FOR EACH ROW EXECUTE FUNCTION plumb_append_only();

CREATE TABLE rebaselines (
    id        BIGSERIAL PRIMARY KEY,
    model     TEXT   NOT NULL,
    from_t    BIGINT NOT NULL,
    actor     TEXT   NOT NULL,
    reason    TEXT   NOT NULL,
    recorded  BIGINT NOT NULL,
    audit_seq BIGINT NOT NULL REFERENCES audit(seq)
);
CREATE INDEX rebaselines_model ON rebaselines (model, id);
CREATE TRIGGER rebaselines_append_only BEFORE UPDATE OR DELETE ON rebaselines
    FOR EACH ROW EXECUTE FUNCTION plumb_append_only();

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
CREATE FUNCTION plumb_keep_rows() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION 'rows of % are kept', TG_TABLE_NAME;
END;
$$;
CREATE TRIGGER quiet_periods_no_delete BEFORE DELETE ON quiet_periods
    FOR EACH ROW EXECUTE FUNCTION plumb_keep_rows();
