-- Migration 3: raw_block becomes an ordinary rowid table.
-- A WITHOUT ROWID table keeps little more than 1,000 bytes of a row on a
-- 4 KiB b-tree page and moves the rest to an overflow page of its own (the
-- SQLite documentation advises WITHOUT ROWID only for small rows). A block of
-- 1,000 samples encodes to about 1.5 KB, so every block took a page and a
-- half of mostly empty overflow: 4.7 bytes per sample on disk for 1.5 bytes
-- of data. A rowid table keeps rows up to about 4,000 bytes inside the page.
-- Rows are copied in key order; existing files grow no larger on the way.
DROP VIEW raw_block_utc;

CREATE TABLE raw_block_v3 (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  first_index       INTEGER NOT NULL,
  channel_count     INTEGER NOT NULL,
  samples           INTEGER NOT NULL,
  status            INTEGER NOT NULL,
  encoding          INTEGER NOT NULL,
  data              BLOB    NOT NULL,
  UNIQUE (run_id, first_index)
);
INSERT INTO raw_block_v3 (run_id, first_index, channel_count, samples, status, encoding, data)
  SELECT run_id, first_index, channel_count, samples, status, encoding, data FROM raw_block ORDER BY run_id, first_index;
DROP TABLE raw_block;
ALTER TABLE raw_block_v3 RENAME TO raw_block;

CREATE VIEW raw_block_utc AS
SELECT b.run_id,
       strftime('%Y-%m-%dT%H:%M:%fZ', r.utc_at_index0 + b.first_index * r.sample_period_s, 'unixepoch') AS utc,
       b.first_index, b.channel_count, b.samples, b.samples * r.sample_period_s AS length_s, b.status,
       b.encoding, length(b.data) AS bytes
FROM raw_block b JOIN run r USING (run_id);
