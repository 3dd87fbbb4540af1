-- accrue storage schema, version 4 (PRAGMA user_version = 4).
--
-- This file documents the whole current layout. The daemon never runs it: it
-- applies storage/migrations/NNNN_*.sql in order (embedded at build time) and
-- sets user_version after each; a test checks that migrating an empty file
-- gives exactly the tables, columns and views below. A file whose
-- user_version is newer than this build's is refused and left untouched.
-- One SQLite file in WAL mode per daemon instance. Times are board sample
-- indices; a run's clock model (utc_at_index0, sample_period_s) maps them to
-- UTC. Voltages are integrator output volts; quantities are in the unit of the
-- calibration the row names.
--
-- Derived rows (series_point, rollup, baseline, segment) belong to one
-- derivation of a run: derivation 1 is what the daemon computed while it
-- recorded; reprocessing the stored raw blocks (storage/reprocess.hpp, `accrue
-- reprocess`) adds 2, 3, ... beside it and never changes another. A query that
-- names no derivation reads the newest usable one (view derivation_newest).

-- A board as it identified itself.
CREATE TABLE board (
  board_id          INTEGER PRIMARY KEY,
  serial            INTEGER NOT NULL UNIQUE,
  firmware_version  INTEGER NOT NULL,
  channel_count     INTEGER NOT NULL,
  adc_bits          INTEGER NOT NULL,
  full_scale_v      REAL    NOT NULL,
  capabilities      INTEGER NOT NULL,
  first_seen_utc    TEXT    NOT NULL
);

-- One unbroken board session: sample indices are monotonic within it.
CREATE TABLE run (
  run_id            INTEGER PRIMARY KEY,
  board_id          INTEGER NOT NULL REFERENCES board(board_id),
  started_utc       TEXT    NOT NULL,
  sample_period_s   REAL    NOT NULL,
  utc_at_index0     REAL    NOT NULL,   -- Unix seconds of sample index 0 (clock model)
  ended_utc         TEXT,
  end_reason        TEXT
);

-- Calibration versions. Immutable: a correction is a new row.
CREATE TABLE calibration (
  calibration_id    INTEGER PRIMARY KEY,
  channel           INTEGER NOT NULL,
  created_utc       TEXT    NOT NULL,
  quantity          TEXT    NOT NULL,   -- charge, volt_seconds, ...
  unit              TEXT    NOT NULL,   -- SI symbol
  quantity_per_volt REAL    NOT NULL,   -- d(quantity)/d(Vout)
  definition        TEXT    NOT NULL    -- JSON: adc, front end, sensor
);

-- One derivation of one run and its provenance.
CREATE TABLE derivation (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  derivation        INTEGER NOT NULL,   -- 1: recorded live; 2, 3, ...: reprocessed
  parent            INTEGER,            -- the derivation it was recomputed from (NULL for 1)
  created_utc       TEXT    NOT NULL,
  who               TEXT    NOT NULL,   -- the daemon, or the user who asked for the reprocessing
  reason            TEXT    NOT NULL,
  changes           TEXT    NOT NULL,   -- JSON: what differs from the parent (calibration, baseline, windows)
  state             TEXT    NOT NULL,   -- recorded, running, complete, failed
  finished_utc      TEXT,
  PRIMARY KEY (run_id, derivation)
) WITHOUT ROWID;

-- What each channel of a derivation was computed with, and its total.
CREATE TABLE derivation_channel (
  run_id            INTEGER NOT NULL,
  derivation        INTEGER NOT NULL,
  channel           INTEGER NOT NULL,
  calibration_id    INTEGER NOT NULL REFERENCES calibration(calibration_id),
  baseline          TEXT    NOT NULL,   -- linear or quadratic, then none or huber (e.g. "quadratic huber")
  settings          TEXT,               -- JSON chain settings (NULL: not recorded, runs from before version 3)
  start_state       TEXT,               -- JSON chain state the run started from (a carried total); NULL: zero
  last_index        INTEGER,            -- the total below is at this sample (NULL until known)
  total             REAL,
  std_uncertainty   REAL,               -- k = 1
  segments          INTEGER,
  flags             INTEGER,
  PRIMARY KEY (run_id, derivation, channel),
  FOREIGN KEY (run_id, derivation) REFERENCES derivation(run_id, derivation)
) WITHOUT ROWID;

