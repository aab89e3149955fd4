-- +goose Up
-- Schema v12: one time per writing transaction, the time each one came in
-- force, and the login role of every row (docs/register.md, "Time and
-- identity").
--
-- 1. The write time. Every row a transaction writes carries the same
--    time: cairn_write_time(), the server's clock at the transaction's
--    first write (kept for the rest of the transaction in the
--    transaction-local setting cairn.write_time). It is the default of
--    every recorded_at and created_at and is set by the height trigger;
--    nobody but the owner can give one of their own (the roles' INSERT
--    privileges leave these columns out).
-- 2. The commit. register_commit keeps one row per writing transaction:
--    its transaction id, committed_at (the server's clock just before the
--    commit, while holding the register's commit lock, so that commits
--    are stamped in the order they become visible) and the login role.
--    A deferred constraint trigger writes it; the WHEN clause queues that
--    trigger once per transaction (cairn_commit_first), so a publication
--    of 20 000 versions costs one row, not 20 000 checks. Every row
--    written carries its transaction's id in created_xid, so "as of T"
--    means "written by a transaction that had committed by T": a
--    publication is in force whole or not at all. Rows written before this
--    version have no created_xid (NULL) and keep their recorded_at.
-- 3. Clock discipline. A commit whose clock is not after the register's
--    latest commit is refused (SQLSTATE CA012), as is a height version
--    whose write time is not after its predecessor's when the clock
--    itself is behind (CA012); when the clock is right and another
--    writer recorded the predecessor after this transaction took its
--    time, it is a conflict to try again (CA002). Nothing is stamped
--    "predecessor + 1 µs" any more. cairn also compares the server's clock
--    with its own before writing (docs/register.md).
-- 4. Identity. recorded_role holds session_user, the login role, beside
--    the free-text recorded_by / created_by. Existing rows keep NULL (not
--    recorded).
-- 5. Observed dates: a run or a condition report observed after today is
--    refused by the database already (00009, SQLSTATE CA009).
-- 6. The canonical text of a height version written from this version
--    on is layout 2: layout 1 and the login role (docs/register.md).

-- +goose StatementBegin
-- cairn_write_time is the time of the current transaction's writes: the
-- server's clock at its first call in the transaction, the same at every
-- later call. A subtransaction rolled back takes its setting with it, and
-- its rows.
CREATE FUNCTION cairn_write_time() RETURNS timestamptz LANGUAGE plpgsql VOLATILE
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    s text := current_setting('cairn.write_time', true);
    t timestamptz;
BEGIN
    IF s IS NOT NULL AND s <> '' THEN
        RETURN s::timestamp AT TIME ZONE 'UTC';
    END IF;
    t := clock_timestamp();
    PERFORM set_config('cairn.write_time', to_char(t AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US'), true);
    RETURN t;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- cairn_commit_first is true at its first call in a transaction and false
-- after: the WHEN of the commit trigger, so that it is queued once.
CREATE FUNCTION cairn_commit_first() RETURNS boolean LANGUAGE plpgsql VOLATILE
SET search_path = pg_catalog, public, pg_temp AS $$
BEGIN
    IF current_setting('cairn.commit_queued', true) = 'on' THEN
        RETURN false;
    END IF;
    PERFORM set_config('cairn.commit_queued', 'on', true);
    RETURN true;
END
$$;
-- +goose StatementEnd

CREATE TABLE register_commit (
    xid          xid8 PRIMARY KEY,
    committed_at timestamptz NOT NULL,
    login        text NOT NULL
);
CREATE INDEX register_commit_at ON register_commit (committed_at);

CREATE TRIGGER register_commit_append_only BEFORE UPDATE OR DELETE ON register_commit
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER register_commit_no_truncate BEFORE TRUNCATE ON register_commit
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();

-- +goose StatementBegin
-- register_commit_stamp runs just before the commit of a writing
-- transaction and writes its register_commit row. Commits take turns
-- from here to their end (a transaction-level advisory lock, released
-- once the commit is visible), so committed_at follows the order in
-- which commits become visible. SECURITY DEFINER: the roles have no
-- INSERT on register_commit; only this function writes it.
CREATE FUNCTION register_commit_stamp() RETURNS trigger LANGUAGE plpgsql SECURITY DEFINER
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    me     xid8 := pg_current_xact_id();
    at     timestamptz;
    latest timestamptz;
BEGIN
    IF EXISTS (SELECT 1 FROM register_commit WHERE xid = me) THEN
        RETURN NULL;
    END IF;
    -- The register's commit lock: classid 0x6361 ('ca'), objid 12.
    PERFORM pg_advisory_xact_lock(25441, 12);
    at := clock_timestamp();
    SELECT max(committed_at) INTO latest FROM register_commit;
    IF latest IS NOT NULL AND at <= latest THEN
        RAISE EXCEPTION 'the database server''s clock reads %, not after the register''s latest commit at %: the server''s clock is behind; nothing was written (set the server''s clock right, then try again)',
            to_char(at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"'), to_char(latest AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"')
            USING ERRCODE = 'CA012';
    END IF;
    INSERT INTO register_commit (xid, committed_at, login) VALUES (me, at, session_user);
    RETURN NULL;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- The columns of identity and time on every table of the register. The
-- columns are added without a default first, so that existing rows keep
-- NULL (a default on ADD COLUMN would stamp them all with this
-- migration's transaction and role).
DO $$
DECLARE
    t text;
BEGIN
    FOREACH t IN ARRAY ARRAY['datum', 'mark', 'mark_condition', 'height', 'run', 'sighting', 'section', 'run_mark',
                             'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                             'adjustment_event', 'adjustment_section', 'run_held', 'run_event'] LOOP
        EXECUTE format('ALTER TABLE %I ADD COLUMN IF NOT EXISTS created_xid xid8', t);
        EXECUTE format('ALTER TABLE %I ALTER COLUMN created_xid SET DEFAULT pg_current_xact_id()', t);
        EXECUTE format('ALTER TABLE %I ADD COLUMN IF NOT EXISTS recorded_role text', t);
        EXECUTE format('ALTER TABLE %I ALTER COLUMN recorded_role SET DEFAULT session_user', t);
    END LOOP;
    -- The write time, one per transaction.
    FOREACH t IN ARRAY ARRAY['datum', 'mark', 'adjustment'] LOOP
        EXECUTE format('ALTER TABLE %I ALTER COLUMN created_at SET DEFAULT cairn_write_time()', t);
    END LOOP;
    FOREACH t IN ARRAY ARRAY['mark_condition', 'run', 'adjustment_event', 'run_event'] LOOP
        EXECUTE format('ALTER TABLE %I ALTER COLUMN recorded_at SET DEFAULT cairn_write_time()', t);
    END LOOP;
    -- The commit trigger, on every table that heads a write (the others,
    -- a run's sightings or an adjustment's results, are written only with
    -- their head, in its transaction).
    FOREACH t IN ARRAY ARRAY['datum', 'mark', 'mark_condition', 'height', 'run', 'run_event',
                             'adjustment', 'adjustment_event'] LOOP
        EXECUTE format('CREATE CONSTRAINT TRIGGER %I AFTER INSERT ON %I DEFERRABLE INITIALLY DEFERRED
                        FOR EACH ROW WHEN (cairn_commit_first()) EXECUTE FUNCTION register_commit_stamp()', t || '_commit', t);
    END LOOP;
END
$$;
-- +goose StatementEnd

CREATE INDEX height_created_xid ON height (created_xid) WHERE created_xid IS NOT NULL;

-- +goose StatementBegin
-- Layout 2 of a version's canonical text: layout 1 with 2 in its first
-- line, and the login role last.
CREATE FUNCTION height_canonical_v2(prev_hash bytea, designation text, datum_code text, h height)
RETURNS text LANGUAGE sql IMMUTABLE
SET search_path = pg_catalog, public, pg_temp AS $$
    SELECT string_agg(format('%s:%s:%s', f.name, octet_length(f.val), f.val), E'\n' ORDER BY f.ord) || E'\n'
    FROM (VALUES
        (1,  'cairn-height', '2'),
        (2,  'prev',          coalesce(encode(prev_hash, 'hex'), '')),
        (3,  'mark',          designation),
        (4,  'datum',         datum_code),
        (5,  'version',       h.version::text),
        (6,  'value',         coalesce(h.value::text, '')),
        (7,  'unit',          coalesce(h.unit, '')),
        (8,  'decimals',      coalesce(h.decimals::text, '')),
        (9,  'class',         h.class),
        (10, 'source_kind',   h.source_kind),
        (11, 'source',        h.source),
        (12, 'adjustment_id', coalesce(h.adjustment_id::text, '')),
        (13, 'reason',        h.reason),
        (14, 'recorded_by',   h.recorded_by),
        (15, 'recorded_at',   to_char(h.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"')),
        (16, 'recorded_role', h.recorded_role)
    ) AS f (ord, name, val)
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- height_before_insert as in 00001, with the transaction's write time,
-- id and login role, and no "predecessor + 1 µs": a write time not after
-- the predecessor's is refused.
CREATE OR REPLACE FUNCTION height_before_insert() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    prev   height;
    latest bigint;
    des    text;
    code   text;
    clock  timestamptz;
BEGIN
    SELECT designation INTO des FROM mark WHERE id = NEW.mark_id;
    SELECT d.code INTO code FROM datum d WHERE d.id = NEW.datum_id;
    SELECT h.id INTO latest FROM height h
     WHERE h.mark_id = NEW.mark_id AND h.datum_id = NEW.datum_id
     ORDER BY h.version DESC LIMIT 1;
    IF NEW.supersedes IS DISTINCT FROM latest THEN
        RAISE EXCEPTION 'height of % on % changed meanwhile: the new version must supersede the latest (%), not %',
            des, code, coalesce(latest::text, 'none'), coalesce(NEW.supersedes::text, 'none')
            USING ERRCODE = 'CA002';
    END IF;
    NEW.recorded_at := cairn_write_time();
    NEW.created_xid := pg_current_xact_id();
    NEW.recorded_role := session_user;
    IF latest IS NULL THEN
        NEW.version := 1;
    ELSE
        SELECT * INTO prev FROM height WHERE id = latest;
        NEW.version := prev.version + 1;
        IF NEW.recorded_at <= prev.recorded_at THEN
            clock := clock_timestamp();
            IF clock > prev.recorded_at THEN
                RAISE EXCEPTION 'height of % on % changed meanwhile: version % was recorded at %, after this transaction took its time (%)',
                    des, code, prev.version, to_char(prev.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"'),
                    to_char(NEW.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"')
                    USING ERRCODE = 'CA002';
            END IF;
            RAISE EXCEPTION 'the database server''s clock reads %, not after % when version % of % on % was recorded: the server''s clock is behind; nothing was written (set the server''s clock right, then try again)',
                to_char(clock AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"'), to_char(prev.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"'),
                prev.version, des, code
                USING ERRCODE = 'CA012';
        END IF;
    END IF;
    NEW.hash := sha256(convert_to(height_canonical_v2(prev.hash, des, code, NEW), 'UTF8'));
    RETURN NEW;
END
$$;
-- +goose StatementEnd


-- +goose StatementBegin
-- cairn_roles_apply as in 00007, with register_commit (SELECT for
-- cairn_reader; written only by register_commit_stamp) and INSERT granted
-- column by column: no role may give a row's created_xid, recorded_role,
-- recorded_at or created_at, which the database sets. Idempotent.
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

SELECT cairn_roles_apply();

-- +goose Down
-- The record written under v12 keeps its columns' values only while
-- v12 stands; going down drops them with the columns.
-- +goose StatementBegin
DO $$
DECLARE
    t text;
BEGIN
    FOREACH t IN ARRAY ARRAY['datum', 'mark', 'mark_condition', 'height', 'run', 'run_event',
                             'adjustment', 'adjustment_event'] LOOP
        EXECUTE format('DROP TRIGGER %I ON %I', t || '_commit', t);
    END LOOP;
    FOREACH t IN ARRAY ARRAY['datum', 'mark', 'adjustment'] LOOP
        EXECUTE format('ALTER TABLE %I ALTER COLUMN created_at SET DEFAULT clock_timestamp()', t);
    END LOOP;
    FOREACH t IN ARRAY ARRAY['mark_condition', 'run', 'adjustment_event', 'run_event'] LOOP
        EXECUTE format('ALTER TABLE %I ALTER COLUMN recorded_at SET DEFAULT clock_timestamp()', t);
    END LOOP;
    FOREACH t IN ARRAY ARRAY['datum', 'mark', 'mark_condition', 'height', 'run', 'sighting', 'section', 'run_mark',
                             'adjustment', 'adjustment_run', 'adjustment_held', 'adjustment_result',
                             'adjustment_event', 'adjustment_section', 'run_held', 'run_event'] LOOP
        EXECUTE format('ALTER TABLE %I DROP COLUMN IF EXISTS recorded_role', t);
    END LOOP;
    -- created_xid of run and adjustment belongs to 00011 as well; the
    -- others go.
    FOREACH t IN ARRAY ARRAY['datum', 'mark', 'mark_condition', 'height', 'sighting', 'section', 'run_mark',
                             'adjustment_run', 'adjustment_held', 'adjustment_result',
                             'adjustment_section', 'run_held', 'run_event'] LOOP
        EXECUTE format('ALTER TABLE %I DROP COLUMN IF EXISTS created_xid', t);
    END LOOP;
END
$$;
-- +goose StatementEnd
DROP TABLE register_commit;
DROP FUNCTION register_commit_stamp();
DROP FUNCTION cairn_commit_first();
-- +goose StatementBegin
-- height_before_insert as 00001 made it, with 00011's fixed search path.
CREATE OR REPLACE FUNCTION height_before_insert() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    prev   height;
    latest bigint;
    des    text;
    code   text;
BEGIN
    SELECT designation INTO des FROM mark WHERE id = NEW.mark_id;
    SELECT d.code INTO code FROM datum d WHERE d.id = NEW.datum_id;
    SELECT h.id INTO latest FROM height h
     WHERE h.mark_id = NEW.mark_id AND h.datum_id = NEW.datum_id
     ORDER BY h.version DESC LIMIT 1;
    IF NEW.supersedes IS DISTINCT FROM latest THEN
        RAISE EXCEPTION 'height of % on % changed meanwhile: the new version must supersede the latest (%), not %',
            des, code, coalesce(latest::text, 'none'), coalesce(NEW.supersedes::text, 'none')
            USING ERRCODE = 'CA002';
    END IF;
    IF latest IS NULL THEN
        NEW.version := 1;
        NEW.recorded_at := clock_timestamp();
    ELSE
        SELECT * INTO prev FROM height WHERE id = latest;
        NEW.version := prev.version + 1;
        NEW.recorded_at := greatest(clock_timestamp(), prev.recorded_at + interval '1 microsecond');
    END IF;
    NEW.hash := sha256(convert_to(height_canonical(prev.hash, des, code, NEW), 'UTF8'));
    RETURN NEW;
END
$$;
-- +goose StatementEnd
DROP FUNCTION height_canonical_v2(bytea, text, text, height);
DROP FUNCTION cairn_write_time();
-- +goose StatementBegin
-- cairn_roles_apply as 00007 made it, with run_event: SELECT for cairn_reader,
-- INSERT (and its sequence) for cairn_publisher. It creates the roles when absent and the caller may, and
-- grants this database's privileges to them. It returns the roles that are
-- still missing (none when all went well). Idempotent.
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
