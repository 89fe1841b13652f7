-- 0006: each observation keeps the text of its model's id column (a
-- serial number, a sample id: the row's label), and each source counts
-- the rows it gave that were left out for a missing value. 0004 and 0005
-- are other steps' numbers.
ALTER TABLE observations ADD COLUMN label BYTEA NOT NULL DEFAULT '\x'; -- any bytes, as raw
ALTER TABLE sources ADD COLUMN missing BIGINT NOT NULL DEFAULT 0;
