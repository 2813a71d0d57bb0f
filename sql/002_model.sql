-- fxledger schema, version 2: the independent expected-dose model
-- (docs/expected-dose.md). Additive only: a version-1 database migrates in
-- place on its next opening for writing.

-- Beam data of one photon beam, versioned by effective date: the file as
-- loaded (docs/format-beam-data.md) and its SHA-256. Never edited or
-- deleted: recommissioning loads a new version, and a field keeps the
-- version it was checked with (fields.model_beam_data_id).
CREATE TABLE beam_data (
    id             INTEGER PRIMARY KEY,
    beam_id        INTEGER NOT NULL REFERENCES beams(id),
    effective_from TEXT NOT NULL,
    data           TEXT NOT NULL,
    sha256         TEXT NOT NULL CHECK (length(sha256) = 64),
    source         TEXT,
    user_id        INTEGER NOT NULL REFERENCES users(id),
    created_at     TEXT NOT NULL,
    UNIQUE (beam_id, effective_from)
);
CREATE INDEX beam_data_lookup ON beam_data (beam_id, effective_from);
CREATE TRIGGER beam_data_no_update BEFORE UPDATE ON beam_data
BEGIN SELECT RAISE(ABORT, 'beam data are versioned; load a new version'); END;
CREATE TRIGGER beam_data_no_delete BEFORE DELETE ON beam_data
BEGIN SELECT RAISE(ABORT, 'beam data are versioned; load a new version'); END;

-- The model's expected dose for a field, computed at plan import, with every
-- factor used and the cross-check of a planning-system value
-- (fxl_model_result_json plus a "crosscheck" object). NULL for fields
-- imported before this version.
ALTER TABLE fields ADD COLUMN model_dose_cgy REAL
    CHECK (model_dose_cgy IS NULL OR model_dose_cgy > 0);
ALTER TABLE fields ADD COLUMN model_factors TEXT;
ALTER TABLE fields ADD COLUMN model_beam_data_id INTEGER REFERENCES beam_data(id);

CREATE INDEX review_items_by_field ON review_items (field_id);
