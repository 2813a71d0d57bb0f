-- fxledger schema, version 10: what the web console (fxledger serve) adds.
-- Additive only.

-- The client's network address of each audit row written for a request to
-- the console (NULL for the command line, whose rows name the OS account
-- through the identity rows). Not part of the row hash: the chain and its
-- canonical form stay as docs/audit.md defines them.
ALTER TABLE audit_log ADD COLUMN client TEXT CHECK (client IS NULL OR length(client) BETWEEN 1 AND 63);

-- Per-user API tokens for other department systems (docs/api.md). Only the
-- SHA-256 of a token is kept; the token itself is shown once when issued.
-- Authentication state like the sessions: revocation sets revoked_at, and
-- issuing and revoking are audit rows.
CREATE TABLE api_tokens (
    id          INTEGER PRIMARY KEY,
    user_id     INTEGER NOT NULL REFERENCES users (id),
    label       TEXT NOT NULL CHECK (length(label) BETWEEN 1 AND 64),
    token_hash  TEXT NOT NULL UNIQUE CHECK (length(token_hash) = 64),
    created_at  TEXT NOT NULL,
    created_by  TEXT NOT NULL,
    revoked_at  TEXT,
    revoked_by  TEXT
);
CREATE INDEX api_tokens_by_user ON api_tokens (user_id);
CREATE TRIGGER api_tokens_no_delete BEFORE DELETE ON api_tokens
BEGIN SELECT RAISE(ABORT, 'api tokens are revoked, never deleted'); END;
CREATE TRIGGER api_tokens_revoke_only BEFORE UPDATE ON api_tokens
WHEN OLD.revoked_at IS NOT NULL OR NEW.token_hash IS NOT OLD.token_hash
     OR NEW.user_id IS NOT OLD.user_id OR NEW.label IS NOT OLD.label
     OR NEW.created_at IS NOT OLD.created_at OR NEW.created_by IS NOT OLD.created_by
BEGIN SELECT RAISE(ABORT, 'an api token can only be revoked, once'); END;
