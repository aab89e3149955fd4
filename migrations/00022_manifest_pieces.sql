-- +goose Up
-- Schema v22: a commit's manifest hashed in pieces, so that one commit can
-- write millions of rows of a table.
-- Until v21 a table's line of the manifest was "table rows sha256", the
-- digest of one text made of all the rows the commit wrote (each row's
-- canonical text and a newline, in key order). PostgreSQL holds no value
-- over 1 GB, so a commit of some five million heights (an office's whole
-- register imported at once) was refused at COMMIT, out of memory.
-- From v22, a table whose rows in the commit are more than a piece
-- (100 000 rows; the setting cairn.manifest_piece_rows may make it
-- smaller or larger for a session) has the line
--     table rows pieces-of K sha256
-- where the rows in key order are cut into pieces of K rows (the last one
-- shorter), each piece is hashed as a whole table was before, and the
-- digest is the SHA-256 of the pieces' 32-byte digests in order. A table
-- of at most one piece keeps the line of v21, the same digest as before:
-- no commit made before v22 changes, and the audit (internal/register,
-- EvidenceVerify) reads which form a line has from the line itself.

-- +goose StatementBegin
CREATE OR REPLACE FUNCTION cairn_commit_manifest(x xid8) RETURNS text LANGUAGE plpgsql STABLE
SET search_path = pg_catalog, public, pg_temp
SET TimeZone = 'UTC' SET extra_float_digits = 1 SET bytea_output = 'hex' AS $$
DECLARE
    t      record;
    n      bigint;
    pieces bigint;
    d      bytea;
    m      text := '';
    cond   text := CASE WHEN x IS NULL THEN 'created_xid IS NULL' ELSE format('created_xid = %L::xid8', x) END;
    late   text;
    k      bigint := coalesce(nullif(current_setting('cairn.manifest_piece_rows', true), '')::bigint, 100000);
BEGIN
    IF k < 1 THEN
        RAISE EXCEPTION 'cairn.manifest_piece_rows is %, not a whole number of rows of at least 1', k;
    END IF;
    FOR t IN SELECT * FROM cairn_evidence_tables() ORDER BY ord LOOP
        late := CASE t.tbl
            WHEN 'height' THEN ' - CASE WHEN r.in_force_from IS NULL THEN ''in_force_from'' ELSE '''' END'
            WHEN 'run' THEN ' - CASE WHEN r.standards_profile IS NULL'
                || ' THEN ''{standards_profile,standards_version,standards_source,standards_file}''::text[]'
                || ' WHEN r.standards_file IS NULL THEN ''{standards_file}''::text[] ELSE ''{}''::text[] END'
            ELSE '' END;
        EXECUTE format(
            'SELECT coalesce(sum(p.n), 0)::bigint, count(*), string_agg(p.d, ''''::bytea ORDER BY p.c)'
            ' FROM (SELECT s.c, count(*) AS n, sha256(convert_to(string_agg(s.txt || E''\n'', '''' ORDER BY s.rn), ''UTF8'')) AS d'
            '       FROM (SELECT row_number() OVER (ORDER BY %s) AS rn, (row_number() OVER (ORDER BY %s) - 1) / %s AS c,'
            '                    (to_jsonb(r) - ''created_xid''%s)::text AS txt'
            '             FROM public.%I r WHERE %s) s'
            '       GROUP BY s.c) p',
            t.key, t.key, k, late, t.tbl, cond) INTO n, pieces, d;
        IF n > 0 AND pieces = 1 THEN
            m := m || format('%s %s %s', t.tbl, n, encode(d, 'hex')) || E'\n';
        ELSIF n > 0 THEN
            m := m || format('%s %s pieces-of %s %s', t.tbl, n, k, encode(sha256(d), 'hex')) || E'\n';
        END IF;
    END LOOP;
    RETURN m;
END
$$;
-- +goose StatementEnd

SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
-- cairn_commit_manifest as 00017 made it.
CREATE OR REPLACE FUNCTION cairn_commit_manifest(x xid8) RETURNS text LANGUAGE plpgsql STABLE
SET search_path = pg_catalog, public, pg_temp
SET TimeZone = 'UTC' SET extra_float_digits = 1 SET bytea_output = 'hex' AS $$
DECLARE
    t     record;
    n     bigint;
    d     bytea;
    m     text := '';
    cond  text := CASE WHEN x IS NULL THEN 'created_xid IS NULL' ELSE format('created_xid = %L::xid8', x) END;
    late  text;
BEGIN
    FOR t IN SELECT * FROM cairn_evidence_tables() ORDER BY ord LOOP
        late := CASE t.tbl
            WHEN 'height' THEN ' - CASE WHEN r.in_force_from IS NULL THEN ''in_force_from'' ELSE '''' END'
            WHEN 'run' THEN ' - CASE WHEN r.standards_profile IS NULL'
                || ' THEN ''{standards_profile,standards_version,standards_source,standards_file}''::text[]'
                || ' WHEN r.standards_file IS NULL THEN ''{standards_file}''::text[] ELSE ''{}''::text[] END'
            ELSE '' END;
        EXECUTE format('SELECT count(*), sha256(convert_to(coalesce(string_agg((to_jsonb(r) - ''created_xid''%s)::text || E''\n'', '''' ORDER BY %s), ''''), ''UTF8''))'
                       ' FROM public.%I r WHERE %s', late, t.key, t.tbl, cond) INTO n, d;
        IF n > 0 THEN
            m := m || format('%s %s %s', t.tbl, n, encode(d, 'hex')) || E'\n';
        END IF;
    END LOOP;
    RETURN m;
END
$$;
-- +goose StatementEnd
