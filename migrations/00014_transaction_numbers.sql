-- +goose Up
-- Schema v14: the register's own transaction numbers, and one function
-- that grants (docs/reliability.md, "Transaction numbers").
--
-- 1. A row's created_xid ties it to the commit that wrote it
--    (register_commit.xid). Until v13 it was the server's transaction id,
--    pg_current_xact_id(). A backup restored into another cluster (a new
--    embedded default, a new server) meets a counter that starts again
--    low: a new transaction could take the id of a recorded commit, its
--    rows would join that commit, and the commit chain would break. From
--    v14 the number is cairn_xact(): the server's id plus the register's
--    base in this cluster (register_cluster), which is raised, when the
--    register first meets a cluster, past every number it has recorded.
--    cairn_cluster_carry() does that; migrations, cairn db migrate and
--    cairn restore call it. A writing transaction in a cluster the register
--    has not met is refused at its commit (SQLSTATE CA013), never stamped
--    with a number that may be taken.
-- 2. The functions that read the transaction's id (seal_stamp, the seals
--    of 00011, height_before_insert of 00012) take cairn_xact() in its
--    place: each is rewritten from its own definition (pg_get_functiondef),
--    so its body stays as its migration wrote it.
-- 3. cairn_roles_apply as in 00012, and every function of the register's
--    schema revoked from PUBLIC, read from the catalog, with EXECUTE given
--    back only where a role calls one: the revokes that 00009 and 00013
--    made outside it (lost by a restore with --no-privileges) are its own.

CREATE TABLE register_cluster (
    id                bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    system_identifier bigint NOT NULL,
    xact_base         bigint NOT NULL CHECK (xact_base >= 0),
    since             timestamptz NOT NULL DEFAULT clock_timestamp()
);

-- +goose StatementBegin
-- cairn_xact is the register's number of the current transaction (assigning
-- the server's id if it has none): the server's id plus the base of the
-- cluster the register last met.
CREATE FUNCTION cairn_xact() RETURNS xid8 LANGUAGE sql STABLE
SET search_path = pg_catalog, public, pg_temp AS $$
    SELECT ((pg_current_xact_id()::text)::bigint +
            coalesce((SELECT c.xact_base FROM public.register_cluster c ORDER BY c.id DESC LIMIT 1), 0))::text::xid8
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- cairn_cluster_carry makes the register at home in this cluster: when the
-- cluster it last met is another (or none), it writes this cluster's base,
-- the least that puts every new number past every number recorded, and
-- returns true. Idempotent; the owner's.
CREATE FUNCTION cairn_cluster_carry() RETURNS boolean LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    here    bigint := (SELECT system_identifier FROM pg_control_system());
    last    bigint;
    highest bigint := 0;
    t       text;
    x       bigint;
BEGIN
    PERFORM pg_advisory_xact_lock(25441, 14);
    SELECT c.system_identifier INTO last FROM public.register_cluster c ORDER BY c.id DESC LIMIT 1;
    IF last = here THEN
        RETURN false;
    END IF;
    SELECT coalesce(max(xid)::text::bigint, 0) INTO highest FROM public.register_commit;
    FOR t IN SELECT tbl FROM cairn_evidence_tables() LOOP
        EXECUTE format('SELECT max(created_xid)::text::bigint FROM public.%I', t) INTO x;
        highest := greatest(highest, coalesce(x, 0));
    END LOOP;
    INSERT INTO public.register_cluster (system_identifier, xact_base)
    VALUES (here, greatest(0, highest + 1 - (pg_current_xact_id()::text)::bigint));
    RETURN true;
END
$$;
-- +goose StatementEnd

SELECT cairn_cluster_carry();

-- +goose StatementBegin
DO $$
DECLARE
    f text;
    t text;
    d text;
