-- fxledger schema, version 11: every clinical table is append-only or
-- changes only through its audited command, and every row the program
-- writes is sealed in the audit chain (docs/audit.md). Additive only: no
-- row is changed.
--
-- The guards below refuse what no fxledger command does. They are a guard
-- against careless SQL, not a lock: whoever can write the file can drop a
-- trigger. That is what `fxledger verify` catches: it checks that the
-- schema and every trigger are exactly those of the migrations, and every
-- row against the seal the audit chain holds for it.

-- ---- reference and equipment rows: never edited, never deleted ----------
CREATE TRIGGER machines_no_update BEFORE UPDATE ON machines
BEGIN SELECT RAISE(ABORT, 'machines are never edited; add a new machine'); END;
CREATE TRIGGER machines_no_delete BEFORE DELETE ON machines
BEGIN SELECT RAISE(ABORT, 'machines are never deleted'); END;
CREATE TRIGGER beams_no_update BEFORE UPDATE ON beams
BEGIN SELECT RAISE(ABORT, 'beams are never edited; add a new beam or load new beam data'); END;
CREATE TRIGGER beams_no_delete BEFORE DELETE ON beams
BEGIN SELECT RAISE(ABORT, 'beams are never deleted'); END;
CREATE TRIGGER detectors_no_update BEFORE UPDATE ON detectors
BEGIN SELECT RAISE(ABORT, 'detectors are never edited; record a status change or a calibration'); END;
CREATE TRIGGER detectors_no_delete BEFORE DELETE ON detectors
BEGIN SELECT RAISE(ABORT, 'detectors are never deleted; retire the detector'); END;
CREATE TRIGGER detector_status_no_delete BEFORE DELETE ON detector_status
BEGIN SELECT RAISE(ABORT, 'detector status history is append-only'); END;
CREATE TRIGGER correction_tables_no_update BEFORE UPDATE ON correction_tables
BEGIN SELECT RAISE(ABORT, 'correction tables are versioned; load a new table'); END;
CREATE TRIGGER correction_tables_no_delete BEFORE DELETE ON correction_tables
BEGIN SELECT RAISE(ABORT, 'correction tables are versioned; load a new table'); END;
CREATE TRIGGER correction_points_no_delete BEFORE DELETE ON correction_points
BEGIN SELECT RAISE(ABORT, 'correction tables are versioned; load a new table'); END;
CREATE TRIGGER threshold_sets_no_delete BEFORE DELETE ON threshold_sets
BEGIN SELECT RAISE(ABORT, 'threshold sets are versioned; save a new version'); END;

-- ---- plans and their fields: immutable (updates refused since version 1) -
CREATE TRIGGER plans_no_delete BEFORE DELETE ON plans
BEGIN SELECT RAISE(ABORT, 'plans are immutable; import a replacement plan'); END;
CREATE TRIGGER fields_no_delete BEFORE DELETE ON fields
BEGIN SELECT RAISE(ABORT, 'fields are immutable; import a replacement plan'); END;

-- ---- review items: the status follows the item's latest event ------------
-- An item is never deleted. Its status is a cache of its latest event
-- (version 1), so it changes only in the transaction that writes that
-- event: the newest review event of the whole database must be this
-- item's, and of the kind that leads to the new status. Nothing else of
-- the item ever changes.
CREATE TRIGGER review_items_no_delete BEFORE DELETE ON review_items
BEGIN SELECT RAISE(ABORT, 'review items are never deleted; close the item'); END;
CREATE TRIGGER review_items_status_by_event BEFORE UPDATE ON review_items
WHEN NEW.id IS NOT OLD.id OR NEW.rule IS NOT OLD.rule OR NEW.severity IS NOT OLD.severity
  OR NEW.measurement_id IS NOT OLD.measurement_id OR NEW.patient_id IS NOT OLD.patient_id
  OR NEW.detector_id IS NOT OLD.detector_id OR NEW.field_id IS NOT OLD.field_id
  OR NEW.summary IS NOT OLD.summary OR NEW.opened_at IS NOT OLD.opened_at
  OR NEW.rule_key IS NOT OLD.rule_key
  OR NOT EXISTS (
        SELECT 1 FROM review_events e WHERE e.id = (SELECT max(id) FROM review_events)
        AND e.item_id = OLD.id
        AND ((e.kind = 'acknowledge' AND NEW.status = 'acknowledged')
          OR (e.kind = 'close' AND NEW.status = 'closed')
          OR (e.kind IN ('open', 'reopen') AND NEW.status = 'open')))
