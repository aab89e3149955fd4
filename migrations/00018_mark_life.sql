-- +goose Up
-- Schema v18: the life of a mark (docs/register.md, "The life of a mark").
--
-- 1. Versions of a mark's description. mark_version keeps every later
--    state of the fields that say what a mark is and how to find it: kind,
--    setting, stamping, directions (the written way to find it), a
--    description, the approximate position and where that position came
--    from, each version whole, with its reason. The mark's own row is
--    version 1 and is never changed in place any more (a trigger refuses
--    UPDATE, DELETE and TRUNCATE of mark); its column to_reach keeps the
--    words given when the mark was added (the evidence holds those rows
--    with that key, so it is not renamed); from version 2 the column is
--    directions.
-- 2. Aliases. mark_alias gives a mark other names: another agency's
--    number, a former designation, what is stamped on it. An alias is
--    unique by its folded form, lower(normalize(alias, NFKC)), as a
--    designation is (00009), and never the folded form of any mark's
--    designation: the triggers on mark and mark_alias refuse either
--    (SQLSTATE CA018), writers of aliases taking turns with writers of
--    marks on an advisory lock so that two cannot each add one half.
-- 3. Retired marks. mark_retirement retires a mark for good, once, with
--    its date and reason, and names the mark that replaced it, if any (a
--    new mark with a new designation; a mark replaces at most one, and a
--    retired mark replaces none). A retired designation stays in mark and
--    is never reused.
-- 4. Photos. condition_photo keeps the photographs of a condition report
--    (a close-up, an eye-level view, a view of the setting), JPEG or PNG,
--    at most 8 MiB each, byte for byte with their SHA-256, which the
--    database checks, as it checks the file's first bytes against its
--    type. A photo is written with its report, in the transaction that
--    inserts the report, never later (SQLSTATE CA004, as 00011's seals).
-- 5. The four tables join the evidence (cairn_evidence_tables, 19 to 22)
--    with created_xid, recorded_role, an index on created_xid and
--    append-only triggers, and the commit trigger on the three that head a
--    write (a photo is written with its report); cairn_roles_apply grants
--    INSERT on mark_version, mark_alias and condition_photo to
--    cairn_recorder and on mark_retirement to cairn_publisher.

CREATE TABLE mark_version (
    id              bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    mark_id         bigint NOT NULL REFERENCES mark (id),
    -- 2, 3, ... within one mark (the mark's own row is 1); set by the trigger.
    version         integer NOT NULL CHECK (version >= 2),
    mark_type       text NOT NULL DEFAULT '',
    setting         text NOT NULL DEFAULT '',
    stamping        text NOT NULL DEFAULT '',
    directions      text NOT NULL DEFAULT '',
    description     text NOT NULL DEFAULT '',
    lat             double precision CHECK (lat BETWEEN -90 AND 90),
    lon             double precision CHECK (lon BETWEEN -180 AND 180),
    position_source text NOT NULL DEFAULT '',
    reason          text NOT NULL CHECK (btrim(reason) <> ''),
    recorded_by     text NOT NULL CHECK (btrim(recorded_by) <> ''),
    recorded_at     timestamptz NOT NULL DEFAULT cairn_write_time(),
    created_xid     xid8 DEFAULT cairn_xact(),
    recorded_role   text DEFAULT session_user,
    UNIQUE (mark_id, version),
    CONSTRAINT mark_version_lat_lon_together CHECK ((lat IS NULL) = (lon IS NULL))
);
CREATE INDEX mark_version_created_xid ON mark_version (created_xid);
CREATE INDEX mark_version_position ON mark_version USING gist (point(lon, lat)) WHERE lat IS NOT NULL;

CREATE TABLE mark_alias (
    id            bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    mark_id       bigint NOT NULL REFERENCES mark (id),
    -- Letters, digits, single spaces and . _ / # -, as agencies and
    -- stampings write numbers; ASCII, so lower() folds it as cairn does.
    alias         text NOT NULL CHECK (alias ~ '^[A-Za-z0-9][A-Za-z0-9 ._/#-]{0,63}$' AND alias !~ '  ' AND alias !~ ' $'),
    -- agency: another agency's number (agency names it); former: a
    -- designation the mark had before; stamped: what is stamped on it.
    kind          text NOT NULL CHECK (kind IN ('agency', 'former', 'stamped')),
    agency        text NOT NULL DEFAULT '',
    note          text NOT NULL DEFAULT '',
    recorded_by   text NOT NULL CHECK (btrim(recorded_by) <> ''),
    recorded_at   timestamptz NOT NULL DEFAULT cairn_write_time(),
    created_xid   xid8 DEFAULT cairn_xact(),
    recorded_role text DEFAULT session_user,
    CONSTRAINT mark_alias_agency_named CHECK ((kind = 'agency') = (btrim(agency) <> ''))
);
CREATE UNIQUE INDEX mark_alias_folded ON mark_alias (lower(normalize(alias, NFKC)));
CREATE INDEX mark_alias_mark ON mark_alias (mark_id);
CREATE INDEX mark_alias_created_xid ON mark_alias (created_xid);

CREATE TABLE mark_retirement (
    id            bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    mark_id       bigint NOT NULL UNIQUE REFERENCES mark (id),
    replaced_by   bigint UNIQUE REFERENCES mark (id),
    retired_on    date NOT NULL,
    reason        text NOT NULL CHECK (btrim(reason) <> ''),
    recorded_by   text NOT NULL CHECK (btrim(recorded_by) <> ''),
    recorded_at   timestamptz NOT NULL DEFAULT cairn_write_time(),
    created_xid   xid8 DEFAULT cairn_xact(),
    recorded_role text DEFAULT session_user,
    CONSTRAINT mark_retirement_not_itself CHECK (replaced_by <> mark_id)
);
CREATE INDEX mark_retirement_created_xid ON mark_retirement (created_xid);

CREATE TABLE condition_photo (
    id            bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    condition_id  bigint NOT NULL REFERENCES mark_condition (id),
    -- What the photograph shows.
    view          text NOT NULL CHECK (view IN ('close-up', 'eye-level', 'setting', 'other')),
    media_type    text NOT NULL CHECK (media_type IN ('image/jpeg', 'image/png')),
    file_name     text NOT NULL DEFAULT '',
    content       bytea NOT NULL CHECK (octet_length(content) BETWEEN 1 AND 8388608),
    sha256        bytea NOT NULL,
    recorded_by   text NOT NULL CHECK (btrim(recorded_by) <> ''),
    recorded_at   timestamptz NOT NULL DEFAULT cairn_write_time(),
    created_xid   xid8 DEFAULT cairn_xact(),
    recorded_role text DEFAULT session_user,
    CONSTRAINT condition_photo_hash CHECK (sha256 = sha256(content)),
    -- The signatures of the formats: JPEG's SOI marker X'FFD8' and the X'FF'
    -- that begins the next marker (ITU-T T.81 | ISO/IEC 10918-1, Annex B,
    -- Table B.1), PNG's eight-byte signature (ISO/IEC 15948:2004, 5.2, the
    -- PNG signature); the section numbers from memory.
    CONSTRAINT condition_photo_format CHECK (
        (media_type = 'image/jpeg' AND substring(content FROM 1 FOR 3) = '\xffd8ff'::bytea) OR
        (media_type = 'image/png' AND substring(content FROM 1 FOR 8) = '\x89504e470d0a1a0a'::bytea))
);
CREATE INDEX condition_photo_condition ON condition_photo (condition_id);
CREATE INDEX condition_photo_created_xid ON condition_photo (created_xid);

-- +goose StatementBegin
-- condition_photo_sealed refuses a photo of a report made in another
-- transaction: photos go in with their report.
CREATE FUNCTION condition_photo_sealed() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    c record;
BEGIN
    SELECT mc.created_xid, mc.recorded_at INTO c FROM public.mark_condition mc WHERE mc.id = NEW.condition_id;
    IF c.created_xid IS DISTINCT FROM cairn_xact() THEN
        RAISE EXCEPTION 'condition report % is sealed: it was recorded whole on %, and no photo may be added to it since', NEW.condition_id,
            coalesce(to_char(c.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS"Z"'), 'an unknown date')
            USING ERRCODE = 'CA004', HINT = 'a report is recorded once, with its photos; make a new report with them';
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd

CREATE TRIGGER condition_photo_sealed BEFORE INSERT ON condition_photo
    FOR EACH ROW EXECUTE FUNCTION condition_photo_sealed();
CREATE TRIGGER condition_photo_append_only BEFORE UPDATE OR DELETE ON condition_photo
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER condition_photo_no_truncate BEFORE TRUNCATE ON condition_photo
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();

-- +goose StatementBegin
-- mark_version_number sets a new version's number: one after the mark's
-- latest (1, the mark's own row, when it has none). Two writers racing
-- meet on UNIQUE (mark_id, version): the second is a conflict to try again.
CREATE FUNCTION mark_version_number() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
BEGIN
    NEW.version := coalesce((SELECT max(v.version) FROM public.mark_version v WHERE v.mark_id = NEW.mark_id), 1) + 1;
    RETURN NEW;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- mark_name_free refuses a designation (on mark) or an alias (on
-- mark_alias) whose folded form is that of an alias or a designation of
-- any mark. A writer of aliases and a writer of marks take turns: the
-- register's names lock (classid 0x6361 'ca', objid 18, transaction-level)
-- is taken shared by a transaction adding marks, so that a recording of
-- thousands of new marks holds one lock and such writers run together, and
-- exclusive by one adding an alias. Each reads the other's rows once it has
-- the lock (READ COMMITTED: each statement of this function sees what was
-- committed before it ran).
CREATE FUNCTION mark_name_free() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    name   text;
    folded text;
    other  text;
BEGIN
    IF TG_TABLE_NAME = 'mark' THEN
        name := NEW.designation;
    ELSE
        name := NEW.alias;
    END IF;
    folded := lower(normalize(name, NFKC));
    IF TG_TABLE_NAME = 'mark' THEN
        PERFORM pg_advisory_xact_lock_shared(25441, 18);
    ELSE
        PERFORM pg_advisory_xact_lock(25441, 18);
    END IF;
    IF TG_TABLE_NAME = 'mark' THEN
        SELECT m.designation || ' (its ' || a.kind || CASE WHEN a.kind = 'agency' THEN ' number, ' || a.agency ELSE '' END || ' alias ' || a.alias || ')'
          INTO other
          FROM public.mark_alias a JOIN public.mark m ON m.id = a.mark_id
         WHERE lower(normalize(a.alias, NFKC)) = folded LIMIT 1;
        IF FOUND THEN
            RAISE EXCEPTION 'designation % is an alias of mark %: a designation is never another mark''s alias', name, other
                USING ERRCODE = 'CA018', COLUMN = 'designation', TABLE = 'mark';
        END IF;
    ELSE
        SELECT m.designation INTO other FROM public.mark m WHERE lower(normalize(m.designation, NFKC)) = folded LIMIT 1;
        IF FOUND THEN
            RAISE EXCEPTION 'alias % is the designation of mark %: an alias is never a mark''s designation', name, other
                USING ERRCODE = 'CA018', COLUMN = 'alias', TABLE = 'mark_alias';
        END IF;
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- mark_retirement_check refuses a replacement that is itself retired.
CREATE FUNCTION mark_retirement_check() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    other text;
BEGIN
    IF NEW.replaced_by IS NOT NULL THEN
        SELECT m.designation INTO other FROM public.mark_retirement r JOIN public.mark m ON m.id = r.mark_id
         WHERE r.mark_id = NEW.replaced_by;
        IF FOUND THEN
            RAISE EXCEPTION 'mark % is retired: a retired mark replaces none', other
                USING ERRCODE = 'CA018', COLUMN = 'replaced_by', TABLE = 'mark_retirement';
        END IF;
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- mark_retirement_not_after_today refuses a retirement dated after the
-- last date that is today somewhere on Earth (UTC+14), as not_after_today
-- (00009) does for observed dates.
CREATE FUNCTION mark_retirement_not_after_today() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    latest date := (statement_timestamp() AT TIME ZONE 'Etc/GMT-14')::date;
BEGIN
    IF NEW.retired_on > latest THEN
        RAISE EXCEPTION 'mark_retirement: retired on % is in the future (it is % at the most anywhere today)', NEW.retired_on, latest
            USING ERRCODE = 'CA009', COLUMN = 'retired_on', TABLE = 'mark_retirement';
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- mark_refuse_edit refuses an UPDATE that changes a mark's row, a DELETE
-- and a TRUNCATE of mark: a mark is never edited in place (a new version
-- of its description is a row of mark_version) nor removed (its
-- designation is never reused). A row lock (FOR NO KEY UPDATE) fires no
-- trigger.
CREATE FUNCTION mark_refuse_edit() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
BEGIN
    IF TG_OP = 'UPDATE' AND NEW IS NOT DISTINCT FROM OLD THEN
        RETURN NEW;
    END IF;
    IF TG_OP = 'UPDATE' AND NEW.designation IS DISTINCT FROM OLD.designation THEN
        RAISE EXCEPTION 'a mark''s designation never changes (% stays %)', OLD.designation, OLD.designation
            USING ERRCODE = 'CA001';
    END IF;
    IF TG_OP = 'UPDATE' THEN
        RAISE EXCEPTION 'mark % is never changed in place: a new description is a new version with a reason (cairn mark edit)', OLD.designation
            USING ERRCODE = 'CA001';
    END IF;
    RAISE EXCEPTION 'mark: % refused; a mark is never removed (retire it: cairn mark retire)', TG_OP
        USING ERRCODE = 'CA001';
END
$$;
-- +goose StatementEnd

CREATE TRIGGER mark_version_number BEFORE INSERT ON mark_version
    FOR EACH ROW EXECUTE FUNCTION mark_version_number();
CREATE TRIGGER mark_name_free BEFORE INSERT ON mark
    FOR EACH ROW EXECUTE FUNCTION mark_name_free();
CREATE TRIGGER mark_alias_name_free BEFORE INSERT ON mark_alias
    FOR EACH ROW EXECUTE FUNCTION mark_name_free();
CREATE TRIGGER mark_retirement_check BEFORE INSERT ON mark_retirement
    FOR EACH ROW EXECUTE FUNCTION mark_retirement_check();
CREATE TRIGGER mark_retirement_not_after_today BEFORE INSERT ON mark_retirement
    FOR EACH ROW EXECUTE FUNCTION mark_retirement_not_after_today();
-- Named to fire before mark_key (00001), whose function reads NEW.code
-- of a datum when a mark's designation is unchanged.
CREATE TRIGGER mark_fixed BEFORE UPDATE OR DELETE ON mark
    FOR EACH ROW EXECUTE FUNCTION mark_refuse_edit();
CREATE TRIGGER mark_no_truncate BEFORE TRUNCATE ON mark
    FOR EACH STATEMENT EXECUTE FUNCTION mark_refuse_edit();

-- +goose StatementBegin
DO $$
DECLARE
    t text;
BEGIN
    FOREACH t IN ARRAY ARRAY['mark_version', 'mark_alias', 'mark_retirement'] LOOP
        EXECUTE format('CREATE TRIGGER %I BEFORE UPDATE OR DELETE ON %I FOR EACH ROW EXECUTE FUNCTION refuse_change()', t || '_append_only', t);
        EXECUTE format('CREATE TRIGGER %I BEFORE TRUNCATE ON %I FOR EACH STATEMENT EXECUTE FUNCTION refuse_change()', t || '_no_truncate', t);
        EXECUTE format('CREATE CONSTRAINT TRIGGER %I AFTER INSERT ON %I DEFERRABLE INITIALLY DEFERRED
                        FOR EACH ROW WHEN (cairn_commit_first()) EXECUTE FUNCTION register_commit_stamp()', t || '_commit', t);
    END LOOP;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- cairn_evidence_tables as in 00016, with the tables of v18 last.
CREATE OR REPLACE FUNCTION cairn_evidence_tables() RETURNS TABLE (ord int, tbl text, key text) LANGUAGE sql IMMUTABLE
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
        (16, 'height',             'id'),
        (17, 'check_run',          'run_id'),
        (18, 'check_connection',   'run_id, seq'),
        (19, 'mark_version',       'id'),
        (20, 'mark_alias',         'id'),
        (21, 'mark_retirement',    'id'),
        (22, 'condition_photo',    'id')
    ) AS t (ord, tbl, key)
$$;
-- +goose StatementEnd

-- +goose StatementBegin
-- cairn_roles_apply as 00016 left it, with mark_version, mark_alias and
-- condition_photo inserted by cairn_recorder and mark_retirement by
-- cairn_publisher, with their sequences: edited in the function's own text.
DO $$
DECLARE
    d text := pg_get_functiondef('cairn_roles_apply()'::regprocedure);
    e text[];
BEGIN
    FOREACH e SLICE 1 IN ARRAY ARRAY[
        ARRAY[$r$'adjustment_section', 'run_held', 'check_run', 'check_connection'];$r$, $r$'adjustment_section', 'run_held', 'check_run', 'check_connection',
                                        'mark_version', 'mark_alias', 'condition_photo'];$r$],
        ARRAY[$r$'datum', 'run_event'];$r$, $r$'datum', 'run_event', 'mark_retirement'];$r$],
        ARRAY[$r$datum_id_seq, run_event_id_seq FROM PUBLIC$r$, $r$datum_id_seq, run_event_id_seq,
        mark_version_id_seq, mark_alias_id_seq, mark_retirement_id_seq, condition_photo_id_seq FROM PUBLIC$r$],
        ARRAY[$r$datum_id_seq, run_event_id_seq TO cairn_reader;$r$, $r$datum_id_seq, run_event_id_seq,
        mark_version_id_seq, mark_alias_id_seq, mark_retirement_id_seq, condition_photo_id_seq TO cairn_reader;$r$],
        ARRAY[$r$run_id_seq, adjustment_id_seq TO cairn_recorder;$r$, $r$run_id_seq, adjustment_id_seq,
        mark_version_id_seq, mark_alias_id_seq, condition_photo_id_seq TO cairn_recorder;$r$],
        ARRAY[$r$datum_id_seq, run_event_id_seq TO cairn_publisher;$r$, $r$datum_id_seq, run_event_id_seq,
        mark_retirement_id_seq TO cairn_publisher;$r$]] LOOP
        IF position(e[1] IN d) = 0 THEN
            RAISE EXCEPTION 'cairn_roles_apply lacks %: migration 00018 cannot edit it', e[1];
        END IF;
        d := replace(d, e[1], e[2]);
    END LOOP;
    EXECUTE d;
