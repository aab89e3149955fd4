-- +goose Up
-- Schema v11: a sealed record (docs/database.md, "A sealed record").
--
-- 1. Sealed children. A run is recorded once, whole: its sightings,
--    sections, marks and held marks are written in the transaction that
--    inserts the run, and never after. An adjustment likewise: its runs,
--    held versions, results and sections go in with it. The database
--    enforces it: run, adjustment and adjustment_event remember the
--    transaction that inserted them (created_xid, stamped by a trigger
--    whatever the INSERT says, with the start of the server's life it ran
--    in, created_server_start: a transaction never outlives its server, and
--    the pair names one transaction even after a restore into another
--    cluster, whose transaction numbers start again). A statement that adds
--    a child row to a parent made in any other transaction is refused
--    (SQLSTATE CA004). Rows made before this version have NULL there: they
--    are complete, and nothing more may be added to them either.
--    A height citing an adjustment is a child of the adjustment's
--    publication in the same way: it is written in the transaction that
--    inserts the `published` event, never later.
-- 2. Functions and privileges. Every function has a fixed search_path,
--    pg_catalog, public, pg_temp, so a TEMP table, or a function or
--    operator in a schema of the caller's, cannot stand in for the
--    register's own (the temporary schema is searched first unless named
--    last). TEMPORARY and CREATE on the database, and CREATE on schema
--    public, are revoked from PUBLIC and from the register's roles
--    (cairn_database_apply, which cairn_roles_apply calls, since a database's
--    own privileges do not survive a copy from a template or a restore).

ALTER TABLE run
    ADD COLUMN created_xid xid8,
    ADD COLUMN created_server_start timestamptz,
    ADD CONSTRAINT run_created_both CHECK ((created_xid IS NULL) = (created_server_start IS NULL));
ALTER TABLE adjustment
    ADD COLUMN created_xid xid8,
    ADD COLUMN created_server_start timestamptz,
    ADD CONSTRAINT adjustment_created_both CHECK ((created_xid IS NULL) = (created_server_start IS NULL));
ALTER TABLE adjustment_event
    ADD COLUMN created_xid xid8,
    ADD COLUMN created_server_start timestamptz,
    ADD CONSTRAINT adjustment_event_created_both CHECK ((created_xid IS NULL) = (created_server_start IS NULL));

