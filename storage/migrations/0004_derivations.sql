-- Migration 4: derivations. The derived rows of a run (series points, rollups,
-- baselines, segments) are one derivation of its raw blocks: derivation 1 is
-- what the daemon computed while recording; reprocessing (storage/reprocess.hpp)
-- adds 2, 3, ... beside it, never over it. The derived tables gain a
-- derivation column (part of each key) and every existing row becomes
-- derivation 1. Tables are rebuilt because SQLite cannot change a key in place.

DROP VIEW series_utc;
DROP VIEW segment_utc;
DROP VIEW rollup_utc;

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

INSERT INTO derivation(run_id, derivation, parent, created_utc, who, reason, changes, state, finished_utc)
SELECT run_id, 1, NULL, started_utc, 'accrued', 'recorded live', '{}', 'recorded', ended_utc FROM run;

CREATE TABLE series_point_v3 (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  derivation        INTEGER NOT NULL DEFAULT 1,
  channel           INTEGER NOT NULL,
  first_index       INTEGER NOT NULL,
  samples           INTEGER NOT NULL,
  min_v             REAL    NOT NULL,
  max_v             REAL    NOT NULL,
  mean_v            REAL    NOT NULL,
  last_v            REAL    NOT NULL,
  total             REAL    NOT NULL,
  total_u           REAL    NOT NULL,
  calibration_id    INTEGER NOT NULL REFERENCES calibration(calibration_id),
  PRIMARY KEY (run_id, derivation, channel, first_index)
) WITHOUT ROWID;
INSERT INTO series_point_v3(run_id, derivation, channel, first_index, samples, min_v, max_v, mean_v, last_v, total,
                            total_u, calibration_id)
SELECT run_id, 1, channel, first_index, samples, min_v, max_v, mean_v, last_v, total, total_u, calibration_id
FROM series_point;
DROP TABLE series_point;
ALTER TABLE series_point_v3 RENAME TO series_point;

CREATE TABLE baseline_v3 (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  derivation        INTEGER NOT NULL DEFAULT 1,
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
INSERT INTO baseline_v3(run_id, derivation, channel, ordinal, first_index, last_index, samples, intercept_v,
                        slope_v_per_s, slope_se_v_per_s, residual_rms_v)
SELECT run_id, 1, channel, ordinal, first_index, last_index, samples, intercept_v, slope_v_per_s, slope_se_v_per_s,
       residual_rms_v
FROM baseline;
DROP TABLE baseline;
ALTER TABLE baseline_v3 RENAME TO baseline;

CREATE TABLE segment_v3 (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  derivation        INTEGER NOT NULL DEFAULT 1,
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
  baseline_ordinal  INTEGER NOT NULL,
  flags             INTEGER NOT NULL,
  total_after       REAL    NOT NULL,
  total_u_after     REAL    NOT NULL,
  calibration_id    INTEGER NOT NULL REFERENCES calibration(calibration_id),
  PRIMARY KEY (run_id, derivation, channel, ordinal)
) WITHOUT ROWID;
INSERT INTO segment_v3(run_id, derivation, channel, ordinal, first_index, last_index, start_v, end_v, drift_v,
                       gap_before_v, gap_before_u_v, end_points_u_v, quantity, baseline_ordinal, flags, total_after,
                       total_u_after, calibration_id)
SELECT run_id, 1, channel, ordinal, first_index, last_index, start_v, end_v, drift_v, gap_before_v, gap_before_u_v,
       end_points_u_v, quantity, baseline_ordinal, flags, total_after, total_u_after, calibration_id
FROM segment;
DROP TABLE segment;
ALTER TABLE segment_v3 RENAME TO segment;

CREATE TABLE rollup_v3 (
  run_id            INTEGER NOT NULL REFERENCES run(run_id),
  derivation        INTEGER NOT NULL DEFAULT 1,
  channel           INTEGER NOT NULL,
  width_s           INTEGER NOT NULL,
  bucket            INTEGER NOT NULL,
  first_index       INTEGER NOT NULL,
  last_point_index  INTEGER NOT NULL,
  points            INTEGER NOT NULL,
  samples           INTEGER NOT NULL,
  min_v             REAL    NOT NULL,
  max_v             REAL    NOT NULL,
  sum_v             REAL    NOT NULL,
  last_v            REAL    NOT NULL,
  total             REAL    NOT NULL,
  total_u           REAL    NOT NULL,
  calibration_id    INTEGER NOT NULL REFERENCES calibration(calibration_id),
  PRIMARY KEY (run_id, derivation, channel, width_s, bucket)
) WITHOUT ROWID;
INSERT INTO rollup_v3(run_id, derivation, channel, width_s, bucket, first_index, last_point_index, points, samples,
                      min_v, max_v, sum_v, last_v, total, total_u, calibration_id)
SELECT run_id, 1, channel, width_s, bucket, first_index, last_point_index, points, samples, min_v, max_v, sum_v,
       last_v, total, total_u, calibration_id
FROM rollup;
DROP TABLE rollup;
ALTER TABLE rollup_v3 RENAME TO rollup;

-- Derivation 1 of every existing run: the calibration its rows name, the
-- settings unknown, and the total from the checkpoint where it is that run's.
INSERT OR IGNORE INTO derivation_channel(run_id, derivation, channel, calibration_id, baseline)
SELECT run_id, 1, channel, MAX(calibration_id), 'unknown' FROM segment GROUP BY run_id, channel;
INSERT OR IGNORE INTO derivation_channel(run_id, derivation, channel, calibration_id, baseline)
SELECT run_id, 1, channel, MAX(calibration_id), 'unknown' FROM series_point GROUP BY run_id, channel;
UPDATE derivation_channel SET
  last_index = (SELECT t.last_index FROM total_checkpoint t WHERE t.channel = derivation_channel.channel
                AND t.run_id = derivation_channel.run_id),
  total = (SELECT t.total FROM total_checkpoint t WHERE t.channel = derivation_channel.channel
           AND t.run_id = derivation_channel.run_id),
  std_uncertainty = (SELECT t.std_uncertainty FROM total_checkpoint t WHERE t.channel = derivation_channel.channel
                     AND t.run_id = derivation_channel.run_id),
  segments = (SELECT t.segments FROM total_checkpoint t WHERE t.channel = derivation_channel.channel
              AND t.run_id = derivation_channel.run_id),
  flags = (SELECT t.flags FROM total_checkpoint t WHERE t.channel = derivation_channel.channel
           AND t.run_id = derivation_channel.run_id);

CREATE VIEW rollup_utc AS
SELECT o.run_id, o.derivation, o.channel, o.width_s,
       strftime('%Y-%m-%dT%H:%M:%fZ', r.utc_at_index0 + o.first_index * r.sample_period_s, 'unixepoch') AS utc,
       o.samples, o.min_v, o.max_v, o.sum_v / o.samples AS mean_v, o.last_v, o.total, o.total_u, c.unit
FROM rollup o JOIN run r USING (run_id) JOIN calibration c USING (calibration_id);

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
