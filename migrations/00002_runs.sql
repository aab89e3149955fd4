-- +goose Up
-- Schema v2: level circuits as recorded. A run keeps its field book byte for
-- byte, every sighting in field order, the sections between consecutive
-- marks (the observations an adjustment uses), and the condition report of
-- each mark it touched that was current when it was recorded. All four
-- tables are append-only: a run is recorded once, whole, and never altered.

-- A mark created by `run record --new-marks` has not been seen by anyone
-- who reported on it: its first condition report says so.
ALTER TABLE mark_condition DROP CONSTRAINT mark_condition_condition_check;
ALTER TABLE mark_condition ADD CONSTRAINT mark_condition_condition_check
    CHECK (condition IN ('good', 'disturbed', 'destroyed', 'not-found', 'unverified'));

CREATE TABLE run (
    id              bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    -- From the book's `# key: value` comments; empty when not written.
    name            text NOT NULL DEFAULT '',
    observed_on     date,
    crew            text NOT NULL DEFAULT '',
    instrument      text NOT NULL DEFAULT '',
    rod             text NOT NULL DEFAULT '',
    datum           text NOT NULL DEFAULT '',
    class           text NOT NULL DEFAULT '',
    -- The unit of every reading and distance in the book.
    unit            text NOT NULL CHECK (unit IN ('m', 'ft', 'usft')),
    -- Every metadata key as parsed, the x- keys included.
    meta            jsonb NOT NULL DEFAULT '{}',
    -- The book as it was read: its file name (base name) and its bytes.
    file_name       text NOT NULL CHECK (btrim(file_name) <> ''),
    book            bytea NOT NULL,
    -- One file, one run: recording the same bytes twice is refused.
    book_sha256     bytea NOT NULL UNIQUE,
    recorded_by     text NOT NULL CHECK (btrim(recorded_by) <> ''),
    recorded_at     timestamptz NOT NULL DEFAULT clock_timestamp(),
    -- The checks of the reduction as they stood when the run was recorded.
    checks_failed   integer NOT NULL CHECK (checks_failed >= 0),
    checks          jsonb NOT NULL DEFAULT '{}',
    -- Why a run whose checks failed was recorded anyway.
    accepted_reason text CHECK (accepted_reason IS NULL OR btrim(accepted_reason) <> ''),
    CONSTRAINT run_book_sha256 CHECK (book_sha256 = sha256(book)),
    CONSTRAINT run_failed_checks_accepted CHECK ((checks_failed > 0) = (accepted_reason IS NOT NULL))
);
CREATE INDEX run_observed ON run (coalesce(observed_on, (recorded_at AT TIME ZONE 'UTC')::date));

CREATE TABLE sighting (
    run_id        bigint NOT NULL REFERENCES run (id),
    -- 1, 2, 3, ... in field order.
    seq           integer NOT NULL CHECK (seq >= 1),
    -- The 1-based line of the row in the book.
    line          integer NOT NULL CHECK (line >= 1),
    point         text NOT NULL CHECK (point <> ''),
    sight         text NOT NULL CHECK (sight IN ('BS', 'IS', 'FS')),
    turning_point boolean NOT NULL,
    -- Wire readings and the sight length in the run's unit; NULL when not
    -- booked.
    upper         double precision,
    middle        double precision NOT NULL,
    lower         double precision,
    distance      double precision CHECK (distance >= 0),
    distance_from text NOT NULL CHECK (distance_from IN ('none', 'stadia', 'measured')),
    note          text NOT NULL DEFAULT '',
    PRIMARY KEY (run_id, seq),
    CONSTRAINT sighting_distance_from CHECK ((distance IS NULL) = (distance_from = 'none'))
);

CREATE TABLE section (
    run_id        bigint NOT NULL REFERENCES run (id),
    -- 1, 2, 3, ... along the run.
    seq           integer NOT NULL CHECK (seq >= 1),
    from_mark_id  bigint NOT NULL REFERENCES mark (id),
    to_mark_id    bigint NOT NULL REFERENCES mark (id),
    -- Observed height difference, to minus from, in metres (unrounded, as
    -- reduced), and the same in the run's unit as the book gave it.
    dh_m          double precision NOT NULL CHECK (dh_m BETWEEN -10000 AND 10000),
    dh_book       double precision NOT NULL,
    -- Sum of backsight and foresight lengths in metres; NULL when the book
    -- gives no distances.
    length_m      double precision CHECK (length_m >= 0),
    setups        integer NOT NULL CHECK (setups >= 1),
    -- The book lines of the section's first backsight and last foresight.
    first_line    integer NOT NULL CHECK (first_line >= 1),
    last_line     integer NOT NULL CHECK (last_line >= first_line),
    PRIMARY KEY (run_id, seq)
);
CREATE INDEX section_from_mark ON section (from_mark_id);
CREATE INDEX section_to_mark ON section (to_mark_id);

CREATE TABLE run_mark (
    run_id       bigint NOT NULL REFERENCES run (id),
    mark_id      bigint NOT NULL REFERENCES mark (id),
    -- The mark's latest condition report when the run was recorded; NULL
    -- when it had none.
    condition_id bigint REFERENCES mark_condition (id),
    -- Whether the run created the mark (`run record --new-marks`).
    created      boolean NOT NULL DEFAULT false,
    PRIMARY KEY (run_id, mark_id)
);
CREATE INDEX run_mark_mark ON run_mark (mark_id, run_id);

CREATE TRIGGER run_append_only BEFORE UPDATE OR DELETE ON run
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER run_no_truncate BEFORE TRUNCATE ON run
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER sighting_append_only BEFORE UPDATE OR DELETE ON sighting
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER sighting_no_truncate BEFORE TRUNCATE ON sighting
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER section_append_only BEFORE UPDATE OR DELETE ON section
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER section_no_truncate BEFORE TRUNCATE ON section
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER run_mark_append_only BEFORE UPDATE OR DELETE ON run_mark
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER run_mark_no_truncate BEFORE TRUNCATE ON run_mark
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();

-- +goose Down
DROP TABLE run_mark;
DROP TABLE section;
DROP TABLE sighting;
DROP TABLE run;
ALTER TABLE mark_condition DROP CONSTRAINT mark_condition_condition_check;
ALTER TABLE mark_condition ADD CONSTRAINT mark_condition_condition_check
    CHECK (condition IN ('good', 'disturbed', 'destroyed', 'not-found'));
