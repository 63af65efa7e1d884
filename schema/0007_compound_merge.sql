-- whorl library schema, version 7: compounds can be merged.

-- A compound merged into another keeps its row (its key still finds the compound it went
-- into, so a later spectrum under the old identity lands there) and names where it went. The
-- column is NULL for every compound that was not merged, so the seals of existing rows stay
-- as they were (a seal digests the non-NULL columns).
ALTER TABLE compound ADD COLUMN merged_into INTEGER REFERENCES compound(id);

-- A merge is never undone by an edit, nor a compound merged into itself.
CREATE TRIGGER compound_merge_is_kept BEFORE UPDATE OF merged_into ON compound
WHEN OLD.merged_into IS NOT NULL OR NEW.merged_into = OLD.id
BEGIN
    SELECT RAISE(ABORT, 'a compound merge is kept as recorded');
END;

CREATE TRIGGER compound_no_delete BEFORE DELETE ON compound
BEGIN
    SELECT RAISE(ABORT, 'compounds are never deleted; merge them instead');
END;
