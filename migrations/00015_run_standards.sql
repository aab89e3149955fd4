-- +goose Up
-- Schema v15: a run keeps the standards profile that judged it
-- (docs/standards.md, docs/register.md).
--
-- 1. Four columns on run: standards_profile (the profile's name),
--    standards_version (a built-in's edition, or "sha256:" and the hex
--    SHA-256 of the profile file), standards_source (the publication or
--    the office's source, as the profile cites it) and standards_file (the
--    profile file's bytes; NULL for a built-in). All four are NULL on a run
--    recorded before v15 (not recorded); otherwise the first three are
--    given, and the file exactly when the version is a digest, which must
--    be the file's.
-- 2. The evidence. A row's canonical text (00013) is to_jsonb of the row
--    without created_xid; the columns added here are left out of it when
--    they are NULL, so that the rows of run written before v15 keep the
--    text their commits' digests were made of. cairn_commit_manifest is
--    re-created so; store.EvidenceRows does the same by plain SELECTs.
--    A later migration that adds columns to a table of the evidence
--    leaves them out in the same way (evidenceLateColumns in
--    internal/store/evidence.go).
-- 3. The roles' INSERT privileges are granted column by column
--    (cairn_roles_apply, 00012): applied again, they include the new
--    columns. run stays append-only (00001, 00011).

ALTER TABLE run
    ADD COLUMN standards_profile text,
    ADD COLUMN standards_version text,
    ADD COLUMN standards_source text,
    ADD COLUMN standards_file bytea,
    ADD CONSTRAINT run_standards_whole CHECK (
        (standards_profile IS NULL AND standards_version IS NULL AND standards_source IS NULL AND standards_file IS NULL)
        OR (standards_profile <> '' AND standards_version <> '' AND standards_source IS NOT NULL
            AND (standards_file IS NOT NULL) = (standards_version LIKE 'sha256:%')
            AND (standards_file IS NULL OR standards_version = 'sha256:' || encode(sha256(standards_file), 'hex'))));

-- +goose StatementBegin
-- cairn_commit_manifest as in 00013, a run's standards columns left out of
-- its canonical text when NULL.
CREATE OR REPLACE FUNCTION cairn_commit_manifest(x xid8) RETURNS text LANGUAGE plpgsql STABLE
SET search_path = pg_catalog, public, pg_temp
SET TimeZone = 'UTC' SET extra_float_digits = 1 SET bytea_output = 'hex' AS $$
DECLARE
    t     record;
    n     bigint;
    d     bytea;
    m     text := '';
    cond  text := CASE WHEN x IS NULL THEN 'created_xid IS NULL' ELSE format('created_xid = %L::xid8', x) END;
    txt   text;
BEGIN
    FOR t IN SELECT * FROM cairn_evidence_tables() ORDER BY ord LOOP
        txt := '(to_jsonb(r) - ''created_xid'')';
        IF t.tbl = 'run' THEN
            txt := '(to_jsonb(r) - ''created_xid'' - CASE WHEN r.standards_profile IS NULL'
                || ' THEN ''{standards_profile,standards_version,standards_source,standards_file}''::text[]'
                || ' WHEN r.standards_file IS NULL THEN ''{standards_file}''::text[] ELSE ''{}''::text[] END)';
        END IF;
        EXECUTE format('SELECT count(*), sha256(convert_to(coalesce(string_agg(%s::text || E''\n'', '''' ORDER BY %s), ''''), ''UTF8''))'
                       ' FROM public.%I r WHERE %s', txt, t.key, t.tbl, cond) INTO n, d;
        IF n > 0 THEN
            m := m || format('%s %s %s', t.tbl, n, encode(d, 'hex')) || E'\n';
        END IF;
    END LOOP;
    RETURN m;
END
$$;
-- +goose StatementEnd
REVOKE ALL ON FUNCTION cairn_commit_manifest(xid8) FROM PUBLIC;

SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
-- cairn_commit_manifest as 00013 made it.
CREATE OR REPLACE FUNCTION cairn_commit_manifest(x xid8) RETURNS text LANGUAGE plpgsql STABLE
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
-- The runs recorded under v15 lose their standards with the columns.
ALTER TABLE run
    DROP CONSTRAINT run_standards_whole,
    DROP COLUMN standards_file,
    DROP COLUMN standards_source,
    DROP COLUMN standards_version,
    DROP COLUMN standards_profile;
SELECT cairn_roles_apply();