-- The derivation a query reads when it names none: the newest usable one.
CREATE VIEW derivation_newest AS
SELECT run_id, MAX(derivation) AS derivation FROM derivation
WHERE state IN ('recorded', 'complete') GROUP BY run_id;

-- Raw ADC codes, a block per frame as the board sent it (not a row per sample).
-- Codes are interleaved by sample (s0c0 s0c1 ... s1c0 ...).
-- encoding 1: packed little-endian 24-bit two's complement (version 1 files).
-- encoding 2: per channel, the difference from that channel's previous code
--             (the first from 0), zigzag-mapped to unsigned and written as
--             LEB128 varints (storage/block_codec.hpp). The writer uses 2.
CREATE TABLE raw_block (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  first_index       INTEGER NOT NULL,
  channel_count     INTEGER NOT NULL,
  samples           INTEGER NOT NULL,   -- per channel
  status            INTEGER NOT NULL,   -- protocol status bits
  encoding          INTEGER NOT NULL,
  data              BLOB    NOT NULL,
  UNIQUE (run_id, first_index)
);  -- a rowid table: blocks of ~1.5 KB stay inside their b-tree page (migration 3)

-- Derived series: one point per channel per series interval (1 s by default).
CREATE TABLE series_point (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  derivation        INTEGER NOT NULL DEFAULT 1,   -- see table derivation
  channel           INTEGER NOT NULL,
  first_index       INTEGER NOT NULL,
  samples           INTEGER NOT NULL,
  min_v             REAL    NOT NULL,
  max_v             REAL    NOT NULL,
  mean_v            REAL    NOT NULL,
  last_v            REAL    NOT NULL,
  total             REAL    NOT NULL,   -- running total at the point's last sample
  total_u           REAL    NOT NULL,   -- its standard uncertainty (k = 1)
  calibration_id    INTEGER NOT NULL REFERENCES calibration(calibration_id),
  PRIMARY KEY (run_id, derivation, channel, first_index)
) WITHOUT ROWID;

-- Drift fits on zero windows.
CREATE TABLE baseline (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  derivation        INTEGER NOT NULL DEFAULT 1,   -- see table derivation
  channel           INTEGER NOT NULL,
  ordinal           INTEGER NOT NULL,
  first_index       INTEGER NOT NULL,
  last_index        INTEGER NOT NULL,
  samples           INTEGER NOT NULL,
  intercept_v       REAL    NOT NULL,
  slope_v_per_s     REAL    NOT NULL,
  slope_se_v_per_s  REAL    NOT NULL,
  residual_rms_v    REAL    NOT NULL,
  PRIMARY KEY (run_id, derivation, channel, ordinal)
) WITHOUT ROWID;

-- Reset-to-reset segments and what each contributed.
CREATE TABLE segment (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  derivation        INTEGER NOT NULL DEFAULT 1,   -- see table derivation
  channel           INTEGER NOT NULL,
  ordinal           INTEGER NOT NULL,
  first_index       INTEGER NOT NULL,
  last_index        INTEGER NOT NULL,
  start_v           REAL    NOT NULL,
  end_v             REAL    NOT NULL,
  drift_v           REAL    NOT NULL,
  gap_before_v      REAL    NOT NULL,
  gap_before_u_v    REAL    NOT NULL,
  end_points_u_v    REAL    NOT NULL,
  quantity          REAL    NOT NULL,
  baseline_ordinal  INTEGER NOT NULL,   -- 0: no baseline
  flags             INTEGER NOT NULL,   -- 1 clipped, 2 gap estimated, 4 no baseline
  total_after       REAL    NOT NULL,
  total_u_after     REAL    NOT NULL,
  calibration_id    INTEGER NOT NULL REFERENCES calibration(calibration_id),
  PRIMARY KEY (run_id, derivation, channel, ordinal)
) WITHOUT ROWID;

