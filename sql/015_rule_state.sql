-- fxledger schema, version 15: the kept state of the rules over history
-- (docs/rules.md, "Kept state"; docs/performance.md, change 20).
--
-- Derived data, not a clinical record: each row is what the dose-limit sum
-- or a drift chart had counted when it last ran, so that the next logged
-- fraction continues it with its own rows instead of reading every row
-- since the calibration again. Every row can be worked out again from the
-- measurements alone: the rules do so whenever a row cannot simply be
-- continued (a new calibration or restart point, other settings, an
-- amendment of a row already counted, a row out of order), and `fxledger
-- verify` works every row out again and compares. Kept up to date in place
-- (one row per detector, one per drift series); not sealed.

-- The counted dose of a detector since its latest calibration (the sum the
-- dose-limit rule compares with detectors.dose_limit_cgy).
CREATE TABLE dose_since_calibration (
    detector_id     INTEGER PRIMARY KEY REFERENCES detectors(id),
    calibration_id  INTEGER NOT NULL,   -- the calibration counted from; 0: never calibrated
    through_id      INTEGER NOT NULL,   -- every measurement up to this id is accounted for
    last_created_at TEXT NOT NULL,      -- the latest counted row's created_at ('' when none)
    dose_cgy        REAL NOT NULL
);

-- A drift chart (detector, beam, point) after the results since its
-- restart point: the state of src/core/drift.c (fxl_drift_state).
CREATE TABLE drift_charts (
    detector_id     INTEGER NOT NULL REFERENCES detectors(id),
    beam_id         INTEGER NOT NULL REFERENCES beams(id),
    point           TEXT NOT NULL,
    since           TEXT NOT NULL,      -- the restart point ('' from the first result)
    settings        TEXT NOT NULL,      -- target, k, h and start-up the chart ran with
    through_id      INTEGER NOT NULL,   -- every measurement up to this id is accounted for
    last_treated_at TEXT NOT NULL,      -- the latest result's treatment time ('' when none)
    n               INTEGER NOT NULL,
    mr_sum          REAL NOT NULL,
    last_pct        REAL NOT NULL,
    sigma_pct       REAL,               -- NULL in the start-up
    s_high          REAL NOT NULL,
    s_low           REAL NOT NULL,
    signal          INTEGER NOT NULL,
    signal_index    INTEGER NOT NULL,
    signal_value    REAL NOT NULL,
    PRIMARY KEY (detector_id, beam_id, point)
);
