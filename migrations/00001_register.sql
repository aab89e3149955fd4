-- +goose Up
-- Schema v1 of the register: datums, marks, condition reports and the
-- append-only, hash-chained versions of published heights.
-- See docs/register.md for the reasons behind each rule.

CREATE TABLE datum (
    id         bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    code       text NOT NULL UNIQUE CHECK (code ~ '^[A-Za-z0-9][A-Za-z0-9._-]*$'),
    name       text NOT NULL CHECK (btrim(name) <> ''),
    note       text NOT NULL DEFAULT '',
    created_at timestamptz NOT NULL DEFAULT clock_timestamp()
);

CREATE TABLE mark (
    id          bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    designation text NOT NULL UNIQUE CHECK (designation ~ '^[A-Za-z0-9][A-Za-z0-9._/-]*$'),
    mark_type   text NOT NULL DEFAULT '',
    setting     text NOT NULL DEFAULT '',
    stamping    text NOT NULL DEFAULT '',
    to_reach    text NOT NULL DEFAULT '',
    -- Approximate position in decimal degrees (for finding the mark, not
    -- for computation).
    lat         double precision CHECK (lat BETWEEN -90 AND 90),
    lon         double precision CHECK (lon BETWEEN -180 AND 180),
    created_at  timestamptz NOT NULL DEFAULT clock_timestamp(),
    created_by  text NOT NULL CHECK (btrim(created_by) <> ''),
    CONSTRAINT mark_lat_lon_together CHECK ((lat IS NULL) = (lon IS NULL))
);

-- Bounding-box search for `mark list --near`: a GiST index on the built-in
-- point type (x = longitude, y = latitude) answers `<@ box` without any
-- extension.
CREATE INDEX mark_position ON mark USING gist (point(lon, lat)) WHERE lat IS NOT NULL;

CREATE TABLE mark_condition (
    id          bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    mark_id     bigint NOT NULL REFERENCES mark (id),
    condition   text NOT NULL CHECK (condition IN ('good', 'disturbed', 'destroyed', 'not-found')),
    note        text NOT NULL DEFAULT '',
    observed_on date NOT NULL,
    recorded_at timestamptz NOT NULL DEFAULT clock_timestamp(),
    recorded_by text NOT NULL CHECK (btrim(recorded_by) <> '')
);
CREATE INDEX mark_condition_latest ON mark_condition (mark_id, observed_on DESC, id DESC);

CREATE TABLE height (
    id            bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    mark_id       bigint NOT NULL REFERENCES mark (id),
    datum_id      bigint NOT NULL REFERENCES datum (id),
    -- 1, 2, 3, ... within one mark and datum; set by the trigger.
    version       integer NOT NULL,
    -- The version this one replaces. UNIQUE: a version is superseded at most
    -- once, so the versions of a mark and datum form one line.
    supersedes    bigint UNIQUE REFERENCES height (id),
    -- The value exactly as published, its unit and number of decimals.
    -- NULL value: a withdrawal.
    value         numeric,
    unit          text CHECK (unit IN ('m', 'ft', 'usft')),
    decimals      smallint CHECK (decimals BETWEEN 0 AND 6),
    class         text NOT NULL DEFAULT '',
    source_kind   text NOT NULL CHECK (source_kind IN ('authority', 'adjustment', 'datum-change', 'correction', 'withdrawal')),
    source        text NOT NULL DEFAULT '',
    -- The adjustment that produced this version (its foreign key comes with
    -- the adjustment table).
    adjustment_id bigint,
    reason        text NOT NULL CHECK (btrim(reason) <> ''),
    recorded_by   text NOT NULL CHECK (btrim(recorded_by) <> ''),
    -- Set by the trigger from clock_timestamp(), strictly after the
    -- predecessor's.
    recorded_at   timestamptz NOT NULL,
    -- sha256 of the canonical text (docs/register.md), which includes the
    -- predecessor's hash; set by the trigger.
    hash          bytea NOT NULL,
    UNIQUE (mark_id, datum_id, version),
    CONSTRAINT height_withdrawal_has_no_value CHECK ((source_kind = 'withdrawal') = (value IS NULL)),
    CONSTRAINT height_value_has_unit CHECK ((value IS NULL) = (unit IS NULL) AND (value IS NULL) = (decimals IS NULL)),
    CONSTRAINT height_value_scale CHECK (value IS NULL OR scale(value) = decimals),
    CONSTRAINT height_authority_cited CHECK (source_kind <> 'authority' OR btrim(source) <> ''),
    CONSTRAINT height_adjustment_named CHECK (source_kind <> 'adjustment' OR adjustment_id IS NOT NULL)
);
-- At most one first version per mark and datum.
CREATE UNIQUE INDEX height_first ON height (mark_id, datum_id) WHERE supersedes IS NULL;
-- As-of look-ups: the greatest recorded_at <= T.
CREATE INDEX height_as_of ON height (mark_id, datum_id, recorded_at DESC);
CREATE INDEX height_adjustment ON height (adjustment_id) WHERE adjustment_id IS NOT NULL;

-- +goose StatementBegin
-- height_canonical is the text whose sha256 is a version's hash. Every field
-- is written as "name:length:value\n" (length in bytes), so no value can be
-- mistaken for another field. cairn audit verify rebuilds it in Go.
CREATE FUNCTION height_canonical(prev_hash bytea, designation text, datum_code text, h height)
RETURNS text LANGUAGE sql IMMUTABLE AS $$
    SELECT string_agg(format('%s:%s:%s', f.name, octet_length(f.val), f.val), E'\n' ORDER BY f.ord) || E'\n'
    FROM (VALUES
        (1,  'cairn-height', '1'),
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
        (15, 'recorded_at',   to_char(h.recorded_at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"'))
    ) AS f (ord, name, val)
$$;
-- +goose StatementEnd

-- +goose StatementBegin
CREATE FUNCTION height_before_insert() RETURNS trigger LANGUAGE plpgsql AS $$
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

-- +goose StatementBegin
CREATE FUNCTION refuse_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION '% is append-only: % refused; a change is a new entry with a reason', TG_TABLE_NAME, TG_OP
        USING ERRCODE = 'CA001';
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
CREATE FUNCTION refuse_key_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_TABLE_NAME = 'mark' AND NEW.designation IS DISTINCT FROM OLD.designation THEN
        RAISE EXCEPTION 'a mark''s designation never changes (% stays %)', OLD.designation, OLD.designation
            USING ERRCODE = 'CA001';
    END IF;
    IF TG_TABLE_NAME = 'datum' AND NEW.code IS DISTINCT FROM OLD.code THEN
        RAISE EXCEPTION 'a datum''s code never changes (% stays %)', OLD.code, OLD.code
            USING ERRCODE = 'CA001';
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd

CREATE TRIGGER height_insert BEFORE INSERT ON height
    FOR EACH ROW EXECUTE FUNCTION height_before_insert();
CREATE TRIGGER height_append_only BEFORE UPDATE OR DELETE ON height
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER height_no_truncate BEFORE TRUNCATE ON height
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER mark_condition_append_only BEFORE UPDATE OR DELETE ON mark_condition
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER mark_condition_no_truncate BEFORE TRUNCATE ON mark_condition
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER mark_key BEFORE UPDATE ON mark
    FOR EACH ROW EXECUTE FUNCTION refuse_key_change();
CREATE TRIGGER datum_key BEFORE UPDATE ON datum
    FOR EACH ROW EXECUTE FUNCTION refuse_key_change();

-- +goose Down
DROP FUNCTION height_canonical(bytea, text, text, height);
DROP TABLE height;
DROP TABLE mark_condition;
DROP TABLE mark;
DROP TABLE datum;
DROP FUNCTION height_before_insert();
DROP FUNCTION refuse_change();
DROP FUNCTION refuse_key_change();
