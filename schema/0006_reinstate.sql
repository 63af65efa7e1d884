-- whorl library schema, version 6: a withdrawn spectrum can be reinstated.

-- The reason of a withdrawal stays as recorded while the spectrum is withdrawn; it is cleared
-- only in the same update that takes the spectrum out of withdrawal (the reinstatement's
-- event keeps it in the audit trail).
DROP TRIGGER spectrum_withdrawal_reason_is_fixed;
CREATE TRIGGER spectrum_withdrawal_reason_is_fixed BEFORE UPDATE OF withdrawn_reason ON spectrum
WHEN OLD.withdrawn_reason IS NOT NULL
 AND NOT (NEW.withdrawn_reason IS NULL AND OLD.status = 'withdrawn' AND NEW.status <> 'withdrawn')
BEGIN
    SELECT RAISE(ABORT, 'the reason of a withdrawal is kept as recorded');
END;

-- A withdrawn spectrum leaves withdrawal only in the transaction whose newest event is its
-- own `reinstate` event, back to pending (the review policy applies to it again).
CREATE TRIGGER spectrum_reinstatement_is_audited BEFORE UPDATE OF status ON spectrum
WHEN OLD.status = 'withdrawn' AND NEW.status <> 'withdrawn' AND (
    NEW.status <> 'pending' OR NOT EXISTS (
        SELECT 1 FROM event
        WHERE seq = (SELECT max(seq) FROM event)
          AND action = 'reinstate'
          AND record = 'spectrum:' || OLD.id
    )
)
BEGIN
    SELECT RAISE(ABORT, 'a withdrawn spectrum comes back only through whorl reinstate, recorded in the audit trail');
END;
