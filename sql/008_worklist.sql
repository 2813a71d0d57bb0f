-- fxledger schema, version 8: fractions logged field by field, the day list
-- from the record-and-verify export, and patient corrections with their
-- history (docs/worklist.md, docs/record.md, docs/patients.md). Additive only.

-- A fraction begun field by field carries a 'begun' mark when its row is
-- written and a 'closed' mark when it is finished: open = begun, not closed.
-- Fractions logged at once (fxl_record_fraction) carry no mark and are
-- complete. Append-only like the fractions themselves.
CREATE TABLE fraction_marks (
    id          INTEGER PRIMARY KEY,
    fraction_id INTEGER NOT NULL REFERENCES fractions(id),
    kind        TEXT NOT NULL CHECK (kind IN ('begun', 'closed')),
    user_id     INTEGER NOT NULL REFERENCES users(id),
    created_at  TEXT NOT NULL,
    UNIQUE (fraction_id, kind)
);
CREATE TRIGGER fraction_marks_no_update BEFORE UPDATE ON fraction_marks
BEGIN SELECT RAISE(ABORT, 'fraction marks are append-only'); END;
CREATE TRIGGER fraction_marks_no_delete BEFORE DELETE ON fraction_marks
BEGIN SELECT RAISE(ABORT, 'fraction marks are append-only'); END;

-- A day list: who is expected on the treatment units on one department-local
-- date, in the order of the export. The latest import for a date is the one
-- in force; earlier ones stay.
CREATE TABLE daylist_imports (
    id          INTEGER PRIMARY KEY,
    day         TEXT NOT NULL CHECK (length(day) = 10),
    lines       INTEGER NOT NULL CHECK (lines >= 0),
    user_id     INTEGER NOT NULL REFERENCES users(id),
    created_at  TEXT NOT NULL
);
CREATE INDEX daylist_imports_by_day ON daylist_imports (day, id);
CREATE TABLE daylist_lines (
    id           INTEGER PRIMARY KEY,
    import_id    INTEGER NOT NULL REFERENCES daylist_imports(id),
    position     INTEGER NOT NULL CHECK (position >= 1),
    scheduled_at TEXT,
    mrn          TEXT NOT NULL CHECK (length(mrn) BETWEEN 1 AND 64),
    plan_label   TEXT,
    UNIQUE (import_id, position)
);
CREATE TRIGGER daylist_imports_no_update BEFORE UPDATE ON daylist_imports
BEGIN SELECT RAISE(ABORT, 'day lists are append-only'); END;
CREATE TRIGGER daylist_imports_no_delete BEFORE DELETE ON daylist_imports
BEGIN SELECT RAISE(ABORT, 'day lists are append-only'); END;
CREATE TRIGGER daylist_lines_no_update BEFORE UPDATE ON daylist_lines
BEGIN SELECT RAISE(ABORT, 'day lists are append-only'); END;
CREATE TRIGGER daylist_lines_no_delete BEFORE DELETE ON daylist_lines
BEGIN SELECT RAISE(ABORT, 'day lists are append-only'); END;

-- A correction of a mistyped identity value of a patient: the old and the
-- new value, who, when and why. Append-only: the history of a patient's
-- identity is this table, oldest first.
CREATE TABLE patient_corrections (
    id          INTEGER PRIMARY KEY,
    patient_id  INTEGER NOT NULL REFERENCES patients(id),
    item        TEXT NOT NULL CHECK (item IN ('mrn', 'family_name', 'given_name', 'birth_date')),
    old_value   TEXT,
    new_value   TEXT,
    reason      TEXT NOT NULL CHECK (length(reason) BETWEEN 1 AND 500),
    user_id     INTEGER NOT NULL REFERENCES users(id),
    created_at  TEXT NOT NULL
);
CREATE INDEX patient_corrections_by_patient ON patient_corrections (patient_id, id);
CREATE TRIGGER patient_corrections_no_update BEFORE UPDATE ON patient_corrections
BEGIN SELECT RAISE(ABORT, 'patient corrections are append-only'); END;
CREATE TRIGGER patient_corrections_no_delete BEFORE DELETE ON patient_corrections
BEGIN SELECT RAISE(ABORT, 'patient corrections are append-only'); END;

-- The patients row carries the current identity. It changes only together
-- with a correction row written first in the same transaction: every
-- changed item must match the latest correction of that item (old value ->
-- new value). Its id and creation time never change; it is never deleted.
CREATE TRIGGER patients_no_delete BEFORE DELETE ON patients
BEGIN SELECT RAISE(ABORT, 'patients are never deleted'); END;
CREATE TRIGGER patients_update_needs_correction BEFORE UPDATE ON patients
WHEN NEW.id IS NOT OLD.id OR NEW.created_at IS NOT OLD.created_at
  OR (NEW.mrn IS NOT OLD.mrn AND NOT EXISTS (
        SELECT 1 FROM patient_corrections c WHERE c.id = (SELECT max(id) FROM patient_corrections
            WHERE patient_id = OLD.id AND item = 'mrn')
        AND c.old_value IS OLD.mrn AND c.new_value IS NEW.mrn))
  OR (NEW.family_name IS NOT OLD.family_name AND NOT EXISTS (
        SELECT 1 FROM patient_corrections c WHERE c.id = (SELECT max(id) FROM patient_corrections
            WHERE patient_id = OLD.id AND item = 'family_name')
        AND c.old_value IS OLD.family_name AND c.new_value IS NEW.family_name))
  OR (NEW.given_name IS NOT OLD.given_name AND NOT EXISTS (
        SELECT 1 FROM patient_corrections c WHERE c.id = (SELECT max(id) FROM patient_corrections
            WHERE patient_id = OLD.id AND item = 'given_name')
        AND c.old_value IS OLD.given_name AND c.new_value IS NEW.given_name))
  OR (NEW.birth_date IS NOT OLD.birth_date AND NOT EXISTS (
        SELECT 1 FROM patient_corrections c WHERE c.id = (SELECT max(id) FROM patient_corrections
            WHERE patient_id = OLD.id AND item = 'birth_date')
        AND c.old_value IS OLD.birth_date AND c.new_value IS NEW.birth_date))
BEGIN SELECT RAISE(ABORT, 'a patient is changed only by a recorded correction'); END;
