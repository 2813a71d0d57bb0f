-- fxledger schema, version 7: identities (docs/security.md). Passwords,
-- lockout state and sessions are mutable and live in tables of their own;
-- `users` is untouched. Public signing keys and signatures are append-only,
-- and every key's creation is an audit row, so the audit chain covers them.

-- One Argon2id hash (crypto_pwhash_str, PHC string) per user.
CREATE TABLE auth_passwords (
    user_id     INTEGER PRIMARY KEY REFERENCES users(id),
    hash        TEXT NOT NULL CHECK (hash LIKE '$argon2id$%'),
    must_change INTEGER NOT NULL DEFAULT 0 CHECK (must_change IN (0, 1)),
    changed_at  TEXT NOT NULL
);

-- Failed attempts inside the window and the lock they cause.
CREATE TABLE auth_lockout (
    user_id          INTEGER PRIMARY KEY REFERENCES users(id),
    failures         INTEGER NOT NULL DEFAULT 0 CHECK (failures >= 0),
    first_failure_at TEXT,
    locked_until     TEXT,
    last_login_at    TEXT
);

-- A session: only the SHA-256 of its 256-bit token is kept.
CREATE TABLE auth_sessions (
    id           INTEGER PRIMARY KEY,
    token_sha256 TEXT NOT NULL UNIQUE CHECK (length(token_sha256) = 64),
    user_id      INTEGER NOT NULL REFERENCES users(id),
    client       TEXT NOT NULL,            -- JSON: kind, OS account and host, or address
    started_at   TEXT NOT NULL,
    last_seen_at TEXT NOT NULL,
    ended_at     TEXT
);
CREATE INDEX auth_sessions_by_user ON auth_sessions (user_id);

-- Ed25519 public keys, one per key pair a user ever had (hex).
CREATE TABLE signing_keys (
    id         INTEGER PRIMARY KEY,
    user_id    INTEGER NOT NULL REFERENCES users(id),
    public_key TEXT NOT NULL UNIQUE CHECK (length(public_key) = 64),
    created_at TEXT NOT NULL
);
CREATE TRIGGER signing_keys_no_update BEFORE UPDATE ON signing_keys
BEGIN SELECT RAISE(ABORT, 'signing keys are append-only'); END;
CREATE TRIGGER signing_keys_no_delete BEFORE DELETE ON signing_keys
BEGIN SELECT RAISE(ABORT, 'signing keys are append-only'); END;

-- The user's current secret key, sealed by crypto_secretbox under a key
-- derived from their password with crypto_pwhash (Argon2id) and this salt.
-- Removed on a password reset (nobody can reopen it without the password).
CREATE TABLE signing_secrets (
    user_id  INTEGER PRIMARY KEY REFERENCES users(id),
    key_id   INTEGER NOT NULL UNIQUE REFERENCES signing_keys(id),
    salt     TEXT NOT NULL,
    nonce    TEXT NOT NULL,
    sealed   TEXT NOT NULL,
    opslimit INTEGER NOT NULL,
    memlimit INTEGER NOT NULL
);

-- Electronic signatures: who (login, printed name), when, what it means, and
-- the Ed25519 signature over the signed row's canonical content.
CREATE TABLE signatures (
    id             INTEGER PRIMARY KEY,
    entity         TEXT NOT NULL,
    entity_id      INTEGER NOT NULL,
    user_id        INTEGER NOT NULL REFERENCES users(id),
    key_id         INTEGER NOT NULL REFERENCES signing_keys(id),
    login          TEXT NOT NULL,
    printed_name   TEXT NOT NULL,
    signed_at      TEXT NOT NULL,
    meaning        TEXT NOT NULL CHECK (length(meaning) BETWEEN 1 AND 255),
    content_sha256 TEXT NOT NULL CHECK (length(content_sha256) = 64),
    signature      TEXT NOT NULL CHECK (length(signature) = 128)
);
CREATE INDEX signatures_by_row ON signatures (entity, entity_id);
CREATE TRIGGER signatures_no_update BEFORE UPDATE ON signatures
BEGIN SELECT RAISE(ABORT, 'signatures are append-only'); END;
CREATE TRIGGER signatures_no_delete BEFORE DELETE ON signatures
BEGIN SELECT RAISE(ABORT, 'signatures are append-only'); END;

-- Rows that must carry a signature (docs/security.md) are those written
-- after this migration: the highest id of each signed table at migration
-- time. Rows at or below it were written before signatures existed.
CREATE TABLE signature_watermarks (
    entity   TEXT PRIMARY KEY,
    after_id INTEGER NOT NULL
);
INSERT INTO signature_watermarks (entity, after_id)
    SELECT 'review_events', coalesce(max(id), 0) FROM review_events;
INSERT INTO signature_watermarks (entity, after_id)
    SELECT 'threshold_sets', coalesce(max(id), 0) FROM threshold_sets;
INSERT INTO signature_watermarks (entity, after_id)
    SELECT 'calibrations', coalesce(max(id), 0) FROM calibrations;
INSERT INTO signature_watermarks (entity, after_id)
    SELECT 'correction_tables', coalesce(max(id), 0) FROM correction_tables;
INSERT INTO signature_watermarks (entity, after_id)
    SELECT 'beam_data', coalesce(max(id), 0) FROM beam_data;
INSERT INTO signature_watermarks (entity, after_id)
    SELECT 'plans', coalesce(max(id), 0) FROM plans;
CREATE TRIGGER signature_watermarks_no_update BEFORE UPDATE ON signature_watermarks
BEGIN SELECT RAISE(ABORT, 'signature watermarks are fixed'); END;
CREATE TRIGGER signature_watermarks_no_delete BEFORE DELETE ON signature_watermarks
BEGIN SELECT RAISE(ABORT, 'signature watermarks are fixed'); END;