CREATE TABLE event (
  event_id          INTEGER PRIMARY KEY,
  run_id            INTEGER,            -- NULL for daemon events outside a run
  channel           INTEGER,            -- NULL: all channels
  sample_index      INTEGER,
  kind              TEXT    NOT NULL,
  detail            TEXT    NOT NULL,
  host_utc          TEXT    NOT NULL
);
CREATE INDEX event_by_run ON event(run_id, sample_index);

-- The running total per channel, committed in the same transaction as the
-- data it covers. state is the chain's resume state as JSON. This is the live
-- recording's (derivation 1's) state; derivation_channel holds every
-- derivation's total.
CREATE TABLE total_checkpoint (
  channel           INTEGER PRIMARY KEY,
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  last_index        INTEGER NOT NULL,
  total             REAL    NOT NULL,
  std_uncertainty   REAL    NOT NULL,
  segments          INTEGER NOT NULL,
  flags             INTEGER NOT NULL,
  calibration_id    INTEGER NOT NULL REFERENCES calibration(calibration_id),
  state             TEXT    NOT NULL,
  committed_utc     TEXT    NOT NULL
);

-- Coarser summaries of series_point, one row per channel per bucket of
-- width_s seconds, kept up to date by the writer in the same transaction as
-- the series points they summarise. bucket = first_index / round(width_s /
-- sample_period_s): a series point belongs to the bucket of its first sample.
CREATE TABLE rollup (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  derivation        INTEGER NOT NULL DEFAULT 1,   -- see table derivation
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
  PRIMARY KEY (run_id, derivation, channel, width_s, bucket)
) WITHOUT ROWID;

CREATE VIEW rollup_utc AS
SELECT o.run_id, o.derivation, o.channel, o.width_s,
       strftime('%Y-%m-%dT%H:%M:%fZ', r.utc_at_index0 + o.first_index * r.sample_period_s, 'unixepoch') AS utc,
       o.samples, o.min_v, o.max_v, o.sum_v / o.samples AS mean_v, o.last_v, o.total, o.total_u, c.unit
FROM rollup o JOIN run r USING (run_id) JOIN calibration c USING (calibration_id);

CREATE VIEW raw_block_utc AS
SELECT b.run_id,
       strftime('%Y-%m-%dT%H:%M:%fZ', r.utc_at_index0 + b.first_index * r.sample_period_s, 'unixepoch') AS utc,
       b.first_index, b.channel_count, b.samples, b.samples * r.sample_period_s AS length_s, b.status,
       b.encoding, length(b.data) AS bytes
FROM raw_block b JOIN run r USING (run_id);

-- Views for analysts (sqlite3 shell, pandas): UTC times and units.
-- rollup_utc and raw_block_utc are defined above with their tables.
CREATE VIEW series_utc AS
SELECT p.run_id, p.derivation, p.channel,
       strftime('%Y-%m-%dT%H:%M:%fZ', r.utc_at_index0 + p.first_index * r.sample_period_s, 'unixepoch') AS utc,
       p.mean_v, p.min_v, p.max_v, p.total, p.total_u, c.unit
FROM series_point p JOIN run r USING (run_id) JOIN calibration c USING (calibration_id);

CREATE VIEW segment_utc AS
SELECT s.run_id, s.derivation, s.channel, s.ordinal,
       strftime('%Y-%m-%dT%H:%M:%fZ', r.utc_at_index0 + s.first_index * r.sample_period_s, 'unixepoch') AS start_utc,
       (s.last_index - s.first_index) * r.sample_period_s AS length_s,
       s.quantity, s.gap_before_v, s.flags, s.total_after, c.unit
FROM segment s JOIN run r USING (run_id) JOIN calibration c USING (calibration_id);
