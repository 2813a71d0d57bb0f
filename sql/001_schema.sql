-- fxledger schema, version 1.
-- Units: doses in cGy, readings in the detector's unit, lengths in cm, angles
-- in degrees, temperatures in degC, times as UTC ISO 8601 text
-- ('YYYY-MM-DDTHH:MM:SSZ'). Clinical records (calibrations, measurements,
-- review events, audit rows) are append-only: triggers at the end refuse
-- UPDATE and DELETE on them.

CREATE TABLE settings (
    key   TEXT PRIMARY KEY,
    value TEXT NOT NULL
);

CREATE TABLE users (
    id         INTEGER PRIMARY KEY,
    login      TEXT NOT NULL UNIQUE CHECK (length(login) BETWEEN 1 AND 64),
    full_name  TEXT NOT NULL CHECK (length(full_name) BETWEEN 1 AND 200),
    role       TEXT NOT NULL CHECK (role IN ('therapist', 'physicist', 'auditor', 'admin')),
    active     INTEGER NOT NULL DEFAULT 1 CHECK (active IN (0, 1)),
    created_at TEXT NOT NULL
);

CREATE TABLE machines (
    id         INTEGER PRIMARY KEY,
    name       TEXT NOT NULL UNIQUE CHECK (length(name) BETWEEN 1 AND 64),
    sad_cm     REAL NOT NULL DEFAULT 100 CHECK (sad_cm > 0 AND sad_cm <= 200),
    created_at TEXT NOT NULL
);

-- A beam of one machine. The model columns (d_max, reference dose per MU,
-- normalisation distance) feed the independent expected-dose model; beam_data
-- holds its tables as JSON (see docs/formats.md).
CREATE TABLE beams (
    id                  INTEGER PRIMARY KEY,
    machine_id          INTEGER NOT NULL REFERENCES machines(id),
    name                TEXT NOT NULL CHECK (length(name) BETWEEN 1 AND 32),
    modality            TEXT NOT NULL CHECK (modality IN ('photon', 'electron')),
    energy              REAL NOT NULL CHECK (energy > 0 AND energy <= 50),  -- MV or MeV by modality
    dmax_cm             REAL CHECK (dmax_cm IS NULL OR (dmax_cm > 0 AND dmax_cm < 10)),
    ref_dose_cgy_per_mu REAL CHECK (ref_dose_cgy_per_mu IS NULL OR ref_dose_cgy_per_mu > 0),
    norm_distance_cm    REAL CHECK (norm_distance_cm IS NULL OR norm_distance_cm > 0),
    beam_data           TEXT,
    created_at          TEXT NOT NULL,
    UNIQUE (machine_id, name)
);

CREATE TABLE detectors (
    id                 INTEGER PRIMARY KEY,
    serial             TEXT NOT NULL UNIQUE CHECK (length(serial) BETWEEN 1 AND 64),
    label              TEXT NOT NULL CHECK (length(label) BETWEEN 1 AND 64),
    kind               TEXT NOT NULL CHECK (kind IN ('photon_diode', 'electron_diode',
                           'small_field_diode', 'mosfet', 'osl', 'tld', 'other')),
    reading_unit       TEXT NOT NULL DEFAULT 'nC' CHECK (reading_unit IN ('nC', 'pC', 'mV', 'count', 'cGy')),
    sensitivity        REAL CHECK (sensitivity IS NULL OR sensitivity > 0),  -- nominal, unit per cGy
    temp_coeff_per_c   REAL NOT NULL DEFAULT 0 CHECK (temp_coeff_per_c BETWEEN -0.05 AND 0.05),
    buildup            TEXT,
    dose_limit_cgy     REAL CHECK (dose_limit_cgy IS NULL OR dose_limit_cgy > 0),
    created_at         TEXT NOT NULL
);

