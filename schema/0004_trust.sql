-- whorl library schema, version 4: who ran each import, the keys whose bundles the library
-- trusts, and guards on the columns an audit relies on.

-- Who ran the command that stored the spectrum (`add`, `import`, a bundle import), beside who
-- the file says submitted it; the four-eyes rule compares a reviewer with both. Libraries
-- written before it was kept take it from the event that recorded the spectrum.
ALTER TABLE spectrum ADD COLUMN imported_by TEXT;
UPDATE spectrum SET imported_by = (
    SELECT actor FROM event
    WHERE event.record = 'spectrum:' || spectrum.id AND event.action IN ('add', 'import')
    ORDER BY seq LIMIT 1
);

-- Public keys (ed25519) whose signed bundles the library accepts, each added by an audited
-- `whorl key trust`.
CREATE TABLE trusted_key (
    id         INTEGER PRIMARY KEY,
    name       TEXT NOT NULL,
    public_key TEXT NOT NULL UNIQUE,   -- 64 hex digits
    trusted_by TEXT NOT NULL,
    trusted_at TEXT NOT NULL,
    reason     TEXT NOT NULL
) STRICT;

CREATE TRIGGER trusted_key_no_update BEFORE UPDATE ON trusted_key
BEGIN
    SELECT RAISE(ABORT, 'trusted keys are kept as written');
END;

CREATE TRIGGER trusted_key_no_delete BEFORE DELETE ON trusted_key
BEGIN
    SELECT RAISE(ABORT, 'trusted keys are kept as written');
END;

-- Who submitted and who imported a spectrum, and where and when it came from, never change.
CREATE TRIGGER spectrum_identity_is_fixed
BEFORE UPDATE OF submitted_by, imported_by, created_at, file_name, x_unit, y_unit ON spectrum
BEGIN
    SELECT RAISE(ABORT, 'who submitted and imported a spectrum is kept as recorded');
END;

-- A spectrum row is never deleted: withdrawal keeps it for history.
CREATE TRIGGER spectrum_no_delete BEFORE DELETE ON spectrum
BEGIN
    SELECT RAISE(ABORT, 'spectra are withdrawn, never deleted');
END;

-- The review policy changes only together with the `policy` event that records it: the
-- newest event must be that change.
CREATE TRIGGER setting_policy_is_audited BEFORE UPDATE ON setting
WHEN OLD.key = 'allow_self_review' AND (
    NEW.key <> OLD.key OR NOT EXISTS (
        SELECT 1 FROM event
        WHERE seq = (SELECT max(seq) FROM event)
          AND action = 'policy'
          AND json_extract(payload, '$.allow_self_review') = (NEW.value = 'true')
    )
)
BEGIN
    SELECT RAISE(ABORT, 'the review policy changes only through whorl policy, recorded in the audit trail');
END;

CREATE TRIGGER setting_policy_no_delete BEFORE DELETE ON setting
WHEN OLD.key = 'allow_self_review'
BEGIN
    SELECT RAISE(ABORT, 'the review policy changes only through whorl policy, recorded in the audit trail');
END;

-- A withdrawal's reason, once given, stays as recorded.
CREATE TRIGGER spectrum_withdrawal_reason_is_fixed BEFORE UPDATE OF withdrawn_reason ON spectrum
WHEN OLD.withdrawn_reason IS NOT NULL
BEGIN
    SELECT RAISE(ABORT, 'the reason of a withdrawal is kept as recorded');
END;
