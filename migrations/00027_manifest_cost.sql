-- +goose Up
-- Schema v27: a commit's manifest at less cost, the same text (issue 15:
-- the manifest of a publication of 50,000 versions took about a second
-- of its commit, and that of a draft of 100,000 rows about as much).
--
-- The manifest is the one 00022 defined, byte for byte: for each table
-- of the evidence, the rows the commit wrote in key order, each row's
-- text (its columns as a JSON object but created_xid, and the late
-- columns left out where NULL) and a newline, hashed whole, or in pieces
-- of cairn.manifest_piece_rows rows. What changes is how it is computed:
--
-- - The rows are counted first (the created_xid index alone), and a
--   table of at most one piece, every commit's but an import's, is
--   hashed from one ordered aggregate: no window over the rows, no sort
--   by piece before the piece's own sort (three sorts of every row's
--   text, each spilling to disk at 50,000 rows, became one).
-- - A row's object is built by jsonb_build_object from its columns,
--   named from the catalog, instead of to_jsonb of the whole row less
--   created_xid: the same jsonb (each value converted by the same rule,
--   keys in jsonb's own order), so the same text, without building the
--   object twice. A table of more than 50 columns (jsonb_build_object
--   takes at most 100 arguments) keeps to_jsonb.
-- - The function's sorts may use 64 MB (work_mem) before spilling.
-- +goose StatementBegin
CREATE OR REPLACE FUNCTION cairn_commit_manifest(x xid8) RETURNS text LANGUAGE plpgsql STABLE
SET search_path = pg_catalog, public, pg_temp
SET TimeZone = 'UTC' SET extra_float_digits = 1 SET bytea_output = 'hex' SET work_mem = '64MB' AS $$
DECLARE
    t      record;
    n      bigint;
    pieces bigint;
    d      bytea;
    m      text := '';
    cond   text := CASE WHEN x IS NULL THEN 'created_xid IS NULL' ELSE format('created_xid = %L::xid8', x) END;
    late   text;
    obj    text;
    k      bigint := coalesce(nullif(current_setting('cairn.manifest_piece_rows', true), '')::bigint, 100000);
BEGIN
    IF k < 1 THEN
        RAISE EXCEPTION 'cairn.manifest_piece_rows is %, not a whole number of rows of at least 1', k;
    END IF;
    FOR t IN SELECT e.tbl, e.key, c.cols, c.ncols
               FROM cairn_evidence_tables() e
               LEFT JOIN LATERAL (SELECT string_agg(format('%L, r.%I', a.attname, a.attname), ', ' ORDER BY a.attnum) AS cols,
                                         count(*) AS ncols
                                    FROM pg_attribute a
                                   WHERE a.attrelid = format('public.%I', e.tbl)::regclass
                                     AND a.attnum > 0 AND NOT a.attisdropped AND a.attname <> 'created_xid') c ON true
              ORDER BY e.ord LOOP
        EXECUTE format('SELECT count(*) FROM public.%I r WHERE %s', t.tbl, cond) INTO n;
        CONTINUE WHEN n = 0;
        late := CASE t.tbl
            WHEN 'height' THEN ' - CASE WHEN r.in_force_from IS NULL THEN ''in_force_from'' ELSE '''' END'
            WHEN 'run' THEN ' - CASE WHEN r.standards_profile IS NULL'
                || ' THEN ''{standards_profile,standards_version,standards_source,standards_file}''::text[]'
                || ' WHEN r.standards_file IS NULL THEN ''{standards_file}''::text[] ELSE ''{}''::text[] END'
            ELSE '' END;
        obj := CASE WHEN t.ncols BETWEEN 1 AND 50 THEN format('jsonb_build_object(%s)', t.cols) ELSE '(to_jsonb(r) - ''created_xid'')' END;
        IF n <= k THEN
            EXECUTE format(
                'SELECT sha256(convert_to(string_agg((%s%s)::text || E''\n'', '''' ORDER BY %s), ''UTF8''))'
                ' FROM public.%I r WHERE %s',
                obj, late, t.key, t.tbl, cond) INTO d;
            m := m || format('%s %s %s', t.tbl, n, encode(d, 'hex')) || E'\n';
            CONTINUE;
        END IF;
        EXECUTE format(
            'SELECT coalesce(sum(p.n), 0)::bigint, count(*), string_agg(p.d, ''''::bytea ORDER BY p.c)'
            ' FROM (SELECT s.c, count(*) AS n, sha256(convert_to(string_agg(s.txt || E''\n'', '''' ORDER BY s.rn), ''UTF8'')) AS d'
            '       FROM (SELECT row_number() OVER (ORDER BY %s) AS rn, (row_number() OVER (ORDER BY %s) - 1) / %s AS c,'
            '                    (%s%s)::text AS txt'
            '             FROM public.%I r WHERE %s) s'
            '       GROUP BY s.c) p',
            t.key, t.key, k, obj, late, t.tbl, cond) INTO n, pieces, d;
        IF pieces = 1 THEN
            m := m || format('%s %s %s', t.tbl, n, encode(d, 'hex')) || E'\n';
        ELSE
            m := m || format('%s %s pieces-of %s %s', t.tbl, n, k, encode(sha256(d), 'hex')) || E'\n';
        END IF;
    END LOOP;
    RETURN m;
END
$$;
-- +goose StatementEnd

SELECT cairn_roles_apply();

-- +goose Down
-- cairn_commit_manifest as 00022 made it.
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