-- Status history of a detector; the current status is the latest row at or
-- before the moment asked about. A detector without rows is in service.
CREATE TABLE detector_status (
    id           INTEGER PRIMARY KEY,
    detector_id  INTEGER NOT NULL REFERENCES detectors(id),
    status       TEXT NOT NULL CHECK (status IN ('in_service', 'out_for_service', 'retired')),
    effective_at TEXT NOT NULL,
    reason       TEXT,
    user_id      INTEGER NOT NULL REFERENCES users(id),
    created_at   TEXT NOT NULL
);
CREATE INDEX detector_status_by_detector ON detector_status (detector_id, effective_at);

-- Cross-calibration of a detector against an ion chamber for one beam and
-- one measured point. Never edited: a newer calibration supersedes.
CREATE TABLE calibrations (
    id                  INTEGER PRIMARY KEY,
    detector_id         INTEGER NOT NULL REFERENCES detectors(id),
    beam_id             INTEGER NOT NULL REFERENCES beams(id),
    point               TEXT NOT NULL CHECK (point IN ('entrance', 'exit')),
    calibrated_at       TEXT NOT NULL,
    valid_until         TEXT NOT NULL CHECK (valid_until > calibrated_at),
    chamber_dose_cgy    REAL NOT NULL CHECK (chamber_dose_cgy > 0),
    readings            TEXT NOT NULL,                 -- JSON array of the readings
    reading_n           INTEGER NOT NULL CHECK (reading_n >= 1),
    reading_mean        REAL NOT NULL CHECK (reading_mean > 0),
    reading_sd          REAL NOT NULL CHECK (reading_sd >= 0),
    factor_cgy_per_unit REAL NOT NULL CHECK (factor_cgy_per_unit > 0),
    temp_c              REAL NOT NULL CHECK (temp_c BETWEEN 10 AND 45),
    ssd_cm              REAL NOT NULL CHECK (ssd_cm > 0 AND ssd_cm <= 200),
    field_size_cm       REAL NOT NULL CHECK (field_size_cm > 0 AND field_size_cm <= 50),
    chamber             TEXT,
    notes               TEXT,
    user_id             INTEGER NOT NULL REFERENCES users(id),
    created_at          TEXT NOT NULL
);
CREATE INDEX calibrations_by_detector ON calibrations (detector_id, beam_id, point, calibrated_at);

-- Correction factor versus one parameter, per detector and beam, versioned by
-- effective date. Continuous parameters (field_size, ssd, angle) interpolate
-- linearly inside the table; discrete ones (wedge, tray) match
-- exactly. Nothing is extrapolated.
CREATE TABLE correction_tables (
    id             INTEGER PRIMARY KEY,
    detector_id    INTEGER NOT NULL REFERENCES detectors(id),
    beam_id        INTEGER NOT NULL REFERENCES beams(id),
    parameter      TEXT NOT NULL CHECK (parameter IN ('field_size', 'ssd', 'wedge', 'tray', 'angle')),
    effective_from TEXT NOT NULL,
    source         TEXT,
    user_id        INTEGER NOT NULL REFERENCES users(id),
    created_at     TEXT NOT NULL
);
CREATE INDEX correction_tables_lookup ON correction_tables (detector_id, beam_id, parameter, effective_from);

CREATE TABLE correction_points (
    table_id INTEGER NOT NULL REFERENCES correction_tables(id),
    x        REAL NOT NULL,
    factor   REAL NOT NULL CHECK (factor > 0.5 AND factor < 2.0),
    PRIMARY KEY (table_id, x)
) WITHOUT ROWID;

CREATE TABLE patients (
    id          INTEGER PRIMARY KEY,
    mrn         TEXT NOT NULL UNIQUE CHECK (length(mrn) BETWEEN 1 AND 64),
    family_name TEXT NOT NULL CHECK (length(family_name) BETWEEN 1 AND 200),
    given_name  TEXT NOT NULL DEFAULT '' CHECK (length(given_name) <= 200),
    birth_date  TEXT,
    created_at  TEXT NOT NULL
);

