-- +goose Up
-- Schema v5: the register's roles and what each may do (docs/reliability.md).
--
--   cairn_reader     look-ups only: SELECT on every table
--   cairn_recorder   cairn_reader, and records runs, condition reports, new
--                    marks and draft adjustments
--   cairn_publisher  cairn_recorder, and publishes and discards adjustments,
--                    sets outside heights and adds datums
--   the owner        the role that runs the migrations
--
-- The roles are NOLOGIN groups: people log in as their own roles, made
-- members of one of these. Roles belong to the whole server, not to one
-- database, so several registers on one server share them; cairn_roles_apply
-- creates them when absent (tolerating another database's migration
-- creating them at the same moment) and grants this database's privileges.
-- `cairn db roles` runs it again. When the owner may not create roles, the
-- migration creates none and grants nothing, and says so in a notice; an
-- administrator then runs `cairn db roles` once.
--
-- Nobody may UPDATE, DELETE or TRUNCATE history: those privileges are
-- revoked from PUBLIC, from every cairn role and from the tables' owner
-- (whose attempts the triggers of 00001-00004 refuse besides). The only
-- UPDATE privilege left is on the id column of mark and adjustment, for the
-- row locks (SELECT ... FOR UPDATE) that make publishers take turns; the
-- triggers refuse any actual change of either.

-- Who added each datum, like every other thing the register keeps (empty
-- for datums added before this version).
ALTER TABLE datum ADD COLUMN created_by text NOT NULL DEFAULT '';

-- +goose StatementBegin
CREATE OR REPLACE FUNCTION refuse_key_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_TABLE_NAME = 'mark' AND (NEW.designation IS DISTINCT FROM OLD.designation OR NEW.id IS DISTINCT FROM OLD.id) THEN
        RAISE EXCEPTION 'a mark''s designation never changes (% stays %)', OLD.designation, OLD.designation
            USING ERRCODE = 'CA001';
    END IF;
    IF TG_TABLE_NAME = 'datum' AND (NEW.code IS DISTINCT FROM OLD.code OR NEW.id IS DISTINCT FROM OLD.id) THEN
        RAISE EXCEPTION 'a datum''s code never changes (% stays %)', OLD.code, OLD.code
            USING ERRCODE = 'CA001';
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- cairn_roles_apply creates the roles when absent and the caller may, and
-- grants this database's privileges to them. It returns the roles that are
-- still missing (none when all went well). Idempotent.
CREATE FUNCTION cairn_roles_apply() RETURNS text[] LANGUAGE plpgsql AS $$
DECLARE
    roles      constant text[] := ARRAY['cairn_reader', 'cairn_recorder', 'cairn_publisher'];
    history    constant text[] := ARRAY['height', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_event', 'adjustment_section'];
    everything constant text[] := history || ARRAY['mark', 'datum', 'goose_db_version'];
    recorded   constant text[] := ARRAY['mark', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_section'];
    published  constant text[] := ARRAY['height', 'adjustment_event', 'datum'];
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
        height_id_seq, adjustment_event_id_seq, datum_id_seq FROM PUBLIC, cairn_reader, cairn_recorder, cairn_publisher;
    GRANT SELECT ON SEQUENCE mark_id_seq, mark_condition_id_seq, run_id_seq, adjustment_id_seq,
        height_id_seq, adjustment_event_id_seq, datum_id_seq TO cairn_reader;
    GRANT USAGE ON SEQUENCE mark_id_seq, mark_condition_id_seq, run_id_seq, adjustment_id_seq TO cairn_recorder;
    GRANT USAGE ON SEQUENCE height_id_seq, adjustment_event_id_seq, datum_id_seq TO cairn_publisher;

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

SELECT cairn_roles_apply();

-- +goose Down
-- The roles stay: they belong to the server and other databases may use
-- them. Their privileges in this database go.
-- +goose StatementBegin
DO $$
DECLARE
    owner text;
    t     text;
    r     text;
BEGIN
    SELECT tableowner INTO owner FROM pg_tables WHERE schemaname = current_schema() AND tablename = 'height';
    FOREACH t IN ARRAY ARRAY['height', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                             'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                             'adjustment_event', 'adjustment_section', 'mark', 'datum', 'goose_db_version'] LOOP
        FOREACH r IN ARRAY ARRAY['cairn_reader', 'cairn_recorder', 'cairn_publisher'] LOOP
            IF EXISTS (SELECT 1 FROM pg_roles WHERE rolname = r) THEN
                EXECUTE format('REVOKE ALL ON TABLE %I FROM %I', t, r);
            END IF;
        END LOOP;
        EXECUTE format('GRANT ALL ON TABLE %I TO %I', t, owner);
    END LOOP;
    FOREACH r IN ARRAY ARRAY['cairn_reader', 'cairn_recorder', 'cairn_publisher'] LOOP
        IF EXISTS (SELECT 1 FROM pg_roles WHERE rolname = r) THEN
            EXECUTE format('REVOKE ALL ON ALL SEQUENCES IN SCHEMA %I FROM %I', current_schema(), r);
            EXECUTE format('REVOKE ALL ON FUNCTION height_canonical(bytea, text, text, height) FROM %I', r);
        END IF;
    END LOOP;
END
$$;
-- +goose StatementEnd
GRANT EXECUTE ON FUNCTION height_canonical(bytea, text, text, height), height_before_insert(),
    height_from_adjustment(), refuse_change(), refuse_key_change() TO PUBLIC;
DROP FUNCTION cairn_roles_apply();
ALTER TABLE datum DROP COLUMN created_by;
-- +goose StatementBegin
CREATE OR REPLACE FUNCTION refuse_key_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_TABLE_NAME = 'mark' AND NEW.designation IS DISTINCT FROM OLD.designation THEN
        RAISE EXCEPTION 'a mark''s designation never changes (% stays %)', OLD.designation, OLD.designation
            USING ERRCODE = 'CA001';
    END IF;
    IF TG_TABLE_NAME = 'datum' AND NEW.code IS DISTINCT FROM OLD.code THEN
        RAISE EXCEPTION 'a datum''s code never changes (% stays %)', OLD.code, OLD.code
            USING ERRCODE = 'CA001';
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd
