-- +goose Up
-- Schema v16: check runs and check connections (docs/runs.md, "Check
-- connections" and "Check runs").
--
--   check_run         a run recorded as a check only (cairn run record
--                     --check-only): a crew's check between published marks
--                     before a job. It adjusts nothing: adjust leaves it out.
--   check_connection  each two marks of known height a run tied to: the
--                     difference observed between them along the run, the
--                     known (published or held) difference, the length
--                     between them, the allowable and the outcome, and the
--                     published versions compared. A mark whose check
--                     connections in its latest such run all failed is
--                     suspect until a later run passes one of its
--                     connections or a new condition report is recorded.
--
-- New tables rather than new columns of run: a column added to run would
-- change the canonical text of every run already in the evidence
-- (migrations/00013). Both are written only with their run, in its
-- transaction, and never changed. cairn_evidence_tables is made again
-- with the two tables, and cairn_roles_apply's recorded tables take them.

CREATE TABLE check_run (
    run_id        bigint PRIMARY KEY REFERENCES run (id),
    created_xid   xid8 DEFAULT cairn_xact(),
    recorded_role text DEFAULT session_user
);

CREATE TABLE check_connection (
    run_id         bigint NOT NULL REFERENCES run (id),
    -- 1, 2, 3, ... in the order the run reaches the pairs.
    seq            integer NOT NULL CHECK (seq >= 1),
    from_mark_id   bigint NOT NULL REFERENCES mark (id),
    to_mark_id     bigint NOT NULL REFERENCES mark (id),
    -- The published versions compared; NULL for a height typed for the
    -- book (run record --held-height).
    from_height_id bigint REFERENCES height (id),
    to_height_id   bigint REFERENCES height (id),
    -- Metres: observed H(to) − H(from) along the run, the known
    -- difference, the length levelled between them (NULL without
    -- distances) and the allowable (NULL when not judged: no class or no
    -- length).
    observed_m     double precision NOT NULL CHECK (observed_m BETWEEN -10000 AND 10000),
    known_m        double precision NOT NULL CHECK (known_m BETWEEN -10000 AND 10000),
    length_m       double precision CHECK (length_m >= 0),
    allowable_m    double precision CHECK (allowable_m >= 0),
    -- NULL when not judged.
    pass           boolean,
    -- Both marks held and consecutive: the comparison is the line's
    -- misclosure, judged there.
    as_closure     boolean NOT NULL DEFAULT false,
    created_xid    xid8 DEFAULT cairn_xact(),
    recorded_role  text DEFAULT session_user,
    PRIMARY KEY (run_id, seq),
    CONSTRAINT check_connection_two_marks CHECK (from_mark_id <> to_mark_id),
    CONSTRAINT check_connection_judged CHECK ((pass IS NULL) = (allowable_m IS NULL))
);
CREATE INDEX check_connection_from_mark ON check_connection (from_mark_id, run_id);
CREATE INDEX check_connection_to_mark ON check_connection (to_mark_id, run_id);
CREATE INDEX check_run_created_xid ON check_run (created_xid);
CREATE INDEX check_connection_created_xid ON check_connection (created_xid);

CREATE TRIGGER check_run_append_only BEFORE UPDATE OR DELETE ON check_run
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER check_run_no_truncate BEFORE TRUNCATE ON check_run
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER check_connection_append_only BEFORE UPDATE OR DELETE ON check_connection
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER check_connection_no_truncate BEFORE TRUNCATE ON check_connection
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER check_run_sealed AFTER INSERT ON check_run
    REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION run_child_sealed();
CREATE TRIGGER check_connection_sealed AFTER INSERT ON check_connection
    REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION run_child_sealed();

-- +goose StatementBegin
-- cairn_evidence_tables as in 00013, with check_run and check_connection.
CREATE OR REPLACE FUNCTION cairn_evidence_tables() RETURNS TABLE (ord int, tbl text, key text) LANGUAGE sql IMMUTABLE
SET search_path = pg_catalog, public, pg_temp AS $$
    SELECT * FROM (VALUES
        (1,  'datum',              'id'),
        (2,  'mark',               'id'),
        (3,  'mark_condition',     'id'),
        (4,  'run',                'id'),
        (5,  'sighting',           'run_id, seq'),
        (6,  'section',            'run_id, seq'),
        (7,  'run_mark',           'run_id, mark_id'),
        (8,  'run_held',           'run_id, mark_id'),
        (9,  'run_event',          'id'),
        (10, 'adjustment',         'id'),
        (11, 'adjustment_run',     'adjustment_id, run_id'),
        (12, 'adjustment_held',    'adjustment_id, height_id'),
        (13, 'adjustment_result',  'adjustment_id, mark_id'),
        (14, 'adjustment_section', 'adjustment_id, run_id, seq'),
        (15, 'adjustment_event',   'id'),
        (16, 'height',             'id'),
        (17, 'check_run',          'run_id'),
        (18, 'check_connection',   'run_id, seq')
    ) AS t (ord, tbl, key)
$$;
-- +goose StatementEnd
REVOKE ALL ON FUNCTION cairn_evidence_tables() FROM PUBLIC;

-- +goose StatementBegin
-- cairn_roles_apply as in 00014, with check_run and check_connection
-- inserted by cairn_recorder (its history, append-only, is read from
-- cairn_evidence_tables). The list is edited in the function's own text.
DO $$
DECLARE
    d text := pg_get_functiondef('cairn_roles_apply()'::regprocedure);
BEGIN
    IF position($r$'adjustment_section', 'run_held'];$r$ IN d) = 0 THEN
        RAISE EXCEPTION 'cairn_roles_apply is not as 00014 made it: migration 00016 cannot add its tables';
    END IF;
    EXECUTE replace(d, $r$'adjustment_section', 'run_held'];$r$, $r$'adjustment_section', 'run_held', 'check_run', 'check_connection'];$r$);
END
$$;
-- +goose StatementEnd

SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
CREATE OR REPLACE FUNCTION cairn_evidence_tables() RETURNS TABLE (ord int, tbl text, key text) LANGUAGE sql IMMUTABLE
SET search_path = pg_catalog, public, pg_temp AS $$
    SELECT * FROM (VALUES
        (1,  'datum',              'id'),
        (2,  'mark',               'id'),
        (3,  'mark_condition',     'id'),
        (4,  'run',                'id'),
        (5,  'sighting',           'run_id, seq'),
        (6,  'section',            'run_id, seq'),
        (7,  'run_mark',           'run_id, mark_id'),
        (8,  'run_held',           'run_id, mark_id'),
        (9,  'run_event',          'id'),
        (10, 'adjustment',         'id'),
        (11, 'adjustment_run',     'adjustment_id, run_id'),
        (12, 'adjustment_held',    'adjustment_id, height_id'),
        (13, 'adjustment_result',  'adjustment_id, mark_id'),
        (14, 'adjustment_section', 'adjustment_id, run_id, seq'),
        (15, 'adjustment_event',   'id'),
        (16, 'height',             'id')
    ) AS t (ord, tbl, key)
$$;
-- +goose StatementEnd
REVOKE ALL ON FUNCTION cairn_evidence_tables() FROM PUBLIC;

-- +goose StatementBegin
DO $$
BEGIN
    EXECUTE replace(pg_get_functiondef('cairn_roles_apply()'::regprocedure),
        $r$'adjustment_section', 'run_held', 'check_run', 'check_connection'];$r$, $r$'adjustment_section', 'run_held'];$r$);
END
$$;
-- +goose StatementEnd

DROP TABLE check_connection;
DROP TABLE check_run;
SELECT cairn_roles_apply();
