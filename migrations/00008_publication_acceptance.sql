-- +goose Up
-- Schema v8: a publication that accepted failed checks says so. Publishing
-- refuses a draft whose checks failed (a misclosure over the allowable, a
-- failed chi-square test, flagged sections or weighted held marks, a held
-- mark whose latest condition report puts it in doubt) unless the publisher
-- accepts them on purpose, with a reason. The acceptance is kept with the
-- publication event, written once with it and never changed (the event's
-- append-only triggers of 00003 cover the new columns):
--
--   accepted_reason  why the failed checks were accepted; NULL when none
--                    was (the checks passed)
--   accepted_checks  the failed checks accepted, as publication found them
--                    (a JSON array of {kind, message, run_id, mark}),
--                    since a mark's condition may be reported after the
--                    draft was made; NULL with accepted_reason
--
-- Who accepted them is the event's recorded_by: the publisher, in the same
-- act. A discard accepts nothing. Existing events accepted nothing (NULL).
-- The table's INSERT privilege (00005) covers the new columns: no grant
-- changes.

ALTER TABLE adjustment_event
    ADD COLUMN accepted_reason text CHECK (accepted_reason IS NULL OR btrim(accepted_reason) <> ''),
    ADD COLUMN accepted_checks jsonb CHECK (accepted_checks IS NULL
        OR (jsonb_typeof(accepted_checks) = 'array' AND jsonb_array_length(accepted_checks) > 0)),
    ADD CONSTRAINT adjustment_event_acceptance CHECK ((accepted_reason IS NULL) = (accepted_checks IS NULL)
        AND (accepted_reason IS NULL OR status = 'published'));

-- +goose Down
ALTER TABLE adjustment_event
    DROP CONSTRAINT adjustment_event_acceptance,
    DROP COLUMN accepted_checks,
    DROP COLUMN accepted_reason;
