-- fxledger schema, version 5: exit dosimetry with its own correction tables,
-- and every input a dose was computed from kept in its measurement row
-- (docs/physics.md, docs/record.md). Rows written before this version keep
-- what they had: nothing clinical is edited.

-- Correction tables are keyed also by measured point. An exit diode has its
-- own factors against patient (phantom) thickness, field size, the
-- source-to-detector distance and the wedge; it never borrows the entrance
-- SSD, angle or wedge factors. Every existing table becomes an entrance
-- table. SQLite cannot widen a CHECK in place, so both tables are rebuilt
-- with the same ids and points (correction_points follows its parent).
ALTER TABLE correction_points RENAME TO correction_points_v4;
ALTER TABLE correction_tables RENAME TO correction_tables_v4;

CREATE TABLE correction_tables (
    id             INTEGER PRIMARY KEY,
    detector_id    INTEGER NOT NULL REFERENCES detectors(id),
    beam_id        INTEGER NOT NULL REFERENCES beams(id),
    point          TEXT NOT NULL DEFAULT 'entrance' CHECK (point IN ('entrance', 'exit')),
    parameter      TEXT NOT NULL CHECK (parameter IN ('field_size', 'ssd', 'wedge', 'tray', 'angle',
                                                      'thickness', 'sdd')),
    effective_from TEXT NOT NULL,
    source         TEXT,
    user_id        INTEGER NOT NULL REFERENCES users(id),
    created_at     TEXT NOT NULL,
    -- thickness and sdd are exit parameters; ssd is an entrance parameter
    CHECK (point = 'exit' OR parameter NOT IN ('thickness', 'sdd')),
    CHECK (point = 'entrance' OR parameter <> 'ssd')
);
INSERT INTO correction_tables (id, detector_id, beam_id, point, parameter, effective_from, source,
                               user_id, created_at)
    SELECT id, detector_id, beam_id, 'entrance', parameter, effective_from, source, user_id,
           created_at FROM correction_tables_v4;

CREATE TABLE correction_points (
    table_id INTEGER NOT NULL REFERENCES correction_tables(id),
    x        REAL NOT NULL,
    factor   REAL NOT NULL CHECK (factor > 0.5 AND factor < 2.0),
    PRIMARY KEY (table_id, x)
) WITHOUT ROWID;
INSERT INTO correction_points (table_id, x, factor)
    SELECT table_id, x, factor FROM correction_points_v4;

DROP TRIGGER correction_points_no_update;
DROP TABLE correction_points_v4;
DROP TABLE correction_tables_v4;

CREATE INDEX correction_tables_lookup ON correction_tables
    (detector_id, beam_id, point, parameter, effective_from);
CREATE TRIGGER correction_points_no_update BEFORE UPDATE ON correction_points
BEGIN SELECT RAISE(ABORT, 'correction tables are versioned; load a new table'); END;

-- The exit calibration's reference phantom thickness (cm): the reference
-- source-to-detector distance is ssd_cm + ref_thickness_cm. NULL for
-- entrance calibrations and for exit calibrations made before version 5
-- (then no exit table can be used at a thickness or distance other than
-- an unknown reference, and the result is not evaluable).
ALTER TABLE calibrations ADD COLUMN ref_thickness_cm REAL
    CHECK (ref_thickness_cm IS NULL OR (ref_thickness_cm > 0 AND ref_thickness_cm <= 60));
-- A physicist's explicit confirmation of a calibration that failed an
-- acceptance check (readings spread, change of N; docs/equipment.md): the
-- checks it overrode, in words. NULL when every check passed.
ALTER TABLE calibrations ADD COLUMN confirmed_change TEXT;

-- The background reading M_0 subtracted from the reading (detector unit);
-- NULL only in rows written before version 5 (their reasons name it).
ALTER TABLE measurements ADD COLUMN background REAL
    CHECK (background IS NULL OR background >= 0);
-- The exit factors (NULL where the parameter does not apply to the point,
-- or the factor could not be found).
ALTER TABLE measurements ADD COLUMN cf_thickness REAL;
ALTER TABLE measurements ADD COLUMN cf_sdd REAL;
-- 1: the deviation was beyond the plausibility bound (a gross deviation,
-- judged outside the action level; docs/physics.md). Its corrected dose is
-- not added to the detector's accumulated dose (docs/rules.md).
ALTER TABLE measurements ADD COLUMN gross INTEGER NOT NULL DEFAULT 0 CHECK (gross IN (0, 1));
