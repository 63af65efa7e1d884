-- whorl library schema, version 3: the part of the grid each prepared spectrum covers.

-- JSON {"lo": x, "hi": x} of prepare::Coverage, in the technique's x unit, when an IR or
-- Raman spectrum was measured over less than the grid; NULL when it covers the whole grid,
-- and for spectra prepared before coverage was recorded (which then compare as they did).
ALTER TABLE prepared ADD COLUMN coverage TEXT;