END
$$;
-- +goose StatementEnd

SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
-- cairn_roles_apply as 00016 left it: v18's edits undone.
DO $$
DECLARE
    d text := pg_get_functiondef('cairn_roles_apply()'::regprocedure);
    e text[];
BEGIN
    FOREACH e SLICE 1 IN ARRAY ARRAY[
        ARRAY[$r$'adjustment_section', 'run_held', 'check_run', 'check_connection',
                                        'mark_version', 'mark_alias', 'condition_photo'];$r$, $r$'adjustment_section', 'run_held', 'check_run', 'check_connection'];$r$],
        ARRAY[$r$'datum', 'run_event', 'mark_retirement'];$r$, $r$'datum', 'run_event'];$r$],
        ARRAY[$r$datum_id_seq, run_event_id_seq,
        mark_version_id_seq, mark_alias_id_seq, mark_retirement_id_seq, condition_photo_id_seq FROM PUBLIC$r$, $r$datum_id_seq, run_event_id_seq FROM PUBLIC$r$],
        ARRAY[$r$datum_id_seq, run_event_id_seq,
        mark_version_id_seq, mark_alias_id_seq, mark_retirement_id_seq, condition_photo_id_seq TO cairn_reader;$r$, $r$datum_id_seq, run_event_id_seq TO cairn_reader;$r$],
        ARRAY[$r$run_id_seq, adjustment_id_seq,
        mark_version_id_seq, mark_alias_id_seq, condition_photo_id_seq TO cairn_recorder;$r$, $r$run_id_seq, adjustment_id_seq TO cairn_recorder;$r$],
        ARRAY[$r$datum_id_seq, run_event_id_seq,
        mark_retirement_id_seq TO cairn_publisher;$r$, $r$datum_id_seq, run_event_id_seq TO cairn_publisher;$r$]] LOOP
        IF position(e[1] IN d) = 0 THEN
            RAISE EXCEPTION 'cairn_roles_apply lacks %: migration 00018 cannot edit it', e[1];
        END IF;
        d := replace(d, e[1], e[2]);
    END LOOP;
    EXECUTE d;
END
$$;
-- +goose StatementEnd
-- +goose StatementBegin
-- cairn_evidence_tables as 00016 made it.
CREATE OR REPLACE FUNCTION cairn_evidence_tables() RETURNS TABLE (ord int, tbl text, key text) LANGUAGE sql IMMUTABLE
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
        (16, 'height',             'id'),
        (17, 'check_run',          'run_id'),
        (18, 'check_connection',   'run_id, seq')
    ) AS t (ord, tbl, key)
$$;
-- +goose StatementEnd
DROP TRIGGER mark_no_truncate ON mark;
DROP TRIGGER mark_fixed ON mark;
DROP TRIGGER mark_name_free ON mark;
DROP TABLE condition_photo;
DROP FUNCTION condition_photo_sealed();
DROP TABLE mark_retirement;
DROP TABLE mark_alias;
DROP TABLE mark_version;
DROP FUNCTION mark_refuse_edit();
DROP FUNCTION mark_retirement_not_after_today();
DROP FUNCTION mark_retirement_check();
DROP FUNCTION mark_name_free();
DROP FUNCTION mark_version_number();
SELECT cairn_roles_apply();
