-- +goose Up
-- Schema v10: a condition report may say a mark was reset: set again where
-- it was, or re-established, and levelled since. Like "good", it ends the
-- doubt a report of disturbed, destroyed or not found cast on the mark's
-- height; only a report does that, never a new height by itself. A
-- publication writes one for the marks it re-levelled when the publisher
-- asks (publish --report-condition).
ALTER TABLE mark_condition DROP CONSTRAINT mark_condition_condition_check;
ALTER TABLE mark_condition ADD CONSTRAINT mark_condition_condition_check
    CHECK (condition IN ('good', 'disturbed', 'destroyed', 'not-found', 'unverified', 'reset'));

-- +goose Down
-- Refused (by the constraint) while any report says reset: the record
-- is never rewritten to fit an older schema.
ALTER TABLE mark_condition DROP CONSTRAINT mark_condition_condition_check;
ALTER TABLE mark_condition ADD CONSTRAINT mark_condition_condition_check
    CHECK (condition IN ('good', 'disturbed', 'destroyed', 'not-found', 'unverified'));