-- A plan is immutable once imported; a plan change is a new plan that names
-- the one it replaces.
CREATE TABLE plans (
    id                    INTEGER PRIMARY KEY,
    patient_id            INTEGER NOT NULL REFERENCES patients(id),
    label                 TEXT NOT NULL CHECK (length(label) BETWEEN 1 AND 64),
    site                  TEXT NOT NULL CHECK (length(site) BETWEEN 1 AND 64),
    technique             TEXT NOT NULL CHECK (length(technique) BETWEEN 1 AND 32),
    fractions             INTEGER NOT NULL CHECK (fractions BETWEEN 1 AND 100),
    dose_per_fraction_cgy REAL CHECK (dose_per_fraction_cgy IS NULL OR dose_per_fraction_cgy > 0),
    replaces_plan_id      INTEGER REFERENCES plans(id),
    source                TEXT NOT NULL DEFAULT 'json' CHECK (source IN ('json', 'dicom')),
    user_id               INTEGER NOT NULL REFERENCES users(id),
    created_at            TEXT NOT NULL,
    UNIQUE (patient_id, label)
);

-- One measured point of one beam of a plan. A beam measured at entrance and at
-- exit has two rows with the same name.
CREATE TABLE fields (
    id                INTEGER PRIMARY KEY,
    plan_id           INTEGER NOT NULL REFERENCES plans(id),
    name              TEXT NOT NULL CHECK (length(name) BETWEEN 1 AND 64),
    beam_id           INTEGER NOT NULL REFERENCES beams(id),
    point             TEXT NOT NULL CHECK (point IN ('entrance', 'exit')),
    setup             TEXT NOT NULL CHECK (setup IN ('ssd', 'isocentric')),
    mu                REAL NOT NULL CHECK (mu > 0 AND mu <= 10000),
    ssd_cm            REAL NOT NULL CHECK (ssd_cm >= 50 AND ssd_cm <= 200),
    x_cm              REAL NOT NULL CHECK (x_cm > 0 AND x_cm <= 50),
    y_cm              REAL NOT NULL CHECK (y_cm > 0 AND y_cm <= 50),
    wedge_deg         REAL NOT NULL DEFAULT 0 CHECK (wedge_deg BETWEEN 0 AND 60),
    tray              INTEGER NOT NULL DEFAULT 0 CHECK (tray IN (0, 1)),
    gantry_deg        REAL NOT NULL DEFAULT 0 CHECK (gantry_deg >= 0 AND gantry_deg < 360),
    incidence_deg     REAL NOT NULL DEFAULT 0 CHECK (incidence_deg BETWEEN 0 AND 90),
    thickness_cm      REAL CHECK (thickness_cm IS NULL OR (thickness_cm > 0 AND thickness_cm <= 60)),
    expected_dose_cgy REAL CHECK (expected_dose_cgy IS NULL OR expected_dose_cgy > 0),
    expected_source   TEXT CHECK (expected_source IN ('tps', 'model', 'manual')),
    policy            TEXT NOT NULL DEFAULT 'first' CHECK (policy IN ('first', 'weekly', 'every', 'none')),
    UNIQUE (plan_id, name, point)
);

-- Tolerance and action levels. Scope columns left NULL match anything; the
-- most specific match wins. A set is identified by name and versioned by
-- effective date; rows are never edited.
CREATE TABLE threshold_sets (
    id                   INTEGER PRIMARY KEY,
    name                 TEXT NOT NULL CHECK (length(name) BETWEEN 1 AND 64),
    version              INTEGER NOT NULL CHECK (version >= 1),
    effective_from       TEXT NOT NULL,
    active               INTEGER NOT NULL DEFAULT 1 CHECK (active IN (0, 1)),
    scope_site           TEXT,
    scope_technique      TEXT,
    scope_modality       TEXT CHECK (scope_modality IS NULL OR scope_modality IN ('photon', 'electron')),
    scope_energy         REAL CHECK (scope_energy IS NULL OR scope_energy > 0),
    scope_point          TEXT CHECK (scope_point IS NULL OR scope_point IN ('entrance', 'exit')),
    scope_detector_kind  TEXT CHECK (scope_detector_kind IS NULL OR scope_detector_kind IN ('photon_diode',
                             'electron_diode', 'small_field_diode', 'mosfet', 'osl', 'tld', 'other')),
    tolerance_pct        REAL NOT NULL CHECK (tolerance_pct > 0 AND tolerance_pct <= 50),
    action_pct           REAL NOT NULL CHECK (action_pct >= tolerance_pct AND action_pct <= 50),
    floor_cgy            REAL NOT NULL DEFAULT 0 CHECK (floor_cgy >= 0 AND floor_cgy <= 50),
    user_id              INTEGER NOT NULL REFERENCES users(id),
    created_at           TEXT NOT NULL,
    UNIQUE (name, version)
);

