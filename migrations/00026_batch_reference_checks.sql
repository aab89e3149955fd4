-- +goose Up
-- Schema v26: the references of a publication's and a draft's rows
-- checked once a statement, and the height trigger's per-row calls
-- taken out (issue 15: a 50,000-version publication and a 100,000-row
-- draft spent about a second each in foreign-key checks PostgreSQL makes
-- row by row, one query a row a key).
--
-- Each foreign key dropped here is replaced by a check that refuses the
-- same rows, with SQLSTATE 23503 (foreign_key_violation) and the dropped
-- constraint's name, as the key did:
--
--   height.mark_id -> mark            height_before_insert reads the mark's
--                                     designation for the row already; a
--                                     row naming no mark is refused there.
--   height.supersedes -> height       height_before_insert refuses a row
--                                     that does not supersede the latest
--                                     version of its chain (CA002), so a
--                                     row's supersedes is always a version
--                                     that exists (or NULL for the first).
--   height.adjustment_id -> adjustment  height_from_adjustment_rows, once a
--                                     statement over its rows.
--   adjustment_result.adjustment_id, .mark_id, .replaces  adjustment_result_refs,
--                                     once a statement over its rows.
--   adjustment_section.(adjustment_id, run_id) -> adjustment_run, and
--   adjustment_section.adjustment_id -> adjustment  adjustment_section_refs,
--                                     once a statement (a row of
--                                     adjustment_run has its adjustment: its
--                                     own foreign key, kept).
--
-- The other half of a foreign key, that a row referred to is never
-- removed or given another key, holds already for every table referred
-- to here, by triggers that refuse it to everyone: mark (mark_fixed,
-- mark_key, mark_no_truncate), height, adjustment and adjustment_run
-- (*_append_only, *_no_truncate). So no row can lose what it refers to,
-- and no lock on the row referred to is needed while the writer's
-- transaction runs (a foreign key takes one against its removal). The
-- keys to datum stay (a datum's row has no such trigger against DELETE).
--
-- height_before_insert also stops calling cairn_xact() and
-- cairn_write_time() a row (SQL and plpgsql functions with their own
-- search_path, their settings saved and restored at each call: 8.8 and
-- 3.3 µs a row): it computes the transaction's number by cairn_xact's
-- expression itself, and reads the write time kept for the transaction
-- itself, calling cairn_write_time() only for the first write (which
-- keeps the time) or when the kept time is not within this transaction
-- (which refuses, as before). The canonical text is byte for byte the
-- same (layouts 2 and 3, as 00025 wrote them).
-- +goose StatementBegin
CREATE OR REPLACE FUNCTION height_before_insert() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    prev   height;
    des    text;
    code   text;
    clock  timestamptz;
    canon  text;
    kept   text;
    at     text;
    layout text;
    prevh  text;
BEGIN
    SELECT designation INTO des FROM mark WHERE id = NEW.mark_id;
    IF NOT FOUND THEN
        RAISE EXCEPTION 'insert or update on table "height" violates foreign key constraint "height_mark_id_fkey"'
            USING ERRCODE = 'foreign_key_violation', CONSTRAINT = 'height_mark_id_fkey', TABLE = 'height',
                  DETAIL = format('Key (mark_id)=(%s) is not present in table "mark".', NEW.mark_id);
    END IF;
    SELECT d.code INTO code FROM datum d WHERE d.id = NEW.datum_id;
    -- The latest version, read whole in the one probe of the chain's key.
    SELECT * INTO prev FROM height h
     WHERE h.mark_id = NEW.mark_id AND h.datum_id = NEW.datum_id
     ORDER BY h.version DESC LIMIT 1;
    IF NEW.supersedes IS DISTINCT FROM prev.id THEN
        RAISE EXCEPTION 'height of % on % changed meanwhile: the new version must supersede the latest (%), not %',
            des, code, coalesce(prev.id::text, 'none'), coalesce(NEW.supersedes::text, 'none')
            USING ERRCODE = 'CA002';
    END IF;
    -- cairn_write_time(), without its call a row: the time kept for the
    -- transaction, if kept and within it; else the function itself,
    -- which keeps it (the first write) or refuses.
    kept := current_setting('cairn.write_time', true);
    IF kept IS NULL OR kept = '' THEN
        NEW.recorded_at := cairn_write_time();
    ELSE
        NEW.recorded_at := kept::timestamp AT TIME ZONE 'UTC';
        IF NEW.recorded_at < now() OR NEW.recorded_at > clock_timestamp() THEN
            NEW.recorded_at := cairn_write_time();
        END IF;
    END IF;
    -- cairn_xact(), its expression without its call.
    NEW.created_xid := ((pg_current_xact_id()::text)::bigint +
        coalesce((SELECT c.xact_base FROM public.register_cluster c ORDER BY c.id DESC LIMIT 1), 0))::text::xid8;
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
    IF prev.id IS NULL THEN
        NEW.version := 1;
    ELSE
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
    -- The canonical text of layout 2 (in force from its commit) or 3 (in
    -- force from the time given), as 00025 wrote it, byte for byte: each
    -- line "name:length:value", the length in bytes.
    layout := CASE WHEN NEW.in_force_from IS NULL THEN '2' ELSE '3' END;
    prevh := coalesce(encode(prev.hash, 'hex'), '');
    at := to_char(NEW.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"');
    canon := 'cairn-height:1:' || layout || E'\n'
        || 'prev:' || octet_length(prevh)::text || ':' || prevh || E'\n'
        || 'mark:' || coalesce(octet_length(des)::text, '') || ':' || coalesce(des, '') || E'\n'
        || 'datum:' || coalesce(octet_length(code)::text, '') || ':' || coalesce(code, '') || E'\n'
        || 'version:' || octet_length(NEW.version::text)::text || ':' || NEW.version::text || E'\n'
        || 'value:' || octet_length(coalesce(NEW.value::text, ''))::text || ':' || coalesce(NEW.value::text, '') || E'\n'
        || 'unit:' || octet_length(coalesce(NEW.unit, ''))::text || ':' || coalesce(NEW.unit, '') || E'\n'
        || 'decimals:' || octet_length(coalesce(NEW.decimals::text, ''))::text || ':' || coalesce(NEW.decimals::text, '') || E'\n'
        || 'class:' || coalesce(octet_length(NEW.class)::text, '') || ':' || coalesce(NEW.class, '') || E'\n'
        || 'source_kind:' || coalesce(octet_length(NEW.source_kind)::text, '') || ':' || coalesce(NEW.source_kind, '') || E'\n'
        || 'source:' || coalesce(octet_length(NEW.source)::text, '') || ':' || coalesce(NEW.source, '') || E'\n'
        || 'adjustment_id:' || octet_length(coalesce(NEW.adjustment_id::text, ''))::text || ':' || coalesce(NEW.adjustment_id::text, '') || E'\n'
        || 'reason:' || coalesce(octet_length(NEW.reason)::text, '') || ':' || coalesce(NEW.reason, '') || E'\n'
        || 'recorded_by:' || coalesce(octet_length(NEW.recorded_by)::text, '') || ':' || coalesce(NEW.recorded_by, '') || E'\n'
        || 'recorded_at:' || octet_length(at)::text || ':' || at || E'\n'
        || 'recorded_role:' || coalesce(octet_length(NEW.recorded_role)::text, '') || ':' || coalesce(NEW.recorded_role, '') || E'\n';
    IF NEW.in_force_from IS NOT NULL THEN
        at := to_char(NEW.in_force_from AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"');
        canon := canon || 'in_force_from:' || octet_length(at)::text || ':' || at || E'\n';
    END IF;
    NEW.hash := sha256(convert_to(canon, 'UTF8'));
    RETURN NEW;
END
$$;
-- +goose StatementEnd

-- height_from_adjustment_rows as 00025 made it, first refusing a row that
-- names an adjustment that does not exist (height_adjustment_fk's
-- refusal, before the checks that the adjustment is published and has the
-- row's result).
-- +goose StatementBegin
CREATE OR REPLACE FUNCTION height_from_adjustment_rows() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    bad record;
BEGIN
    SELECT n.adjustment_id INTO bad
      FROM (SELECT DISTINCT a.adjustment_id FROM added a WHERE a.adjustment_id IS NOT NULL) n
     WHERE NOT EXISTS (SELECT 1 FROM public.adjustment x WHERE x.id = n.adjustment_id)
     ORDER BY n.adjustment_id LIMIT 1;
    IF FOUND THEN
        RAISE EXCEPTION 'insert or update on table "height" violates foreign key constraint "height_adjustment_fk"'
            USING ERRCODE = 'foreign_key_violation', CONSTRAINT = 'height_adjustment_fk', TABLE = 'height',
                  DETAIL = format('Key (adjustment_id)=(%s) is not present in table "adjustment".', bad.adjustment_id);
    END IF;
    SELECT n.adjustment_id, e.recorded_at, e.created_xid, e.created_server_start INTO bad
      FROM (SELECT DISTINCT a.adjustment_id FROM added a WHERE a.adjustment_id IS NOT NULL) n
      LEFT JOIN public.adjustment_event e ON e.adjustment_id = n.adjustment_id AND e.status = 'published'
     WHERE e.adjustment_id IS NULL OR e.created_xid IS DISTINCT FROM cairn_xact()
        OR e.created_server_start IS DISTINCT FROM pg_postmaster_start_time()
     ORDER BY n.adjustment_id LIMIT 1;
    IF FOUND AND bad.recorded_at IS NULL THEN
        RAISE EXCEPTION 'adjustment % is not published: no height may cite it', bad.adjustment_id
            USING ERRCODE = 'CA003';
    END IF;
    IF FOUND THEN
        RAISE EXCEPTION 'adjustment % was published on %: its heights were written then, and no height may cite it since',
            bad.adjustment_id, to_char(bad.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS"Z"')
            USING ERRCODE = 'CA004';
    END IF;
    SELECT h.adjustment_id, h.value, h.unit INTO bad FROM added h
     WHERE h.adjustment_id IS NOT NULL
       AND NOT EXISTS (SELECT 1 FROM public.adjustment a JOIN public.adjustment_result r ON r.adjustment_id = a.id
                        WHERE a.id = h.adjustment_id AND a.datum_id = h.datum_id AND r.mark_id = h.mark_id
                          AND NOT r.held AND r.value = h.value AND r.unit = h.unit AND r.decimals = h.decimals)
     LIMIT 1;
    IF FOUND THEN
        RAISE EXCEPTION 'adjustment % has no result % % for this mark and datum', bad.adjustment_id, bad.value, bad.unit
            USING ERRCODE = 'CA003';
    END IF;
    RETURN NULL;
END
$$;
-- +goose StatementEnd

-- The references of an adjustment's results, once a statement: its
-- adjustment, its mark, the version it would replace.
-- +goose StatementBegin
CREATE FUNCTION adjustment_result_refs() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    bad bigint;
BEGIN
    SELECT n.adjustment_id INTO bad FROM (SELECT DISTINCT a.adjustment_id FROM added a) n
     WHERE NOT EXISTS (SELECT 1 FROM public.adjustment x WHERE x.id = n.adjustment_id)
     ORDER BY n.adjustment_id LIMIT 1;
    IF FOUND THEN
        RAISE EXCEPTION 'insert or update on table "adjustment_result" violates foreign key constraint "adjustment_result_adjustment_id_fkey"'
            USING ERRCODE = 'foreign_key_violation', CONSTRAINT = 'adjustment_result_adjustment_id_fkey', TABLE = 'adjustment_result',
                  DETAIL = format('Key (adjustment_id)=(%s) is not present in table "adjustment".', bad);
    END IF;
    SELECT a.mark_id INTO bad FROM added a
     WHERE NOT EXISTS (SELECT 1 FROM public.mark m WHERE m.id = a.mark_id)
     ORDER BY a.mark_id LIMIT 1;
    IF FOUND THEN
        RAISE EXCEPTION 'insert or update on table "adjustment_result" violates foreign key constraint "adjustment_result_mark_id_fkey"'
            USING ERRCODE = 'foreign_key_violation', CONSTRAINT = 'adjustment_result_mark_id_fkey', TABLE = 'adjustment_result',
                  DETAIL = format('Key (mark_id)=(%s) is not present in table "mark".', bad);
    END IF;
    SELECT a.replaces INTO bad FROM added a
     WHERE a.replaces IS NOT NULL AND NOT EXISTS (SELECT 1 FROM public.height h WHERE h.id = a.replaces)
     ORDER BY a.replaces LIMIT 1;
    IF FOUND THEN
        RAISE EXCEPTION 'insert or update on table "adjustment_result" violates foreign key constraint "adjustment_result_replaces_fkey"'
            USING ERRCODE = 'foreign_key_violation', CONSTRAINT = 'adjustment_result_replaces_fkey', TABLE = 'adjustment_result',
                  DETAIL = format('Key (replaces)=(%s) is not present in table "height".', bad);
    END IF;
    RETURN NULL;
END
$$;
-- +goose StatementEnd

-- The references of an adjustment's section outcomes, once a statement:
-- each to a run of its adjustment.
-- +goose StatementBegin
CREATE FUNCTION adjustment_section_refs() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    bad record;
BEGIN
    SELECT a.adjustment_id, a.run_id INTO bad FROM added a
     WHERE NOT EXISTS (SELECT 1 FROM public.adjustment_run r WHERE r.adjustment_id = a.adjustment_id AND r.run_id = a.run_id)
     ORDER BY a.adjustment_id, a.run_id LIMIT 1;
    IF FOUND THEN
        RAISE EXCEPTION 'insert or update on table "adjustment_section" violates foreign key constraint "adjustment_section_adjustment_id_run_id_fkey"'
            USING ERRCODE = 'foreign_key_violation', CONSTRAINT = 'adjustment_section_adjustment_id_run_id_fkey', TABLE = 'adjustment_section',
                  DETAIL = format('Key (adjustment_id, run_id)=(%s, %s) is not present in table "adjustment_run".', bad.adjustment_id, bad.run_id);
    END IF;
    RETURN NULL;
END
$$;
-- +goose StatementEnd

-- The statement triggers fire in the order of their names, so these
-- (refs) before the seals (sealed), as the keys' checks fired before.
CREATE TRIGGER adjustment_result_refs AFTER INSERT ON adjustment_result REFERENCING NEW TABLE AS added
    FOR EACH STATEMENT EXECUTE FUNCTION adjustment_result_refs();
CREATE TRIGGER adjustment_section_refs AFTER INSERT ON adjustment_section REFERENCING NEW TABLE AS added
    FOR EACH STATEMENT EXECUTE FUNCTION adjustment_section_refs();

ALTER TABLE height DROP CONSTRAINT height_mark_id_fkey;
ALTER TABLE height DROP CONSTRAINT height_supersedes_fkey;
ALTER TABLE height DROP CONSTRAINT height_adjustment_fk;
ALTER TABLE adjustment_result DROP CONSTRAINT adjustment_result_adjustment_id_fkey;
ALTER TABLE adjustment_result DROP CONSTRAINT adjustment_result_mark_id_fkey;
ALTER TABLE adjustment_result DROP CONSTRAINT adjustment_result_replaces_fkey;
ALTER TABLE adjustment_section DROP CONSTRAINT adjustment_section_adjustment_id_fkey;
ALTER TABLE adjustment_section DROP CONSTRAINT adjustment_section_adjustment_id_run_id_fkey;

SELECT cairn_roles_apply();

-- +goose Down
ALTER TABLE adjustment_section ADD CONSTRAINT adjustment_section_adjustment_id_run_id_fkey
    FOREIGN KEY (adjustment_id, run_id) REFERENCES adjustment_run (adjustment_id, run_id);
ALTER TABLE adjustment_section ADD CONSTRAINT adjustment_section_adjustment_id_fkey FOREIGN KEY (adjustment_id) REFERENCES adjustment (id);
ALTER TABLE adjustment_result ADD CONSTRAINT adjustment_result_replaces_fkey FOREIGN KEY (replaces) REFERENCES height (id);
ALTER TABLE adjustment_result ADD CONSTRAINT adjustment_result_mark_id_fkey FOREIGN KEY (mark_id) REFERENCES mark (id);
ALTER TABLE adjustment_result ADD CONSTRAINT adjustment_result_adjustment_id_fkey FOREIGN KEY (adjustment_id) REFERENCES adjustment (id);
ALTER TABLE height ADD CONSTRAINT height_adjustment_fk FOREIGN KEY (adjustment_id) REFERENCES adjustment (id);
ALTER TABLE height ADD CONSTRAINT height_supersedes_fkey FOREIGN KEY (supersedes) REFERENCES height (id);
ALTER TABLE height ADD CONSTRAINT height_mark_id_fkey FOREIGN KEY (mark_id) REFERENCES mark (id);
DROP TRIGGER adjustment_section_refs ON adjustment_section;
DROP TRIGGER adjustment_result_refs ON adjustment_result;
DROP FUNCTION adjustment_section_refs();
DROP FUNCTION adjustment_result_refs();
-- The two functions as 00025 made them.
-- +goose StatementBegin
CREATE OR REPLACE FUNCTION height_before_insert() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    prev   height;
    des    text;
    code   text;
    clock  timestamptz;
    canon  text;
BEGIN
    SELECT designation INTO des FROM mark WHERE id = NEW.mark_id;
    SELECT d.code INTO code FROM datum d WHERE d.id = NEW.datum_id;
    -- The latest version, read whole in the one probe of the chain's key.
    SELECT * INTO prev FROM height h
     WHERE h.mark_id = NEW.mark_id AND h.datum_id = NEW.datum_id
     ORDER BY h.version DESC LIMIT 1;
    IF NEW.supersedes IS DISTINCT FROM prev.id THEN
        RAISE EXCEPTION 'height of % on % changed meanwhile: the new version must supersede the latest (%), not %',
            des, code, coalesce(prev.id::text, 'none'), coalesce(NEW.supersedes::text, 'none')
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
    IF prev.id IS NULL THEN
        NEW.version := 1;
    ELSE
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
    -- The canonical text of layout 2 (in force from its commit) or 3 (in
    -- force from the time given), as height_canonical_v2 and 00017 wrote
    -- it, byte for byte, by concatenation.
    canon := 'cairn-height:' || coalesce(octet_length(CASE WHEN NEW.in_force_from IS NULL THEN '2' ELSE '3' END)::text, '') || ':' || coalesce(CASE WHEN NEW.in_force_from IS NULL THEN '2' ELSE '3' END, '') || E'\n'
        || 'prev:' || coalesce(octet_length(coalesce(encode(prev.hash, 'hex'), ''))::text, '') || ':' || coalesce(coalesce(encode(prev.hash, 'hex'), ''), '') || E'\n'
        || 'mark:' || coalesce(octet_length(des)::text, '') || ':' || coalesce(des, '') || E'\n'
        || 'datum:' || coalesce(octet_length(code)::text, '') || ':' || coalesce(code, '') || E'\n'
        || 'version:' || coalesce(octet_length(NEW.version::text)::text, '') || ':' || coalesce(NEW.version::text, '') || E'\n'
        || 'value:' || coalesce(octet_length(coalesce(NEW.value::text, ''))::text, '') || ':' || coalesce(coalesce(NEW.value::text, ''), '') || E'\n'
        || 'unit:' || coalesce(octet_length(coalesce(NEW.unit, ''))::text, '') || ':' || coalesce(coalesce(NEW.unit, ''), '') || E'\n'
        || 'decimals:' || coalesce(octet_length(coalesce(NEW.decimals::text, ''))::text, '') || ':' || coalesce(coalesce(NEW.decimals::text, ''), '') || E'\n'
        || 'class:' || coalesce(octet_length(NEW.class)::text, '') || ':' || coalesce(NEW.class, '') || E'\n'
        || 'source_kind:' || coalesce(octet_length(NEW.source_kind)::text, '') || ':' || coalesce(NEW.source_kind, '') || E'\n'
        || 'source:' || coalesce(octet_length(NEW.source)::text, '') || ':' || coalesce(NEW.source, '') || E'\n'
        || 'adjustment_id:' || coalesce(octet_length(coalesce(NEW.adjustment_id::text, ''))::text, '') || ':' || coalesce(coalesce(NEW.adjustment_id::text, ''), '') || E'\n'
        || 'reason:' || coalesce(octet_length(NEW.reason)::text, '') || ':' || coalesce(NEW.reason, '') || E'\n'
        || 'recorded_by:' || coalesce(octet_length(NEW.recorded_by)::text, '') || ':' || coalesce(NEW.recorded_by, '') || E'\n'
        || 'recorded_at:' || coalesce(octet_length(to_char(NEW.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"'))::text, '') || ':' || coalesce(to_char(NEW.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"'), '') || E'\n'
        || 'recorded_role:' || coalesce(octet_length(NEW.recorded_role)::text, '') || ':' || coalesce(NEW.recorded_role, '') || E'\n';
    IF NEW.in_force_from IS NOT NULL THEN
        canon := canon || 'in_force_from:' || coalesce(octet_length(to_char(NEW.in_force_from AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"'))::text, '') || ':' || coalesce(to_char(NEW.in_force_from AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"'), '') || E'\n';
    END IF;
    NEW.hash := sha256(convert_to(canon, 'UTF8'));
    RETURN NEW;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
CREATE OR REPLACE FUNCTION height_from_adjustment_rows() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    bad record;
BEGIN
    SELECT n.adjustment_id, e.recorded_at, e.created_xid, e.created_server_start INTO bad
      FROM (SELECT DISTINCT a.adjustment_id FROM added a WHERE a.adjustment_id IS NOT NULL) n
      LEFT JOIN public.adjustment_event e ON e.adjustment_id = n.adjustment_id AND e.status = 'published'
     WHERE e.adjustment_id IS NULL OR e.created_xid IS DISTINCT FROM cairn_xact()
        OR e.created_server_start IS DISTINCT FROM pg_postmaster_start_time()
     ORDER BY n.adjustment_id LIMIT 1;
    IF FOUND AND bad.recorded_at IS NULL THEN
        RAISE EXCEPTION 'adjustment % is not published: no height may cite it', bad.adjustment_id
            USING ERRCODE = 'CA003';
    END IF;
    IF FOUND THEN
        RAISE EXCEPTION 'adjustment % was published on %: its heights were written then, and no height may cite it since',
            bad.adjustment_id, to_char(bad.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS"Z"')
            USING ERRCODE = 'CA004';
    END IF;
    SELECT h.adjustment_id, h.value, h.unit INTO bad FROM added h
     WHERE h.adjustment_id IS NOT NULL
       AND NOT EXISTS (SELECT 1 FROM public.adjustment a JOIN public.adjustment_result r ON r.adjustment_id = a.id
                        WHERE a.id = h.adjustment_id AND a.datum_id = h.datum_id AND r.mark_id = h.mark_id
                          AND NOT r.held AND r.value = h.value AND r.unit = h.unit AND r.decimals = h.decimals)
     LIMIT 1;
    IF FOUND THEN
        RAISE EXCEPTION 'adjustment % has no result % % for this mark and datum', bad.adjustment_id, bad.value, bad.unit
            USING ERRCODE = 'CA003';
    END IF;
    RETURN NULL;
END
$$;

-- +goose StatementEnd

SELECT cairn_roles_apply();
