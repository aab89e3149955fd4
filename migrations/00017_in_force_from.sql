-- +goose Up
-- Schema v17: two times for every height version (docs/register.md,
-- "Two times: in force and recorded").
--
-- 1. in_force_from: when the version came in force, as its source gives it
--    (the date an authority published it, an imported register's date).
--    NULL means "in force from its own commit": every version written
--    before this schema, and every version cairn publishes from an
--    adjustment, whose in-force time is the publication's commit
--    (register_commit.committed_at). A version from outside
--    (source_kind other than adjustment) must give it; a version from an
--    adjustment must not. It is never after the transaction's write time:
--    the register holds no height that comes in force later by itself.
-- 2. Recorded: when the register learned of the version, its commit, as
--    before (schema v12).
-- 3. The one answer. What was in force at D as known at T is, of the
--    versions of a mark and datum committed by T whose in-force time is
--    not after D, the one in force from the latest time; of two in force
--    from the same time (a correction), the one recorded later. Versions
--    of a chain are recorded at strictly increasing times, one per
--    transaction (00012), and every version has an in-force time (this
--    trigger), so the order is total and every question has one answer
--    or none.
-- 4. The hash: a version that gives in_force_from is hashed with layout 3
--    of the canonical text (layout 2 and an in_force_from line). A version
--    without keeps layout 2 (or 1 before v12), whose meaning was always
--    "in force from its commit". Setting or clearing the column changes
--    the layout the audit uses, so either is found.
-- 5. The evidence's manifest leaves in_force_from out of a row where it is
--    NULL, so that the rows written before this schema keep the text their
--    commits sealed.

ALTER TABLE height ADD COLUMN in_force_from timestamptz;

-- +goose StatementBegin
-- height_before_insert as 00012 wrote it (with 00014's transaction
-- numbers), with the in-force time checked and layout 3 of the canonical
-- text for a version that gives one. The text of layout 3 is built here,
-- not in a function of its own, so that no role needs a grant to call it.
CREATE OR REPLACE FUNCTION height_before_insert() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    prev   height;
    latest bigint;
    des    text;
    code   text;
    clock  timestamptz;
    canon  text;
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
    NEW.created_xid := cairn_xact();
    NEW.recorded_role := session_user;
    IF NEW.source_kind = 'adjustment' AND NEW.in_force_from IS NOT NULL THEN
        RAISE EXCEPTION 'height of % on %: a version from an adjustment comes in force at its publication''s commit, not at % given',
            des, code, to_char(NEW.in_force_from AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"')
            USING ERRCODE = 'CA017';
    END IF;
    IF NEW.source_kind <> 'adjustment' AND NEW.in_force_from IS NULL THEN
        RAISE EXCEPTION 'height of % on %: a version from outside (%) gives the time it came in force (in_force_from)',
            des, code, NEW.source_kind
            USING ERRCODE = 'CA017';
    END IF;
    IF NEW.in_force_from > NEW.recorded_at THEN
        RAISE EXCEPTION 'height of % on %: in force from %, after it is recorded (%): the register holds no height that comes in force later',
            des, code, to_char(NEW.in_force_from AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"'),
            to_char(NEW.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US"Z"')
            USING ERRCODE = 'CA017';
    END IF;
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
    IF NEW.in_force_from IS NULL THEN
        canon := height_canonical_v2(prev.hash, des, code, NEW);
    ELSE
        SELECT string_agg(format('%s:%s:%s', f.name, octet_length(f.val), f.val), E'\n' ORDER BY f.ord) || E'\n' INTO canon
        FROM (VALUES
            (1,  'cairn-height',  '3'),
            (2,  'prev',          coalesce(encode(prev.hash, 'hex'), '')),
            (3,  'mark',          des),
            (4,  'datum',         code),
            (5,  'version',       NEW.version::text),
            (6,  'value',         coalesce(NEW.value::text, '')),
            (7,  'unit',          coalesce(NEW.unit, '')),
            (8,  'decimals',      coalesce(NEW.decimals::text, '')),
            (9,  'class',         NEW.class),
            (10, 'source_kind',   NEW.source_kind),
            (11, 'source',        NEW.source),
            (12, 'adjustment_id', coalesce(NEW.adjustment_id::text, '')),
            (13, 'reason',        NEW.reason),
            (14, 'recorded_by',   NEW.recorded_by),
            (15, 'recorded_at',   to_char(NEW.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"')),
            (16, 'recorded_role', NEW.recorded_role),
            (17, 'in_force_from', to_char(NEW.in_force_from AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"'))
        ) AS f (ord, name, val);
    END IF;
    NEW.hash := sha256(convert_to(canon, 'UTF8'));
    RETURN NEW;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- cairn_commit_manifest as in 00015 (a run's standards columns left out
-- of its row's text when NULL), and a height's in_force_from left out of
-- its row's text where it is NULL.
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

SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
-- cairn_commit_manifest as 00015 made it.
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

-- +goose StatementBegin
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
    NEW.created_xid := cairn_xact();
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

ALTER TABLE height DROP COLUMN in_force_from;
SELECT cairn_roles_apply();