CREATE TABLE fractions (
    id          INTEGER PRIMARY KEY,
    plan_id     INTEGER NOT NULL REFERENCES plans(id),
    number      INTEGER NOT NULL CHECK (number BETWEEN 1 AND 100),
    treated_at  TEXT NOT NULL,
    user_id     INTEGER NOT NULL REFERENCES users(id),
    created_at  TEXT NOT NULL,
    UNIQUE (plan_id, number)
);

-- One reading, with a snapshot of everything it was judged by. A mistyped
-- reading is superseded by a new row that names it (supersedes_id) and says why.
CREATE TABLE measurements (
    id                 INTEGER PRIMARY KEY,
    fraction_id        INTEGER NOT NULL REFERENCES fractions(id),
    field_id           INTEGER NOT NULL REFERENCES fields(id),
    detector_id        INTEGER NOT NULL REFERENCES detectors(id),
    reading            REAL NOT NULL,
    reading_unit       TEXT NOT NULL,
    temp_c             REAL NOT NULL CHECK (temp_c BETWEEN 10 AND 45),
    temp_entered       INTEGER NOT NULL CHECK (temp_entered IN (0, 1)),
    calibration_id     INTEGER REFERENCES calibrations(id),
    factor_n           REAL,          -- cGy per reading unit
    cf_field_size      REAL,
    cf_ssd             REAL,
    cf_wedge           REAL,
    cf_tray            REAL,
    cf_angle           REAL,
    cf_temp            REAL,
    corrected_dose_cgy REAL,
    expected_dose_cgy  REAL,
    deviation_pct      REAL,
    threshold_set_id   INTEGER REFERENCES threshold_sets(id),
    tolerance_pct      REAL,
    action_pct         REAL,
    floor_cgy          REAL,
    verdict            TEXT NOT NULL CHECK (verdict IN ('within_tolerance', 'outside_tolerance',
                           'outside_action', 'not_evaluable', 'implausible')),
    reasons            TEXT NOT NULL DEFAULT '[]',   -- JSON array of strings
    supersedes_id      INTEGER UNIQUE REFERENCES measurements(id),
    amend_reason       TEXT,
    user_id            INTEGER NOT NULL REFERENCES users(id),
    created_at         TEXT NOT NULL,
    CHECK ((supersedes_id IS NULL) = (amend_reason IS NULL))
);
CREATE INDEX measurements_by_fraction ON measurements (fraction_id);
CREATE INDEX measurements_by_field ON measurements (field_id);
CREATE INDEX measurements_by_detector ON measurements (detector_id, created_at);
CREATE INDEX measurements_by_time ON measurements (created_at);

-- The review queue: one item per flagged measurement or rule hit. status is a
-- cache of the latest event, kept in the same transaction as the event.
CREATE TABLE review_items (
    id             INTEGER PRIMARY KEY,
    rule           TEXT NOT NULL,
    severity       INTEGER NOT NULL CHECK (severity BETWEEN 1 AND 4),  -- 4 most severe
    status         TEXT NOT NULL DEFAULT 'open' CHECK (status IN ('open', 'acknowledged', 'closed')),
    measurement_id INTEGER REFERENCES measurements(id),
    patient_id     INTEGER REFERENCES patients(id),
    detector_id    INTEGER REFERENCES detectors(id),
    field_id       INTEGER REFERENCES fields(id),
    summary        TEXT NOT NULL,
    opened_at      TEXT NOT NULL,
    -- What a rule over history fired on (e.g. 'field:12:fraction:1'), so that
    -- one hit opens one item however often the rule is evaluated
    -- (docs/rules.md); NULL for items on a single result.
    rule_key       TEXT
);
CREATE INDEX review_items_by_status ON review_items (status, severity, opened_at);
CREATE INDEX review_items_by_rule_key ON review_items (rule, rule_key);
CREATE INDEX review_items_by_measurement ON review_items (measurement_id);