-- +goose StatementBegin
-- seal_stamp sets the creating transaction of a parent row, whatever the
-- INSERT gave.
CREATE FUNCTION seal_stamp() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
BEGIN
    NEW.created_xid := pg_current_xact_id();
    NEW.created_server_start := pg_postmaster_start_time();
    RETURN NEW;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- run_child_sealed refuses a statement that added rows (the transition
-- table added) to a run made in another transaction.
CREATE FUNCTION run_child_sealed() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    bad record;
BEGIN
    SELECT n.run_id, r.recorded_at INTO bad
      FROM (SELECT DISTINCT a.run_id FROM added a) n LEFT JOIN public.run r ON r.id = n.run_id
     WHERE r.created_xid IS DISTINCT FROM pg_current_xact_id()
        OR r.created_server_start IS DISTINCT FROM pg_postmaster_start_time()
     ORDER BY n.run_id LIMIT 1;
    IF FOUND THEN
        RAISE EXCEPTION 'run % is sealed: it was recorded whole on %, and no % row may be added to it since', bad.run_id,
            coalesce(to_char(bad.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS"Z"'), 'an unknown date'), TG_TABLE_NAME
            USING ERRCODE = 'CA004', HINT = 'a run is recorded once, with all its rows; record the field work as a new run';
    END IF;
    RETURN NULL;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- adjustment_child_sealed refuses a statement that added rows to an
-- adjustment made in another transaction.
CREATE FUNCTION adjustment_child_sealed() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    bad record;
BEGIN
    SELECT n.adjustment_id, a.created_at INTO bad
      FROM (SELECT DISTINCT x.adjustment_id FROM added x) n LEFT JOIN public.adjustment a ON a.id = n.adjustment_id
     WHERE a.created_xid IS DISTINCT FROM pg_current_xact_id()
        OR a.created_server_start IS DISTINCT FROM pg_postmaster_start_time()
     ORDER BY n.adjustment_id LIMIT 1;
    IF FOUND THEN
        RAISE EXCEPTION 'adjustment % is sealed: it was made whole on %, and no % row may be added to it since', bad.adjustment_id,
            coalesce(to_char(bad.created_at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS"Z"'), 'an unknown date'), TG_TABLE_NAME
            USING ERRCODE = 'CA004', HINT = 'an adjustment is made once, with all its rows; adjust again';
    END IF;
    RETURN NULL;
END
$$;
-- +goose StatementEnd

CREATE TRIGGER run_created BEFORE INSERT ON run
    FOR EACH ROW EXECUTE FUNCTION seal_stamp();
CREATE TRIGGER adjustment_created BEFORE INSERT ON adjustment
    FOR EACH ROW EXECUTE FUNCTION seal_stamp();
CREATE TRIGGER adjustment_event_created BEFORE INSERT ON adjustment_event
    FOR EACH ROW EXECUTE FUNCTION seal_stamp();

-- One statement-level check per statement (COPY included), over the rows
-- it added: COPY keeps its batched inserts, which a row trigger would stop.
CREATE TRIGGER sighting_sealed AFTER INSERT ON sighting
    REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION run_child_sealed();
CREATE TRIGGER section_sealed AFTER INSERT ON section
    REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION run_child_sealed();
CREATE TRIGGER run_mark_sealed AFTER INSERT ON run_mark
    REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION run_child_sealed();
CREATE TRIGGER run_held_sealed AFTER INSERT ON run_held
    REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION run_child_sealed();
CREATE TRIGGER adjustment_run_sealed AFTER INSERT ON adjustment_run
    REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION adjustment_child_sealed();
CREATE TRIGGER adjustment_held_sealed AFTER INSERT ON adjustment_held
    REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION adjustment_child_sealed();
CREATE TRIGGER adjustment_result_sealed AFTER INSERT ON adjustment_result
    REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION adjustment_child_sealed();
CREATE TRIGGER adjustment_section_sealed AFTER INSERT ON adjustment_section
    REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION adjustment_child_sealed();

-- +goose StatementBegin
-- height_from_adjustment as in 00003, with a fixed search_path, and a
-- version citing an adjustment written only in the transaction that
-- published it.
CREATE OR REPLACE FUNCTION height_from_adjustment() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    ev record;
BEGIN
    IF NEW.adjustment_id IS NULL THEN
        RETURN NEW;
    END IF;
    SELECT e.recorded_at, e.created_xid, e.created_server_start INTO ev
      FROM public.adjustment_event e WHERE e.adjustment_id = NEW.adjustment_id AND e.status = 'published';
    IF NOT FOUND THEN
        RAISE EXCEPTION 'adjustment % is not published: no height may cite it', NEW.adjustment_id
            USING ERRCODE = 'CA003';
    END IF;
    IF ev.created_xid IS DISTINCT FROM pg_current_xact_id() OR ev.created_server_start IS DISTINCT FROM pg_postmaster_start_time() THEN
        RAISE EXCEPTION 'adjustment % was published on %: its heights were written then, and no height may cite it since',
            NEW.adjustment_id, to_char(ev.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS"Z"')
            USING ERRCODE = 'CA004';
    END IF;
    IF NOT EXISTS (SELECT 1 FROM public.adjustment a JOIN public.adjustment_result r ON r.adjustment_id = a.id
                    WHERE a.id = NEW.adjustment_id AND a.datum_id = NEW.datum_id AND r.mark_id = NEW.mark_id
                      AND NOT r.held AND r.value = NEW.value AND r.unit = NEW.unit AND r.decimals = NEW.decimals) THEN
        RAISE EXCEPTION 'adjustment % has no result % % for this mark and datum', NEW.adjustment_id, NEW.value, NEW.unit
            USING ERRCODE = 'CA003';
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd

-- The functions of 00001 and 00005.
ALTER FUNCTION height_canonical(bytea, text, text, height) SET search_path = pg_catalog, public, pg_temp;
ALTER FUNCTION height_before_insert() SET search_path = pg_catalog, public, pg_temp;
ALTER FUNCTION refuse_change() SET search_path = pg_catalog, public, pg_temp;
ALTER FUNCTION refuse_key_change() SET search_path = pg_catalog, public, pg_temp;

-- +goose StatementBegin
-- cairn_database_apply revokes what nobody of the register needs on this
-- database: TEMPORARY (a TEMP table could shadow a table for a function
-- without a fixed search_path) and CREATE, on the database from PUBLIC
-- and the roles, and CREATE on schema public (a function or operator
-- there could be chosen over pg_catalog's when it matches the arguments
-- better). Only the database's owner (or a superuser) may revoke them;
-- anyone else is told so. Idempotent.
CREATE FUNCTION cairn_database_apply() RETURNS void LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    r text;
BEGIN
    IF NOT pg_has_role(current_user, (SELECT datdba FROM pg_database WHERE datname = current_database()), 'USAGE')
       AND NOT (SELECT rolsuper FROM pg_roles WHERE rolname = current_user) THEN
        RAISE NOTICE '% does not own database %: TEMPORARY and CREATE are left as they are; run cairn db roles as its owner',
            current_user, current_database();
        RETURN;
    END IF;
    EXECUTE format('REVOKE TEMPORARY, CREATE ON DATABASE %I FROM PUBLIC', current_database());
    REVOKE CREATE ON SCHEMA public FROM PUBLIC;
    FOREACH r IN ARRAY ARRAY['cairn_reader', 'cairn_recorder', 'cairn_publisher'] LOOP
        IF EXISTS (SELECT 1 FROM pg_roles WHERE rolname = r) THEN
            EXECUTE format('REVOKE TEMPORARY, CREATE ON DATABASE %I FROM %I', current_database(), r);
            EXECUTE format('REVOKE CREATE ON SCHEMA public FROM %I', r);
        END IF;
    END LOOP;
END
$$;
-- +goose StatementEnd
REVOKE ALL ON FUNCTION seal_stamp(), run_child_sealed(), adjustment_child_sealed(), cairn_database_apply() FROM PUBLIC;

-- +goose StatementBegin
-- cairn_roles_apply as in 00007, with a fixed search_path (so the tables
-- are those of schema public, not of current_schema(), now pg_catalog), calling
-- cairn_database_apply first, and keeping PUBLIC off the new functions.
CREATE OR REPLACE FUNCTION cairn_roles_apply() RETURNS text[] LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    roles      constant text[] := ARRAY['cairn_reader', 'cairn_recorder', 'cairn_publisher'];
    history    constant text[] := ARRAY['height', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_event', 'adjustment_section', 'run_held', 'run_event'];
    everything constant text[] := history || ARRAY['mark', 'datum', 'goose_db_version'];
    recorded   constant text[] := ARRAY['mark', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_section', 'run_held'];
    published  constant text[] := ARRAY['height', 'adjustment_event', 'datum', 'run_event'];
    may_create boolean;
    missing    text[] := '{}';
    owner      text;
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

    SELECT tableowner INTO owner FROM pg_tables WHERE schemaname = 'public' AND tablename = 'height';
    FOREACH t IN ARRAY everything LOOP
        EXECUTE format('REVOKE ALL ON TABLE %I FROM PUBLIC, cairn_reader, cairn_recorder, cairn_publisher', t);
        EXECUTE format('GRANT SELECT ON TABLE %I TO cairn_reader', t);
    END LOOP;
    FOREACH t IN ARRAY recorded LOOP
        EXECUTE format('GRANT INSERT ON TABLE %I TO cairn_recorder', t);
    END LOOP;
    FOREACH t IN ARRAY published LOOP
        EXECUTE format('GRANT INSERT ON TABLE %I TO cairn_publisher', t);
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

    -- Functions: the canonical text is for anyone with a role; the
    -- trigger functions need no grant (a trigger runs its function
    -- whoever fires it); the function that grants is the owner's alone.
    REVOKE ALL ON FUNCTION height_canonical(bytea, text, text, height) FROM PUBLIC;
    GRANT EXECUTE ON FUNCTION height_canonical(bytea, text, text, height) TO cairn_reader;
    REVOKE ALL ON FUNCTION height_before_insert(), height_from_adjustment(), refuse_change(), refuse_key_change() FROM PUBLIC;
    REVOKE ALL ON FUNCTION cairn_roles_apply() FROM PUBLIC;
    REVOKE ALL ON FUNCTION cairn_database_apply(), seal_stamp(), run_child_sealed(), adjustment_child_sealed() FROM PUBLIC;
    RETURN missing;
END
$$;
-- +goose StatementEnd

SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
-- cairn_roles_apply as 00007 made it.
CREATE OR REPLACE FUNCTION cairn_roles_apply() RETURNS text[] LANGUAGE plpgsql AS $$
DECLARE
    roles      constant text[] := ARRAY['cairn_reader', 'cairn_recorder', 'cairn_publisher'];
    history    constant text[] := ARRAY['height', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_event', 'adjustment_section', 'run_held', 'run_event'];
    everything constant text[] := history || ARRAY['mark', 'datum', 'goose_db_version'];
    recorded   constant text[] := ARRAY['mark', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_section', 'run_held'];
    published  constant text[] := ARRAY['height', 'adjustment_event', 'datum', 'run_event'];
    may_create boolean;
    missing    text[] := '{}';
    owner      text;
    r          text;
    t          text;
BEGIN
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

    SELECT tableowner INTO owner FROM pg_tables WHERE schemaname = current_schema() AND tablename = 'height';
    FOREACH t IN ARRAY everything LOOP
        EXECUTE format('REVOKE ALL ON TABLE %I FROM PUBLIC, cairn_reader, cairn_recorder, cairn_publisher', t);
        EXECUTE format('GRANT SELECT ON TABLE %I TO cairn_reader', t);
    END LOOP;
    FOREACH t IN ARRAY recorded LOOP
        EXECUTE format('GRANT INSERT ON TABLE %I TO cairn_recorder', t);
    END LOOP;
    FOREACH t IN ARRAY published LOOP
        EXECUTE format('GRANT INSERT ON TABLE %I TO cairn_publisher', t);
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

    -- Functions: the canonical text is for anyone with a role; the
    -- trigger functions need no grant (a trigger runs its function
    -- whoever fires it); the function that grants is the owner's alone.
    REVOKE ALL ON FUNCTION height_canonical(bytea, text, text, height) FROM PUBLIC;
    GRANT EXECUTE ON FUNCTION height_canonical(bytea, text, text, height) TO cairn_reader;
    REVOKE ALL ON FUNCTION height_before_insert(), height_from_adjustment(), refuse_change(), refuse_key_change() FROM PUBLIC;
    REVOKE ALL ON FUNCTION cairn_roles_apply() FROM PUBLIC;
    RETURN missing;
END
$$;
-- +goose StatementEnd
DROP FUNCTION cairn_database_apply();
-- TEMPORARY on the database is PUBLIC's again, as PostgreSQL makes every
-- database. CREATE on schema public stays revoked: it is PostgreSQL 15's
-- own default, and granting it back would reopen what this version shut.
-- +goose StatementBegin
DO $$
BEGIN
    EXECUTE format('GRANT TEMPORARY ON DATABASE %I TO PUBLIC', current_database());
END
$$;
-- +goose StatementEnd
ALTER FUNCTION height_canonical(bytea, text, text, height) RESET search_path;
ALTER FUNCTION height_before_insert() RESET search_path;
ALTER FUNCTION refuse_change() RESET search_path;
ALTER FUNCTION refuse_key_change() RESET search_path;
-- +goose StatementBegin
-- height_from_adjustment as 00003 made it.
CREATE OR REPLACE FUNCTION height_from_adjustment() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF NEW.adjustment_id IS NULL THEN
        RETURN NEW;
    END IF;
    IF NOT EXISTS (SELECT 1 FROM adjustment_event e WHERE e.adjustment_id = NEW.adjustment_id AND e.status = 'published') THEN
        RAISE EXCEPTION 'adjustment % is not published: no height may cite it', NEW.adjustment_id
            USING ERRCODE = 'CA003';
    END IF;
    IF NOT EXISTS (SELECT 1 FROM adjustment a JOIN adjustment_result r ON r.adjustment_id = a.id
                    WHERE a.id = NEW.adjustment_id AND a.datum_id = NEW.datum_id AND r.mark_id = NEW.mark_id
                      AND NOT r.held AND r.value = NEW.value AND r.unit = NEW.unit AND r.decimals = NEW.decimals) THEN
        RAISE EXCEPTION 'adjustment % has no result % % for this mark and datum', NEW.adjustment_id, NEW.value, NEW.unit
            USING ERRCODE = 'CA003';
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd
DROP TRIGGER adjustment_section_sealed ON adjustment_section;
DROP TRIGGER adjustment_result_sealed ON adjustment_result;
DROP TRIGGER adjustment_held_sealed ON adjustment_held;
DROP TRIGGER adjustment_run_sealed ON adjustment_run;
DROP TRIGGER run_held_sealed ON run_held;
DROP TRIGGER run_mark_sealed ON run_mark;
DROP TRIGGER section_sealed ON section;
DROP TRIGGER sighting_sealed ON sighting;
DROP TRIGGER adjustment_event_created ON adjustment_event;
DROP TRIGGER adjustment_created ON adjustment;
DROP TRIGGER run_created ON run;
DROP FUNCTION adjustment_child_sealed();
DROP FUNCTION run_child_sealed();
DROP FUNCTION seal_stamp();
ALTER TABLE adjustment_event DROP CONSTRAINT adjustment_event_created_both, DROP COLUMN created_server_start, DROP COLUMN created_xid;
ALTER TABLE adjustment DROP CONSTRAINT adjustment_created_both, DROP COLUMN created_server_start, DROP COLUMN created_xid;
ALTER TABLE run DROP CONSTRAINT run_created_both, DROP COLUMN created_server_start, DROP COLUMN created_xid;
