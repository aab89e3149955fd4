-- +goose Up
-- Schema v25: a publication's versions written at less cost a row
-- (issue 15: a 50,000-version publication spent most of its insert in the
-- height table's triggers).
--
-- height_before_insert reads the chain's latest version whole in its one
-- probe of the key (it probed for the id, then read the row by it), and
-- writes the canonical text by concatenation instead of a call of
-- height_canonical_v2 (a SQL function with its own search_path, never
-- inlined) and string_agg over format() of a VALUES list. The text is
-- the same byte for byte, layout 2 and layout 3 alike: each line
-- "name:length:value", a NULL value written as format's %s writes it,
-- empty with an empty length (the audit recomputes every hash in Go:
-- register.heightCanonical).
--
-- height_from_adjustment's checks (the adjustment published in this
-- transaction, a result of it for each version) run once for the
-- statement's rows, over its transition table, not once a row: the same
-- refusals with the same codes, for the first offending adjustment or
-- row; the statement, and so the transaction, is refused whole either
-- way.
--
-- sighting_side indexes the side shots on marks (below).
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

-- The checks of height_from_adjustment, once for the statement's rows.
-- +goose StatementBegin
CREATE FUNCTION height_from_adjustment_rows() RETURNS trigger LANGUAGE plpgsql
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

DROP TRIGGER height_adjustment ON height;
CREATE TRIGGER height_adjustment AFTER INSERT ON height REFERENCING NEW TABLE AS added
    FOR EACH STATEMENT EXECUTE FUNCTION height_from_adjustment_rows();

-- The sightings a draft reads books again for (side shots on marks:
-- register.sidesOfRuns), by run: a probe a run, where the runs' books
-- were all read and parsed (2.7 s of a draft of 3,020 runs).
CREATE INDEX sighting_side ON sighting (run_id) WHERE sight = 'IS' AND NOT turning_point AND NOT spot;

SELECT cairn_roles_apply();

-- +goose Down
DROP INDEX sighting_side;
DROP TRIGGER height_adjustment ON height;
CREATE TRIGGER height_adjustment BEFORE INSERT ON height
    FOR EACH ROW EXECUTE FUNCTION height_from_adjustment();
DROP FUNCTION height_from_adjustment_rows();

-- +goose StatementBegin
-- height_before_insert as 00017 made it.
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
