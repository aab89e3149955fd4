-- +goose Up
-- Schema v19: import of an existing register (docs/import.md).
--
-- 1. import_event records each import: who made it, when, and every file
--    it read with its SHA-256. The rows an import writes share its
--    transaction (created_xid), which is how trace reaches the import of
--    an imported height. It joins the evidence (cairn_evidence_tables, 23)
--    with created_xid, recorded_role, an index on created_xid, the
--    append-only triggers and the commit trigger (an import heads a
--    write); cairn_roles_apply grants INSERT on it to cairn_publisher (an
--    import writes heights).
-- 2. Staging. The roles have no TEMP (00011), so an import copies its rows
--    into unlogged tables of the schema cairn_staging, each row keyed by
--    the importing transaction (import_xid), checks and inserts them set
--    by set, and deletes its rows before it commits (or rolls back with
--    them). They are scratch, not the register: outside its schema, not
--    in the evidence, not counted.

CREATE TABLE import_event (
    id            bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    -- The folder or zip file the import was read from, as given.
    source        text NOT NULL CHECK (btrim(source) <> ''),
    -- One element per file: {"name": ..., "sha256": hex, "rows": n}.
    files         jsonb NOT NULL CHECK (jsonb_typeof(files) = 'array' AND jsonb_array_length(files) > 0),
    recorded_by   text NOT NULL CHECK (btrim(recorded_by) <> ''),
    recorded_at   timestamptz NOT NULL DEFAULT cairn_write_time(),
    created_xid   xid8 DEFAULT cairn_xact(),
    recorded_role text DEFAULT session_user
);
CREATE INDEX import_event_created_xid ON import_event (created_xid);

CREATE TRIGGER import_event_append_only BEFORE UPDATE OR DELETE ON import_event
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER import_event_no_truncate BEFORE TRUNCATE ON import_event
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE CONSTRAINT TRIGGER import_event_commit AFTER INSERT ON import_event DEFERRABLE INITIALLY DEFERRED
    FOR EACH ROW WHEN (cairn_commit_first()) EXECUTE FUNCTION register_commit_stamp();

CREATE SCHEMA cairn_staging;
CREATE UNLOGGED TABLE cairn_staging.import_mark (
    import_xid      xid8 NOT NULL DEFAULT pg_current_xact_id(),
    line            bigint NOT NULL,
    designation     text NOT NULL,
    folded          text NOT NULL,
    aliases         text[] NOT NULL,
    alias_kinds     text[] NOT NULL,
    alias_agencies  text[] NOT NULL,
    mark_type       text NOT NULL,
    setting         text NOT NULL,
    stamping        text NOT NULL,
    directions      text NOT NULL,
    description     text NOT NULL,
    lat             double precision,
    lon             double precision,
    position_source text NOT NULL,
    by              text NOT NULL,
    retired_on      date,
    retired_reason  text NOT NULL,
    -- The mark that replaced it, as written and folded ('' for none).
    replaced_by     text NOT NULL,
    replaced_folded text NOT NULL
);
CREATE INDEX ON cairn_staging.import_mark (import_xid, folded);
CREATE UNLOGGED TABLE cairn_staging.import_condition (
    import_xid  xid8 NOT NULL DEFAULT pg_current_xact_id(),
    line        bigint NOT NULL,
    mark        text NOT NULL,
    folded      text NOT NULL,
    observed_on date NOT NULL,
    condition   text NOT NULL,
    note        text NOT NULL,
    by          text NOT NULL
);
CREATE INDEX ON cairn_staging.import_condition (import_xid);
CREATE UNLOGGED TABLE cairn_staging.import_height (
    import_xid    xid8 NOT NULL DEFAULT pg_current_xact_id(),
    line          bigint NOT NULL,
    mark          text NOT NULL,
    folded        text NOT NULL,
    datum         text NOT NULL,
    kind          text NOT NULL,
    value         text,
    unit          text,
    decimals      smallint,
    class         text NOT NULL,
    in_force_from timestamptz NOT NULL,
    source        text NOT NULL,
    reason        text NOT NULL,
    by            text NOT NULL
);
CREATE INDEX ON cairn_staging.import_height (import_xid, folded, datum, line);

-- +goose StatementBegin
-- cairn_evidence_tables as in 00018, with import_event last.
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
        (18, 'check_connection',   'run_id, seq'),
        (19, 'mark_version',       'id'),
        (20, 'mark_alias',         'id'),
        (21, 'mark_retirement',    'id'),
        (22, 'condition_photo',    'id'),
        (23, 'import_event',       'id')
    ) AS t (ord, tbl, key)
$$;
-- +goose StatementEnd
REVOKE ALL ON FUNCTION cairn_evidence_tables() FROM PUBLIC;

-- +goose StatementBegin
-- cairn_roles_apply as in 00018, with import_event inserted by
-- cairn_publisher and its sequence, and the staging tables for the
-- publisher. The lists are edited in the function's own text.
DO $$
DECLARE
    d text := pg_get_functiondef('cairn_roles_apply()'::regprocedure);
BEGIN
    IF position($r$'run_event', 'mark_retirement'];$r$ IN d) = 0
       OR position($r$mark_retirement_id_seq TO cairn_publisher;$r$ IN d) = 0 THEN
        RAISE EXCEPTION 'cairn_roles_apply is not as 00018 made it: migration 00019 cannot add its tables';
    END IF;
    d := replace(d, $r$'run_event', 'mark_retirement'];$r$, $r$'run_event', 'mark_retirement', 'import_event'];$r$);
    d := replace(d, $r$mark_retirement_id_seq TO cairn_publisher;$r$,
        $r$mark_retirement_id_seq, import_event_id_seq TO cairn_publisher;
    GRANT USAGE ON SCHEMA cairn_staging TO cairn_publisher;
    GRANT SELECT, INSERT, DELETE ON cairn_staging.import_mark, cairn_staging.import_condition, cairn_staging.import_height TO cairn_publisher;$r$);
    EXECUTE d;
END
$$;
-- +goose StatementEnd

SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
DO $$
DECLARE
    d text := pg_get_functiondef('cairn_roles_apply()'::regprocedure);
BEGIN
    d := replace(d, $r$'run_event', 'mark_retirement', 'import_event'];$r$, $r$'run_event', 'mark_retirement'];$r$);
    d := replace(d, $r$mark_retirement_id_seq, import_event_id_seq TO cairn_publisher;
    GRANT USAGE ON SCHEMA cairn_staging TO cairn_publisher;
    GRANT SELECT, INSERT, DELETE ON cairn_staging.import_mark, cairn_staging.import_condition, cairn_staging.import_height TO cairn_publisher;$r$,
        $r$mark_retirement_id_seq TO cairn_publisher;$r$);
    EXECUTE d;
END
$$;
-- +goose StatementEnd
-- +goose StatementBegin
-- cairn_evidence_tables as 00018 made it.
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
        (18, 'check_connection',   'run_id, seq'),
        (19, 'mark_version',       'id'),
        (20, 'mark_alias',         'id'),
        (21, 'mark_retirement',    'id'),
        (22, 'condition_photo',    'id')
    ) AS t (ord, tbl, key)
$$;
-- +goose StatementEnd
REVOKE ALL ON FUNCTION cairn_evidence_tables() FROM PUBLIC;
DROP SCHEMA cairn_staging CASCADE;
DROP TABLE import_event;
SELECT cairn_roles_apply();
