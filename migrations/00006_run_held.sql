-- +goose Up
-- Schema v6: what a run was reduced from, and the points of its book that
-- are not marks.
--
--   sighting.spot  the row's point is a spot height (a floor level, an
--                  invert, a ground shot: the book's `kind` column says
--                  `spot`), sighted by an intermediate sight; never a mark
--                  and never a turning point. Rows recorded before this
--                  version are not spot heights (the column's default).
--   run_held       each mark a run was reduced from at a known height: the
--                  height in the book's unit as used, the published
--                  version it was taken from (NULL when the height was
--                  typed on the command line), and why a mark whose latest
--                  condition report put it in doubt was held anyway.
--                  Append-only, like every table of a run.
--
-- cairn_roles_apply is made again with run_held in its lists: readers may
-- read it, recorders insert into it, nobody changes it.

ALTER TABLE sighting ADD COLUMN spot boolean NOT NULL DEFAULT false;
ALTER TABLE sighting ADD CONSTRAINT sighting_spot CHECK (NOT spot OR (sight = 'IS' AND NOT turning_point));

CREATE TABLE run_held (
    run_id             bigint NOT NULL REFERENCES run (id),
    mark_id            bigint NOT NULL REFERENCES mark (id),
    -- The published version held; NULL when the height was typed.
    height_id          bigint REFERENCES height (id),
    -- The held height in the run's unit, as the reduction used it: the
    -- typed value, or the version's value converted exactly and rounded
    -- to nine places.
    value_in_book_unit numeric NOT NULL CHECK (abs(value_in_book_unit) <= 1000000),
    -- Why a mark in doubt (disturbed, destroyed, not found) was held from
    -- the register anyway; NULL when it was not in doubt.
    condition_reason   text CHECK (condition_reason IS NULL OR (height_id IS NOT NULL AND btrim(condition_reason) <> '')),
    PRIMARY KEY (run_id, mark_id)
);
CREATE INDEX run_held_height ON run_held (height_id) WHERE height_id IS NOT NULL;

CREATE TRIGGER run_held_append_only BEFORE UPDATE OR DELETE ON run_held
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER run_held_no_truncate BEFORE TRUNCATE ON run_held
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();

-- +goose StatementBegin
-- cairn_roles_apply creates the roles when absent and the caller may, and
-- grants this database's privileges to them. It returns the roles that are
-- still missing (none when all went well). Idempotent.
CREATE OR REPLACE FUNCTION cairn_roles_apply() RETURNS text[] LANGUAGE plpgsql AS $$
DECLARE
    roles      constant text[] := ARRAY['cairn_reader', 'cairn_recorder', 'cairn_publisher'];
    history    constant text[] := ARRAY['height', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_event', 'adjustment_section', 'run_held'];
    everything constant text[] := history || ARRAY['mark', 'datum', 'goose_db_version'];
    recorded   constant text[] := ARRAY['mark', 'mark_condition', 'run', 'sighting', 'section', 'run_mark',
                                        'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                                        'adjustment_section', 'run_held'];
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
DROP TABLE run_held;
ALTER TABLE sighting DROP CONSTRAINT sighting_spot;
ALTER TABLE sighting DROP COLUMN spot;
-- cairn_roles_apply as schema v5 made it.
-- +goose StatementBegin
-- cairn_roles_apply creates the roles when absent and the caller may, and
-- grants this database's privileges to them. It returns the roles that are
-- still missing (none when all went well). Idempotent.
CREATE OR REPLACE FUNCTION cairn_roles_apply() RETURNS text[] LANGUAGE plpgsql AS $$
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

