-- +goose Up
-- Schema v7: the safety of runs.
--
-- 1. A run is identified by its observations, not only by its bytes:
--    observations_sha256 is the SHA-256 of the canonical form of the
--    book's parsed sightings (levelbook.Book.Observations; the rules are in
--    docs/runs.md), so that the same field work saved as another file
--    (other line ends, comments, column order, spacing) is not recorded
--    twice. observations_seq counts the earlier runs of the same
--    observations, every one of them voided (cairn records the same
--    observations again only once the run holding them is voided); the
--    pair is UNIQUE, so two recorders of the same observations at once
--    cannot both win. The runs recorded before this version keep NULL in
--    both: the run table is append-only, and filling the columns would mean
--    lifting that guarantee; cairn compares a new book with them by
--    recomputing their fingerprints in Go from their stored sightings
--    (register.Record), which is exact.
-- 2. A run can be voided: run_event keeps the decision (who, when, why),
--    append-only like every other record; a voided run is left out of new
--    adjustments and the heights published from it are stale. One void per
--    run. Voiding is a publisher's decision: only cairn_publisher inserts.

ALTER TABLE run
    ADD COLUMN observations_sha256 bytea
        CONSTRAINT run_observations_sha256_size CHECK (octet_length(observations_sha256) = 32),
    ADD COLUMN observations_seq integer CHECK (observations_seq >= 0),
    ADD CONSTRAINT run_observations_both CHECK ((observations_sha256 IS NULL) = (observations_seq IS NULL)),
    ADD CONSTRAINT run_observations_once UNIQUE (observations_sha256, observations_seq);

CREATE TABLE run_event (
    id          bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    run_id      bigint NOT NULL REFERENCES run (id),
    kind        text NOT NULL CHECK (kind IN ('voided')),
    reason      text NOT NULL CHECK (btrim(reason) <> ''),
    recorded_by text NOT NULL CHECK (btrim(recorded_by) <> ''),
    recorded_at timestamptz NOT NULL DEFAULT clock_timestamp(),
    -- A run is voided once.
    CONSTRAINT run_event_once UNIQUE (run_id, kind)
);

CREATE TRIGGER run_event_append_only BEFORE UPDATE OR DELETE ON run_event
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER run_event_no_truncate BEFORE TRUNCATE ON run_event
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();

-- +goose StatementBegin
-- cairn_roles_apply as in 00006, with run_event: SELECT for cairn_reader,
-- INSERT (and its sequence) for cairn_publisher. It creates the roles when absent and the caller may, and
-- grants this database's privileges to them. It returns the roles that are
-- still missing (none when all went well). Idempotent.
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

-- Grants when the roles exist (the function says so in a notice when they
-- do not, and `cairn db roles` grants later).
SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
-- cairn_roles_apply as 00006 made it (with run_held, without run_event).
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

DROP TABLE run_event;
ALTER TABLE run DROP COLUMN observations_seq, DROP COLUMN observations_sha256;
