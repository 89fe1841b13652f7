-- 0005: a quarantined row keeps the name and the position (1-based field)
-- of the column that could not be read, beside its byte column, so that
-- a reason like "not a time" can say where; rows kept before have ''
-- and 0 (not known).
ALTER TABLE quarantine ADD COLUMN col_name TEXT NOT NULL DEFAULT '';
ALTER TABLE quarantine ADD COLUMN field INTEGER NOT NULL DEFAULT 0;
