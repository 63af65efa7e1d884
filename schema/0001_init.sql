-- whorl library schema, version 1.
-- SQLite is the single source of truth; the text index and vector caches are derived.

CREATE TABLE setting (
    key   TEXT PRIMARY KEY,
    value TEXT NOT NULL
) STRICT;

-- One preparation recipe (grid and parameters) per technique, fixed at init.
CREATE TABLE recipe (
    technique TEXT PRIMARY KEY,
    recipe    TEXT NOT NULL          -- JSON of prepare::Recipe
) STRICT;

-- A substance. Spectra of the same substance share a compound row; the identity key is the
-- CAS RN when known, else the lower-cased name.
CREATE TABLE compound (
    id         INTEGER PRIMARY KEY,
    key        TEXT NOT NULL UNIQUE,
    name       TEXT NOT NULL,
    formula    TEXT,
    cas        TEXT,
    created_at TEXT NOT NULL
) STRICT;

-- One reference measurement. Raw points are kept exactly as imported and never edited.
CREATE TABLE spectrum (
    id               INTEGER PRIMARY KEY,
    compound_id      INTEGER NOT NULL REFERENCES compound(id),
    technique        TEXT NOT NULL REFERENCES recipe(technique),
    status           TEXT NOT NULL CHECK (status IN ('pending', 'verified', 'withdrawn')),
    current_revision INTEGER NOT NULL DEFAULT 1,
    file_name        TEXT NOT NULL,
    file_sha256      TEXT NOT NULL,
    raw_sha256       TEXT NOT NULL,
    raw              BLOB NOT NULL,  -- little-endian f64 pairs (x, y) in file order
    x_unit           TEXT NOT NULL,
    y_unit           TEXT NOT NULL,
    submitted_by     TEXT NOT NULL,
    created_at       TEXT NOT NULL,
    UNIQUE (technique, raw_sha256)
) STRICT;

CREATE INDEX spectrum_by_technique ON spectrum (technique, status);
CREATE INDEX spectrum_by_compound ON spectrum (compound_id);

-- Metadata of a spectrum, one row per revision; a revision adds a row and never overwrites.
CREATE TABLE revision (
    spectrum_id INTEGER NOT NULL REFERENCES spectrum(id),
    number      INTEGER NOT NULL,
    metadata    TEXT NOT NULL,       -- JSON of library::Metadata
    created_at  TEXT NOT NULL,
    created_by  TEXT NOT NULL,
    reason      TEXT,
    PRIMARY KEY (spectrum_id, number)
) STRICT;

-- The prepared form, derived from the raw points and the recipe, stored so that search never
-- re-prepares the library.
CREATE TABLE prepared (
    spectrum_id INTEGER PRIMARY KEY REFERENCES spectrum(id),
    vector      BLOB NOT NULL,       -- little-endian f32 on the recipe's grid
    peaks       TEXT NOT NULL,       -- JSON array of prepare::Peak
    y_unit      TEXT NOT NULL,       -- the unit used, declared or detected
    warnings    TEXT NOT NULL        -- JSON array of strings
) STRICT;

-- The audit trail: append-only, each event chained to the one before by its hash.
CREATE TABLE event (
    seq          INTEGER PRIMARY KEY,
    at           TEXT NOT NULL,
    actor        TEXT NOT NULL,
    action       TEXT NOT NULL,
    record       TEXT NOT NULL,
    payload      TEXT NOT NULL,
    payload_hash TEXT NOT NULL,
    prev_hash    TEXT NOT NULL,
    hash         TEXT NOT NULL
) STRICT;

CREATE TRIGGER event_no_update BEFORE UPDATE ON event
BEGIN
    SELECT RAISE(ABORT, 'the audit trail is append-only');
END;

CREATE TRIGGER event_no_delete BEFORE DELETE ON event
BEGIN
    SELECT RAISE(ABORT, 'the audit trail is append-only');
END;