BEGIN
    FOREACH f IN ARRAY ARRAY['seal_stamp()', 'run_child_sealed()', 'adjustment_child_sealed()',
                             'height_from_adjustment()', 'height_before_insert()'] LOOP
        d := pg_get_functiondef(f::regprocedure);
        IF position('pg_current_xact_id()' IN d) = 0 THEN
            RAISE EXCEPTION 'function % does not read pg_current_xact_id(): migration 00014 expected it to', f;
        END IF;
        EXECUTE replace(d, 'pg_current_xact_id()', 'cairn_xact()');
    END LOOP;
    FOR t IN SELECT tbl FROM cairn_evidence_tables() LOOP
        EXECUTE format('ALTER TABLE %I ALTER COLUMN created_xid SET DEFAULT cairn_xact()', t);
    END LOOP;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- register_commit_stamp as in 00013, with the register's numbers, and
-- refused in a cluster the register has not met.
CREATE OR REPLACE FUNCTION register_commit_stamp() RETURNS trigger LANGUAGE plpgsql SECURITY DEFINER
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    me     xid8 := cairn_xact();
    at     timestamptz;
    latest timestamptz;
    man    text;
    dig    bytea;
    prev   record;
BEGIN
    IF (SELECT c.system_identifier FROM register_cluster c ORDER BY c.id DESC LIMIT 1)
       IS DISTINCT FROM (SELECT system_identifier FROM pg_control_system()) THEN
        RAISE EXCEPTION 'this register was copied into this database cluster without carrying its transaction numbers: nothing was written'
            USING ERRCODE = 'CA013',
                  HINT = 'run cairn db migrate as the register''s owner (cairn restore does it itself), then try again';
    END IF;
    IF EXISTS (SELECT 1 FROM register_commit WHERE xid = me) THEN
        RETURN NULL;
    END IF;
    -- The rows are all written: list them before taking the lock.
    man := cairn_commit_manifest(me);
    dig := sha256(convert_to(man, 'UTF8'));
    -- The register's commit lock: classid 0x6361 ('ca'), objid 12.
    PERFORM pg_advisory_xact_lock(25441, 12);
    at := clock_timestamp();
    SELECT max(committed_at) INTO latest FROM register_commit;
    IF latest IS NOT NULL AND at <= latest THEN
        RAISE EXCEPTION 'the database server''s clock reads %, not after the register''s latest commit at %: the server''s clock is behind; nothing was written (set the server''s clock right, then try again)',
            to_char(at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"'), to_char(latest AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"')
            USING ERRCODE = 'CA012';
    END IF;
    SELECT c.seq, c.hash INTO prev FROM register_commit c WHERE c.seq IS NOT NULL ORDER BY c.seq DESC LIMIT 1;
    -- A REPEATABLE READ transaction sees the commits made before its
    -- snapshot only: when a later one holds the next seq, the unique index
    -- says so, and the transaction is a conflict to try again.
    BEGIN
        INSERT INTO register_commit (xid, committed_at, login, seq, manifest, digest, hash)
        VALUES (me, at, session_user, coalesce(prev.seq, 0) + 1, man, dig,
                sha256(convert_to(cairn_commit_text(prev.hash, coalesce(prev.seq, 0) + 1, me, at, session_user, dig), 'UTF8')));
    EXCEPTION WHEN unique_violation THEN
        RAISE EXCEPTION 'another commit was stamped after this transaction''s snapshot: nothing was written; try again'
            USING ERRCODE = '40001';
    END;
    RETURN NULL;
END
$$;
-- +goose StatementEnd

CREATE TRIGGER register_cluster_append_only BEFORE UPDATE OR DELETE ON register_cluster
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER register_cluster_no_truncate BEFORE TRUNCATE ON register_cluster
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();

-- +goose StatementBegin
-- cairn_roles_apply as in 00012, with register_cluster (SELECT for
-- cairn_reader, written by the owner alone), the tables of the history
-- read from cairn_evidence_tables, and every function of the register's
-- schema revoked from PUBLIC, EXECUTE given back only to the roles that
-- call one. Idempotent.
CREATE OR REPLACE FUNCTION cairn_roles_apply() RETURNS text[] LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    roles      constant text[] := ARRAY['cairn_reader', 'cairn_recorder', 'cairn_publisher'];
    -- Append-only: every table of the evidence but datum and mark (whose
    -- ids the publisher locks), and the register's own ledgers.
    history    constant text[] := ARRAY(SELECT tbl FROM cairn_evidence_tables() WHERE tbl NOT IN ('datum', 'mark') ORDER BY ord)
                                  || ARRAY['register_commit', 'register_cluster'];
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
    fn         regprocedure;
BEGIN
    -- No TEMP, no CREATE on the database or in schema public (00011).
    PERFORM cairn_database_apply();
    -- No function of the register for PUBLIC, whether the roles exist or not.
    FOR fn IN SELECT p.oid::regprocedure FROM pg_proc p WHERE p.pronamespace = schema::regnamespace LOOP
        EXECUTE format('REVOKE ALL ON FUNCTION %s FROM PUBLIC', fn);
    END LOOP;
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

    -- Functions: a trigger runs its function whoever fires it, so trigger
    -- functions need no grant; the functions a default or a trigger's
    -- WHEN calls run with the writer's privileges; the canonical texts of
    -- a version are for anyone with a role.
    FOR fn IN SELECT p.oid::regprocedure FROM pg_proc p WHERE p.pronamespace = schema::regnamespace LOOP
        EXECUTE format('REVOKE ALL ON FUNCTION %s FROM cairn_reader, cairn_recorder, cairn_publisher', fn);
    END LOOP;
    GRANT EXECUTE ON FUNCTION height_canonical(bytea, text, text, height), height_canonical_v2(bytea, text, text, height) TO cairn_reader;
    GRANT EXECUTE ON FUNCTION cairn_write_time(), cairn_commit_first(), cairn_xact() TO cairn_recorder;
    RETURN missing;
END
$$;
-- +goose StatementEnd

SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
-- The functions read the server's id again; cairn_roles_apply keeps v14's
-- body without register_cluster and cairn_xact.
DO $$
DECLARE
    f text;
    t text;
BEGIN
    EXECUTE replace(replace(pg_get_functiondef('cairn_roles_apply()'::regprocedure),
        $r$|| ARRAY['register_commit', 'register_cluster']$r$, $r$|| ARRAY['register_commit']$r$),
        ', cairn_xact() TO cairn_recorder', ' TO cairn_recorder');
    FOREACH f IN ARRAY ARRAY['seal_stamp()', 'run_child_sealed()', 'adjustment_child_sealed()',
                             'height_from_adjustment()', 'height_before_insert()'] LOOP
        EXECUTE replace(pg_get_functiondef(f::regprocedure), 'cairn_xact()', 'pg_current_xact_id()');
    END LOOP;
    FOR t IN SELECT tbl FROM cairn_evidence_tables() LOOP
        EXECUTE format('ALTER TABLE %I ALTER COLUMN created_xid SET DEFAULT pg_current_xact_id()', t);
    END LOOP;
    EXECUTE replace(replace(pg_get_functiondef('register_commit_stamp()'::regprocedure), 'cairn_xact()', 'pg_current_xact_id()'),
        $r$    IF (SELECT c.system_identifier FROM register_cluster c ORDER BY c.id DESC LIMIT 1)
       IS DISTINCT FROM (SELECT system_identifier FROM pg_control_system()) THEN
        RAISE EXCEPTION 'this register was copied into this database cluster without carrying its transaction numbers: nothing was written'
            USING ERRCODE = 'CA013',
                  HINT = 'run cairn db migrate as the register''s owner (cairn restore does it itself), then try again';
    END IF;
$r$, '');
END
$$;
-- +goose StatementEnd
DROP FUNCTION cairn_cluster_carry();
DROP FUNCTION cairn_xact();
DROP TABLE register_cluster;
