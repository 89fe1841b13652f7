-- 0002: which daemon owns each model (see Lease in own.go). The ownership
-- itself is a session-level advisory lock keyed by lock_key; this row says
-- who took it, and backend_pid finds the session holding it in pg_locks
-- (when that session is gone, the owner is not alive).
CREATE TABLE model_owners (
    model       TEXT PRIMARY KEY COLLATE "C",
    lock_key    BIGINT  NOT NULL,
    host        TEXT    NOT NULL,
    pid         INTEGER NOT NULL,
    label       TEXT    NOT NULL,
    backend_pid INTEGER NOT NULL,
    since       BIGINT  NOT NULL
);
