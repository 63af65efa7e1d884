-- whorl library schema: accounts of the lab server and their bearer tokens. Every change to
-- these tables is written in the same transaction as its audit event (`account-*`, `token-*`).

-- A signed-in person. `name` is the name as typed after NFKC; `key` is its comparison key
-- (case folded, UTS #39 confusable skeleton), unique, so a case variant or a look-alike
-- cannot make a second account.
CREATE TABLE account (
    id              INTEGER PRIMARY KEY,
    name            TEXT NOT NULL,
    key             TEXT NOT NULL UNIQUE,
    role            TEXT NOT NULL CHECK (role IN ('reader', 'submitter', 'signer', 'curator', 'admin')),
    password        TEXT,              -- argon2id, PHC string format; NULL until one is set
    created_at      TEXT NOT NULL,
    disabled_at     TEXT,
    disabled_reason TEXT,
    locked_until    TEXT               -- set by a lock-out after repeated failed sign-ins
) STRICT;

-- A bearer token for a program. Only the SHA-256 of the secret is kept.
CREATE TABLE token (
    id          INTEGER PRIMARY KEY,
    account_id  INTEGER NOT NULL REFERENCES account(id),
    label       TEXT NOT NULL,
    sha256      TEXT NOT NULL UNIQUE,
    created_at  TEXT NOT NULL,
    expires_at  TEXT NOT NULL,
    revoked_at  TEXT
) STRICT;

-- Accounts and tokens are disabled or revoked, never deleted, so the trail's names stay
-- resolvable.
CREATE TRIGGER account_no_delete BEFORE DELETE ON account
BEGIN
    SELECT RAISE(ABORT, 'accounts are disabled, never deleted');
END;

CREATE TRIGGER account_key_is_fixed BEFORE UPDATE OF name, key, created_at ON account
BEGIN
    SELECT RAISE(ABORT, 'an account keeps its name');
END;

CREATE TRIGGER token_no_delete BEFORE DELETE ON token
BEGIN
    SELECT RAISE(ABORT, 'tokens are revoked, never deleted');
END;

CREATE TRIGGER token_is_fixed BEFORE UPDATE OF account_id, label, sha256, created_at, expires_at ON token
BEGIN
    SELECT RAISE(ABORT, 'a token is revoked, never changed');
END;

-- Whether an event's actor was signed in (a server session or token: the account proved who
-- it is) or only asserted (a name given on the command line). Older events were asserted.
ALTER TABLE event ADD COLUMN identity TEXT NOT NULL DEFAULT 'asserted';
