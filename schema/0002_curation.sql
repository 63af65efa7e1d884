-- whorl library schema, version 2: review sign-offs, withdrawal reasons, compound per revision,
-- and immutability of the records an audit relies on.

-- A sign-off: who reviewed which revision, when, with what decision and meaning.
CREATE TABLE review (
    id            INTEGER PRIMARY KEY,
    spectrum_id   INTEGER NOT NULL REFERENCES spectrum(id),
    revision      INTEGER NOT NULL,
    reviewer      TEXT NOT NULL,
    at            TEXT NOT NULL,
    decision      TEXT NOT NULL CHECK (decision IN ('approved', 'rejected')),
    meaning       TEXT NOT NULL,
    note          TEXT,
    imported_from TEXT             -- set when the sign-off came in with a bundle
) STRICT;

CREATE INDEX review_by_spectrum ON review (spectrum_id, revision);

ALTER TABLE revision ADD COLUMN compound_id INTEGER REFERENCES compound(id);
UPDATE revision SET compound_id = (SELECT compound_id FROM spectrum WHERE spectrum.id = revision.spectrum_id);

ALTER TABLE spectrum ADD COLUMN withdrawn_reason TEXT;

-- A re-run import recognises files it has stored by their bytes, before reading them.
CREATE INDEX spectrum_by_file ON spectrum (technique, file_sha256);

INSERT INTO setting (key, value) VALUES ('allow_self_review', 'false') ON CONFLICT (key) DO NOTHING;

-- Sign-offs and revisions are kept as written.
CREATE TRIGGER review_no_update BEFORE UPDATE ON review
BEGIN
    SELECT RAISE(ABORT, 'sign-offs are kept as written');
END;

CREATE TRIGGER review_no_delete BEFORE DELETE ON review
BEGIN
    SELECT RAISE(ABORT, 'sign-offs are kept as written');
END;

CREATE TRIGGER revision_no_update BEFORE UPDATE ON revision
BEGIN
    SELECT RAISE(ABORT, 'revisions are kept as written; add a new revision instead');
END;

CREATE TRIGGER revision_no_delete BEFORE DELETE ON revision
BEGIN
    SELECT RAISE(ABORT, 'revisions are kept as written');
END;

-- Raw points and their hashes never change once imported.
CREATE TRIGGER spectrum_raw_is_fixed BEFORE UPDATE OF raw, raw_sha256, file_sha256, technique ON spectrum
BEGIN
    SELECT RAISE(ABORT, 'raw points are kept exactly as imported');
END;