CREATE TABLE review_events (
    id          INTEGER PRIMARY KEY,
    item_id     INTEGER NOT NULL REFERENCES review_items(id),
    kind        TEXT NOT NULL CHECK (kind IN ('open', 'acknowledge', 'comment', 'close', 'reopen')),
    disposition TEXT,
    comment     TEXT,
    user_id     INTEGER NOT NULL REFERENCES users(id),
    created_at  TEXT NOT NULL,
    CHECK ((kind = 'close') = (disposition IS NOT NULL))
);
CREATE INDEX review_events_by_item ON review_events (item_id);

-- Append-only record of every write, hash-chained (docs/audit.md).
CREATE TABLE audit_log (
    id        INTEGER PRIMARY KEY,
    at        TEXT NOT NULL,
    user      TEXT NOT NULL,
    action    TEXT NOT NULL,
    entity    TEXT NOT NULL,
    entity_id INTEGER,
    content   TEXT NOT NULL,
    prev_hash TEXT NOT NULL CHECK (length(prev_hash) = 64),
    hash      TEXT NOT NULL CHECK (length(hash) = 64)
);

CREATE TRIGGER calibrations_no_update BEFORE UPDATE ON calibrations
BEGIN SELECT RAISE(ABORT, 'calibrations are append-only'); END;
CREATE TRIGGER calibrations_no_delete BEFORE DELETE ON calibrations
BEGIN SELECT RAISE(ABORT, 'calibrations are append-only'); END;
CREATE TRIGGER measurements_no_update BEFORE UPDATE ON measurements
BEGIN SELECT RAISE(ABORT, 'measurements are append-only'); END;
CREATE TRIGGER measurements_no_delete BEFORE DELETE ON measurements
BEGIN SELECT RAISE(ABORT, 'measurements are append-only'); END;
CREATE TRIGGER fractions_no_update BEFORE UPDATE ON fractions
BEGIN SELECT RAISE(ABORT, 'fractions are append-only'); END;
CREATE TRIGGER fractions_no_delete BEFORE DELETE ON fractions
BEGIN SELECT RAISE(ABORT, 'fractions are append-only'); END;
CREATE TRIGGER review_events_no_update BEFORE UPDATE ON review_events
BEGIN SELECT RAISE(ABORT, 'review events are append-only'); END;
CREATE TRIGGER review_events_no_delete BEFORE DELETE ON review_events
BEGIN SELECT RAISE(ABORT, 'review events are append-only'); END;
CREATE TRIGGER audit_log_no_update BEFORE UPDATE ON audit_log
BEGIN SELECT RAISE(ABORT, 'the audit log is append-only'); END;
CREATE TRIGGER audit_log_no_delete BEFORE DELETE ON audit_log
BEGIN SELECT RAISE(ABORT, 'the audit log is append-only'); END;
CREATE TRIGGER plans_no_update BEFORE UPDATE ON plans
BEGIN SELECT RAISE(ABORT, 'plans are immutable; import a replacement plan'); END;
CREATE TRIGGER fields_no_update BEFORE UPDATE ON fields
BEGIN SELECT RAISE(ABORT, 'fields are immutable; import a replacement plan'); END;
CREATE TRIGGER threshold_sets_no_update BEFORE UPDATE ON threshold_sets
BEGIN SELECT RAISE(ABORT, 'threshold sets are versioned; save a new version'); END;
CREATE TRIGGER correction_points_no_update BEFORE UPDATE ON correction_points
BEGIN SELECT RAISE(ABORT, 'correction tables are versioned; load a new table'); END;
CREATE TRIGGER detector_status_no_update BEFORE UPDATE ON detector_status
BEGIN SELECT RAISE(ABORT, 'detector status history is append-only'); END;
