-- +goose Up
-- Schema v13: every table in the evidence (docs/reliability.md, "The
-- evidence").
--
-- 1. The commit chain. register_commit gains seq (0, 1, 2 ... in the order
--    commits are stamped), manifest, digest and hash. At the commit of a
--    writing transaction, register_commit_stamp lists the rows that
--    transaction wrote (created_xid = its id), table by table in a fixed
--    order, each table's rows in key order, and writes one manifest line
--    per table with rows: "<table> <rows> <sha256 of the rows' canonical
--    text>". digest is the sha256 of the manifest; hash is the sha256 of
--    the commit's canonical text, which includes the previous commit's
--    hash. A row's canonical text is to_jsonb(row) without created_xid,
--    with TimeZone UTC, extra_float_digits 1 and bytea_output hex, and a
--    newline. The manifest is listed before the commit lock is taken, so
--    commits take turns only for the instant of stamping.
-- 2. Genesis. Rows written before v12 (created_xid NULL), if any, form the
--    entry of seq 0 (xid 0, which no transaction has), written here; the
--    first commit after it is seq 1 (a fresh register has no genesis and
--    begins at 1, its first commit having no predecessor); the commits
--    stamped under v12 get their seq, manifest, digest and hash here too,
--    in the order of committed_at.
-- 3. An index on created_xid of every table, so that a transaction's rows
--    are found without reading the table.

ALTER TABLE register_commit
    ADD COLUMN seq bigint,
    ADD COLUMN manifest text,
    ADD COLUMN digest bytea,
    ADD COLUMN hash bytea;

-- +goose StatementBegin
-- cairn_evidence_tables lists the tables of the evidence in their fixed
-- order, each with the columns of its key (the order of its rows).
CREATE FUNCTION cairn_evidence_tables() RETURNS TABLE (ord int, tbl text, key text) LANGUAGE sql IMMUTABLE
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

-- +goose StatementBegin
-- cairn_commit_manifest is the manifest of the rows written by
-- transaction x (NULL: the rows of no transaction, before v12).
CREATE FUNCTION cairn_commit_manifest(x xid8) RETURNS text LANGUAGE plpgsql STABLE
SET search_path = pg_catalog, public, pg_temp
SET TimeZone = 'UTC' SET extra_float_digits = 1 SET bytea_output = 'hex' AS $$
DECLARE
    t     record;
    n     bigint;
    d     bytea;
    m     text := '';
    cond  text := CASE WHEN x IS NULL THEN 'created_xid IS NULL' ELSE format('created_xid = %L::xid8', x) END;
BEGIN
    FOR t IN SELECT * FROM cairn_evidence_tables() ORDER BY ord LOOP
        EXECUTE format('SELECT count(*), sha256(convert_to(coalesce(string_agg((to_jsonb(r) - ''created_xid'')::text || E''\n'', '''' ORDER BY %s), ''''), ''UTF8''))'
                       ' FROM public.%I r WHERE %s', t.key, t.tbl, cond) INTO n, d;
        IF n > 0 THEN
            m := m || format('%s %s %s', t.tbl, n, encode(d, 'hex')) || E'\n';
        END IF;
    END LOOP;
    RETURN m;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- cairn_commit_text is the canonical text whose sha256 is a commit's hash.
CREATE FUNCTION cairn_commit_text(prev bytea, seq bigint, x xid8, at timestamptz, login text, digest bytea) RETURNS text
LANGUAGE sql IMMUTABLE
SET search_path = pg_catalog, public, pg_temp AS $$
    SELECT 'cairn-commit:1' || E'\n' ||
           'prev:' || coalesce(encode(prev, 'hex'), '') || E'\n' ||
           'seq:' || seq::text || E'\n' ||
           'xid:' || x::text || E'\n' ||
           'committed_at:' || to_char(at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"') || E'\n' ||
           'login:' || octet_length(login)::text || ':' || login || E'\n' ||
           'digest:' || encode(digest, 'hex') || E'\n'
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- register_commit_stamp as in 00012, and the transaction's manifest,
-- digest, place in the chain (seq) and hash.
CREATE OR REPLACE FUNCTION register_commit_stamp() RETURNS trigger LANGUAGE plpgsql SECURITY DEFINER
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    me     xid8 := pg_current_xact_id();
    at     timestamptz;
    latest timestamptz;
    man    text;
    dig    bytea;
    prev   record;
BEGIN
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

-- +goose StatementBegin
-- Genesis, and the commits stamped under v12.
DO $$
DECLARE
    c     record;
    first timestamptz;
    s     bigint := 0;
    h     bytea;
    man   text;
    dig   bytea;
BEGIN
    ALTER TABLE register_commit DISABLE TRIGGER register_commit_append_only;
    SELECT min(committed_at) INTO first FROM register_commit;
    first := coalesce(first - interval '1 microsecond', clock_timestamp());
    man := cairn_commit_manifest(NULL);
    IF man <> '' THEN
        dig := sha256(convert_to(man, 'UTF8'));
        h := sha256(convert_to(cairn_commit_text(NULL, 0, '0'::xid8, first, session_user, dig), 'UTF8'));
        INSERT INTO register_commit (xid, committed_at, login, seq, manifest, digest, hash)
        VALUES ('0'::xid8, first, session_user, 0, man, dig, h);
    END IF;
    FOR c IN SELECT * FROM register_commit WHERE seq IS NULL ORDER BY committed_at, xid LOOP
        s := s + 1;
        man := cairn_commit_manifest(c.xid);
        dig := sha256(convert_to(man, 'UTF8'));
        h := sha256(convert_to(cairn_commit_text(h, s, c.xid, c.committed_at, c.login, dig), 'UTF8'));
        UPDATE register_commit SET seq = s, manifest = man, digest = dig, hash = h WHERE xid = c.xid;
    END LOOP;
    ALTER TABLE register_commit ENABLE TRIGGER register_commit_append_only;
END
$$;
-- +goose StatementEnd

ALTER TABLE register_commit
    ALTER COLUMN seq SET NOT NULL,
    ALTER COLUMN manifest SET NOT NULL,
    ALTER COLUMN digest SET NOT NULL,
    ALTER COLUMN hash SET NOT NULL,
    ADD CONSTRAINT register_commit_seq UNIQUE (seq);

-- +goose StatementBegin
DO $$
DECLARE
    t text;
BEGIN
    FOR t IN SELECT tbl FROM cairn_evidence_tables() LOOP
        IF t <> 'height' THEN
            EXECUTE format('CREATE INDEX %I ON %I (created_xid)', t || '_created_xid', t);
        END IF;
    END LOOP;
END
$$;
-- +goose StatementEnd
-- height's (00012) was partial, WHERE created_xid IS NOT NULL: genesis
-- needs the NULLs too.
DROP INDEX height_created_xid;
CREATE INDEX height_created_xid ON height (created_xid);

REVOKE ALL ON FUNCTION cairn_evidence_tables(), cairn_commit_manifest(xid8),
    cairn_commit_text(bytea, bigint, xid8, timestamptz, text, bytea) FROM PUBLIC;

-- +goose Down
-- +goose StatementBegin
DO $$
DECLARE
    t text;
BEGIN
    FOR t IN SELECT tbl FROM cairn_evidence_tables() LOOP
        EXECUTE format('DROP INDEX IF EXISTS %I', t || '_created_xid');
    END LOOP;
END
$$;
-- +goose StatementEnd
CREATE INDEX height_created_xid ON height (created_xid) WHERE created_xid IS NOT NULL;
ALTER TABLE register_commit DISABLE TRIGGER register_commit_append_only;
DELETE FROM register_commit WHERE seq = 0 AND xid = '0'::xid8;
ALTER TABLE register_commit ENABLE TRIGGER register_commit_append_only;
ALTER TABLE register_commit
    DROP COLUMN seq,
    DROP COLUMN manifest,
    DROP COLUMN digest,
    DROP COLUMN hash;
-- +goose StatementBegin
-- register_commit_stamp as 00012 made it.
CREATE OR REPLACE FUNCTION register_commit_stamp() RETURNS trigger LANGUAGE plpgsql SECURITY DEFINER
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
DROP FUNCTION cairn_commit_text(bytea, bigint, xid8, timestamptz, text, bytea);
DROP FUNCTION cairn_commit_manifest(xid8);
DROP FUNCTION cairn_evidence_tables();
