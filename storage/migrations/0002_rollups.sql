-- Migration 2: rollup tiers for window queries at any zoom, and more views.
-- raw_block.encoding 2 (delta + zigzag + LEB128 varints, see
-- storage/block_codec.hpp) is new in this version; encoding 1 blocks stay
-- readable.

-- Coarser summaries of series_point, one row per channel per bucket of
-- width_s seconds, kept up to date by the writer in the same transaction as
-- the series points they summarise. bucket = first_index / round(width_s /
-- sample_period_s): a series point belongs to the bucket of its first sample.
CREATE TABLE rollup (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  channel           INTEGER NOT NULL,
  width_s           INTEGER NOT NULL,   -- 10, 60, 600, 3600, 21600, 86400
  bucket            INTEGER NOT NULL,
  first_index       INTEGER NOT NULL,   -- first sample of the first series point in the bucket
  last_point_index  INTEGER NOT NULL,   -- first_index of the newest series point folded in
  points            INTEGER NOT NULL,   -- series points folded in
  samples           INTEGER NOT NULL,
  min_v             REAL    NOT NULL,
  max_v             REAL    NOT NULL,
  sum_v             REAL    NOT NULL,   -- sum of output volts over the samples (mean = sum_v / samples)
  last_v            REAL    NOT NULL,
  total             REAL    NOT NULL,   -- running total at the bucket's last sample
  total_u           REAL    NOT NULL,
  calibration_id    INTEGER NOT NULL REFERENCES calibration(calibration_id),
  PRIMARY KEY (run_id, channel, width_s, bucket)
) WITHOUT ROWID;

CREATE VIEW rollup_utc AS
SELECT o.run_id, o.channel, o.width_s,
       strftime('%Y-%m-%dT%H:%M:%fZ', r.utc_at_index0 + o.first_index * r.sample_period_s, 'unixepoch') AS utc,
       o.samples, o.min_v, o.max_v, o.sum_v / o.samples AS mean_v, o.last_v, o.total, o.total_u, c.unit
FROM rollup o JOIN run r USING (run_id) JOIN calibration c USING (calibration_id);

CREATE VIEW raw_block_utc AS
SELECT b.run_id,
       strftime('%Y-%m-%dT%H:%M:%fZ', r.utc_at_index0 + b.first_index * r.sample_period_s, 'unixepoch') AS utc,
       b.first_index, b.channel_count, b.samples, b.samples * r.sample_period_s AS length_s, b.status,
       b.encoding, length(b.data) AS bytes
FROM raw_block b JOIN run r USING (run_id);
