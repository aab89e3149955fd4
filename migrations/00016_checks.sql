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
-- transaction, and never changed. cairn_evidence_tables and
-- cairn_roles_apply are made again with the two tables in their lists.

CREATE TABLE check_run (
    run_id        bigint PRIMARY KEY REFERENCES run (id),
    created_xid   xid8 DEFAULT pg_current_xact_id(),
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
    created_xid    xid8 DEFAULT pg_current_xact_id(),
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
-- cairn_roles_apply as in 00012, with check_run and check_connection
-- among the tables of the history, inserted by cairn_recorder.
CREATE OR REPLACE FUNCTION cairn_roles_apply() RETURNS text[] LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    roles      constant text[] := ARRAY['cairn_reader', 'cairn_recorder', 'cairn_publisher'];
    history    constant text[] := ARRAY['height', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_event', 'adjustment_section', 'run_held', 'run_event',
                                        'register_commit', 'check_run', 'check_connection'];
    everything constant text[] := history || ARRAY['mark', 'datum', 'goose_db_version'];
    recorded   constant text[] := ARRAY['mark', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_section', 'run_held', 'check_run', 'check_connection'];
    published  constant text[] := ARRAY['height', 'adjustment_event', 'datum', 'run_event'];
    stamped    constant text[] := ARRAY['created_xid', 'created_server_start', 'recorded_role', 'recorded_at', 'created_at'];
    may_create boolean;
    missing    text[] := '{}';
    owner      text;
    -- The register's schema: where height is found on this function's
    -- search path (current_schema() would be pg_catalog here).
    schema     text := (SELECT relnamespace::regnamespace::text FROM pg_class WHERE oid = 'height'::regclass);
    r          text;
    t          text;
BEGIN
    -- No TEMP, no CREATE on the database or in schema public (00011).
    PERFORM cairn_database_apply();
    SELECT rolsuper OR rolcreaterole INTO may_create FROM pg_roles WHERE rolname = current_user;
    FOREACH r IN ARRAY roles LOOP
        IF NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = r) THEN
            IF may_create THEN
                BEGIN
                    EXECUTE format('CREATE ROLE %I NOLOGIN', r);
                EXCEPTION WHEN duplicate_object OR unique_violation THEN
                    -- Another database's migration made it meanwhile.
                    NULL;
                END;
            ELSE
                missing := missing || r;
            END IF;
        END IF;
    END LOOP;
    IF cardinality(missing) > 0 THEN
        RAISE NOTICE 'roles % are missing and % may not create them: no privileges granted; run cairn db roles as an administrator',
            missing, current_user;
        RETURN missing;
    END IF;

    -- Each role includes the one below it.
    IF may_create THEN
        BEGIN
            IF NOT pg_has_role('cairn_recorder', 'cairn_reader', 'MEMBER') THEN
                GRANT cairn_reader TO cairn_recorder;
            END IF;
            IF NOT pg_has_role('cairn_publisher', 'cairn_recorder', 'MEMBER') THEN
                GRANT cairn_recorder TO cairn_publisher;
            END IF;
        EXCEPTION WHEN unique_violation THEN
            NULL;
        END;
    END IF;

    SELECT tableowner INTO owner FROM pg_tables WHERE schemaname = schema AND tablename = 'height';
    FOREACH t IN ARRAY everything LOOP
        EXECUTE format('REVOKE ALL ON TABLE %I FROM PUBLIC, cairn_reader, cairn_recorder, cairn_publisher', t);
        EXECUTE format('GRANT SELECT ON TABLE %I TO cairn_reader', t);
    END LOOP;
    -- INSERT of the columns a writer gives, not of those the database sets.
    FOREACH t IN ARRAY recorded || published LOOP
        EXECUTE format('GRANT INSERT (%s) ON TABLE %I TO %I',
            (SELECT string_agg(quote_ident(a.attname), ', ' ORDER BY a.attnum)
               FROM pg_attribute a
              WHERE a.attrelid = t::regclass AND a.attnum > 0 AND NOT a.attisdropped
                AND a.attidentity = '' AND a.attgenerated = '' AND a.attname <> ALL (stamped)),
            t, CASE WHEN t = ANY (recorded) THEN 'cairn_recorder' ELSE 'cairn_publisher' END);
    END LOOP;
    GRANT UPDATE (id) ON TABLE mark, adjustment TO cairn_publisher;
    FOREACH t IN ARRAY history LOOP
        EXECUTE format('REVOKE UPDATE, DELETE, TRUNCATE ON TABLE %I FROM %I', t, owner);
    END LOOP;
    -- The owner's own row locks on adjustment (publish, discard).
    EXECUTE format('GRANT UPDATE (id) ON TABLE adjustment TO %I', owner);

    REVOKE ALL ON SEQUENCE mark_id_seq, mark_condition_id_seq, run_id_seq, adjustment_id_seq,
        height_id_seq, adjustment_event_id_seq, datum_id_seq, run_event_id_seq FROM PUBLIC, cairn_reader, cairn_recorder, cairn_publisher;
    GRANT SELECT ON SEQUENCE mark_id_seq, mark_condition_id_seq, run_id_seq, adjustment_id_seq,
        height_id_seq, adjustment_event_id_seq, datum_id_seq, run_event_id_seq TO cairn_reader;
    GRANT USAGE ON SEQUENCE mark_id_seq, mark_condition_id_seq, run_id_seq, adjustment_id_seq TO cairn_recorder;
    GRANT USAGE ON SEQUENCE height_id_seq, adjustment_event_id_seq, datum_id_seq, run_event_id_seq TO cairn_publisher;

    -- Functions: the canonical texts are for anyone with a role; the
    -- trigger functions need no grant (a trigger runs its function
    -- whoever fires it), but the functions a default or a trigger's WHEN
    -- calls run with the writer's privileges; the function that grants is
    -- the owner's alone.
    REVOKE ALL ON FUNCTION height_canonical(bytea, text, text, height), height_canonical_v2(bytea, text, text, height) FROM PUBLIC;
    GRANT EXECUTE ON FUNCTION height_canonical(bytea, text, text, height), height_canonical_v2(bytea, text, text, height) TO cairn_reader;
    REVOKE ALL ON FUNCTION height_before_insert(), height_from_adjustment(), refuse_change(), refuse_key_change(),
        register_commit_stamp() FROM PUBLIC;
    REVOKE ALL ON FUNCTION cairn_write_time(), cairn_commit_first() FROM PUBLIC;
    GRANT EXECUTE ON FUNCTION cairn_write_time(), cairn_commit_first() TO cairn_recorder;
    REVOKE ALL ON FUNCTION cairn_database_apply(), seal_stamp(), run_child_sealed(), adjustment_child_sealed() FROM PUBLIC;
    REVOKE ALL ON FUNCTION cairn_roles_apply() FROM PUBLIC;
    RETURN missing;
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
CREATE OR REPLACE FUNCTION cairn_roles_apply() RETURNS text[] LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    roles      constant text[] := ARRAY['cairn_reader', 'cairn_recorder', 'cairn_publisher'];
    history    constant text[] := ARRAY['height', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_event', 'adjustment_section', 'run_held', 'run_event',
                                        'register_commit'];
    everything constant text[] := history || ARRAY['mark', 'datum', 'goose_db_version'];
    recorded   constant text[] := ARRAY['mark', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_section', 'run_held'];
    published  constant text[] := ARRAY['height', 'adjustment_event', 'datum', 'run_event'];
    stamped    constant text[] := ARRAY['created_xid', 'created_server_start', 'recorded_role', 'recorded_at', 'created_at'];
    may_create boolean;
    missing    text[] := '{}';
    owner      text;
    -- The register's schema: where height is found on this function's
    -- search path (current_schema() would be pg_catalog here).
    schema     text := (SELECT relnamespace::regnamespace::text FROM pg_class WHERE oid = 'height'::regclass);
    r          text;
    t          text;
BEGIN
    -- No TEMP, no CREATE on the database or in schema public (00011).
    PERFORM cairn_database_apply();
    SELECT rolsuper OR rolcreaterole INTO may_create FROM pg_roles WHERE rolname = current_user;
    FOREACH r IN ARRAY roles LOOP
        IF NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = r) THEN
            IF may_create THEN
                BEGIN
                    EXECUTE format('CREATE ROLE %I NOLOGIN', r);
                EXCEPTION WHEN duplicate_object OR unique_violation THEN
                    -- Another database's migration made it meanwhile.
                    NULL;
                END;
            ELSE
                missing := missing || r;
            END IF;
        END IF;
    END LOOP;
    IF cardinality(missing) > 0 THEN
        RAISE NOTICE 'roles % are missing and % may not create them: no privileges granted; run cairn db roles as an administrator',
            missing, current_user;
        RETURN missing;
    END IF;

    -- Each role includes the one below it.
    IF may_create THEN
        BEGIN
            IF NOT pg_has_role('cairn_recorder', 'cairn_reader', 'MEMBER') THEN
                GRANT cairn_reader TO cairn_recorder;
            END IF;
            IF NOT pg_has_role('cairn_publisher', 'cairn_recorder', 'MEMBER') THEN
                GRANT cairn_recorder TO cairn_publisher;
            END IF;
        EXCEPTION WHEN unique_violation THEN
            NULL;
        END;
    END IF;

    SELECT tableowner INTO owner FROM pg_tables WHERE schemaname = schema AND tablename = 'height';
    FOREACH t IN ARRAY everything LOOP
        EXECUTE format('REVOKE ALL ON TABLE %I FROM PUBLIC, cairn_reader, cairn_recorder, cairn_publisher', t);
        EXECUTE format('GRANT SELECT ON TABLE %I TO cairn_reader', t);
    END LOOP;
    -- INSERT of the columns a writer gives, not of those the database sets.
    FOREACH t IN ARRAY recorded || published LOOP
        EXECUTE format('GRANT INSERT (%s) ON TABLE %I TO %I',
            (SELECT string_agg(quote_ident(a.attname), ', ' ORDER BY a.attnum)
               FROM pg_attribute a
              WHERE a.attrelid = t::regclass AND a.attnum > 0 AND NOT a.attisdropped
                AND a.attidentity = '' AND a.attgenerated = '' AND a.attname <> ALL (stamped)),
            t, CASE WHEN t = ANY (recorded) THEN 'cairn_recorder' ELSE 'cairn_publisher' END);
    END LOOP;
    GRANT UPDATE (id) ON TABLE mark, adjustment TO cairn_publisher;
    FOREACH t IN ARRAY history LOOP
        EXECUTE format('REVOKE UPDATE, DELETE, TRUNCATE ON TABLE %I FROM %I', t, owner);
    END LOOP;
    -- The owner's own row locks on adjustment (publish, discard).
    EXECUTE format('GRANT UPDATE (id) ON TABLE adjustment TO %I', owner);

    REVOKE ALL ON SEQUENCE mark_id_seq, mark_condition_id_seq, run_id_seq, adjustment_id_seq,
        height_id_seq, adjustment_event_id_seq, datum_id_seq, run_event_id_seq FROM PUBLIC, cairn_reader, cairn_recorder, cairn_publisher;
    GRANT SELECT ON SEQUENCE mark_id_seq, mark_condition_id_seq, run_id_seq, adjustment_id_seq,
        height_id_seq, adjustment_event_id_seq, datum_id_seq, run_event_id_seq TO cairn_reader;
    GRANT USAGE ON SEQUENCE mark_id_seq, mark_condition_id_seq, run_id_seq, adjustment_id_seq TO cairn_recorder;
    GRANT USAGE ON SEQUENCE height_id_seq, adjustment_event_id_seq, datum_id_seq, run_event_id_seq TO cairn_publisher;

    -- Functions: the canonical texts are for anyone with a role; the
    -- trigger functions need no grant (a trigger runs its function
    -- whoever fires it), but the functions a default or a trigger's WHEN
    -- calls run with the writer's privileges; the function that grants is
    -- the owner's alone.
    REVOKE ALL ON FUNCTION height_canonical(bytea, text, text, height), height_canonical_v2(bytea, text, text, height) FROM PUBLIC;
    GRANT EXECUTE ON FUNCTION height_canonical(bytea, text, text, height), height_canonical_v2(bytea, text, text, height) TO cairn_reader;
    REVOKE ALL ON FUNCTION height_before_insert(), height_from_adjustment(), refuse_change(), refuse_key_change(),
        register_commit_stamp() FROM PUBLIC;
    REVOKE ALL ON FUNCTION cairn_write_time(), cairn_commit_first() FROM PUBLIC;
    GRANT EXECUTE ON FUNCTION cairn_write_time(), cairn_commit_first() TO cairn_recorder;
    REVOKE ALL ON FUNCTION cairn_database_apply(), seal_stamp(), run_child_sealed(), adjustment_child_sealed() FROM PUBLIC;
    REVOKE ALL ON FUNCTION cairn_roles_apply() FROM PUBLIC;
    RETURN missing;
END
$$;
-- +goose StatementEnd

DROP TABLE check_connection;
DROP TABLE check_run;
SELECT cairn_roles_apply();