BEGIN SELECT RAISE(ABORT, 'a review item changes only by a review event (fxledger queue)'); END;

-- ---- users: never deleted; only deactivated, by the audited command ------
-- 'user deactivate' writes its audit row first; the one change a users row
-- ever sees is active 1 -> 0 right after that row.
CREATE TRIGGER users_no_delete BEFORE DELETE ON users
BEGIN SELECT RAISE(ABORT, 'users are never deleted; deactivate the user'); END;
CREATE TRIGGER users_deactivate_only BEFORE UPDATE ON users
WHEN NEW.id IS NOT OLD.id OR NEW.login IS NOT OLD.login OR NEW.full_name IS NOT OLD.full_name
  OR NEW.role IS NOT OLD.role OR NEW.created_at IS NOT OLD.created_at
  OR NOT (OLD.active = 1 AND NEW.active = 0)
  OR NOT EXISTS (
        SELECT 1 FROM audit_log a WHERE a.id = (SELECT max(id) FROM audit_log)
        AND a.action = 'deactivate' AND a.entity = 'users' AND a.entity_id = OLD.id)
BEGIN SELECT RAISE(ABORT, 'a user is changed only by fxledger user deactivate'); END;

-- ---- settings: never deleted; changed only by 'setting set' ---------------
-- 'setting set' writes its audit row first; the new value must be the one
-- that row names.
CREATE TRIGGER settings_no_delete BEFORE DELETE ON settings
BEGIN SELECT RAISE(ABORT, 'settings are never deleted'); END;
CREATE TRIGGER settings_set_by_command BEFORE UPDATE ON settings
WHEN NEW.key IS NOT OLD.key
  OR NOT EXISTS (
        SELECT 1 FROM audit_log a WHERE a.id = (SELECT max(id) FROM audit_log)
        AND a.action = 'set' AND a.entity = 'settings'
        AND json_valid(a.content) AND json_extract(a.content, '$.key') IS OLD.key
        AND json_extract(a.content, '$.value') IS NEW.value)
BEGIN SELECT RAISE(ABORT, 'a setting is changed only by fxledger setting set'); END;

-- ---- seals: the content of every row the program wrote ---------------------
-- One row per clinical row written or changed: the SHA-256 of the row's
-- canonical content (docs/audit.md) and the audit row in whose transaction
-- it was written. The audit row carries the SHA-256 of its seals in the
-- column below, which is part of its hash (NULL: the transaction wrote no
-- sealed row; the hash is then computed as before version 11).
ALTER TABLE audit_log ADD COLUMN seal TEXT CHECK (seal IS NULL OR length(seal) = 64);

CREATE TABLE row_seals (
    tbl      TEXT NOT NULL,
    row_id   INTEGER NOT NULL,
    audit_id INTEGER NOT NULL,
    sha256   TEXT NOT NULL CHECK (length(sha256) = 64),
    PRIMARY KEY (tbl, row_id, audit_id)
) WITHOUT ROWID;
CREATE INDEX row_seals_by_audit ON row_seals (audit_id);
CREATE TRIGGER row_seals_no_update BEFORE UPDATE ON row_seals
BEGIN SELECT RAISE(ABORT, 'row seals are append-only'); END;
CREATE TRIGGER row_seals_no_delete BEFORE DELETE ON row_seals
BEGIN SELECT RAISE(ABORT, 'row seals are append-only'); END;
