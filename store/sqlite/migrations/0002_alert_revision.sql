-- Every alert write counts a revision, so that a conditional write can
-- tell that the alert changed since it was read (store.ErrChanged).
ALTER TABLE alerts ADD COLUMN revision INTEGER NOT NULL DEFAULT 0;
