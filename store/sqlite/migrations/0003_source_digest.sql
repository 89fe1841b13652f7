-- The read state of a file keeps a digest of the bytes consumed so far
-- (a serialised SHA-256 state), so that a file saved anew under the same
-- name (a new inode) can be told to be the same file grown.
ALTER TABLE sources ADD COLUMN digest BLOB NOT NULL DEFAULT x'';
