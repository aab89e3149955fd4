-- +goose Up
-- Schema v3: adjustments. An adjustment is made once, whole, as a draft: the
-- method and its parameters, the runs it used, the exact height versions it
-- held, its statistics, and one result per mark. None of it ever changes.
-- Its status moves on by events: one `published` or `discarded` event, at
-- most, with its reason, who and when. A published adjustment's new height
-- versions name it, and the database checks that each one carries exactly
-- the value of the adjustment's result for its mark.

CREATE TABLE adjustment (
    id          bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    method      text NOT NULL CHECK (method IN ('proportional', 'least-squares')),
    -- Every result is a height on this datum.
    datum_id    bigint NOT NULL REFERENCES datum (id),
    -- The method's settings (distribution, unit, decimals, class, ...).
    parameters  jsonb NOT NULL DEFAULT '{}',
    -- Misclosures against their allowables, variance factor, ...: whatever
    -- the method reports, as the report showed it.
    statistics  jsonb NOT NULL DEFAULT '{}',
    -- Why held marks whose latest condition report is disturbed, destroyed
    -- or not found were held anyway; NULL when none was.
    condition_reason text CHECK (condition_reason IS NULL OR btrim(condition_reason) <> ''),
    created_by  text NOT NULL CHECK (btrim(created_by) <> ''),
    created_at  timestamptz NOT NULL DEFAULT clock_timestamp()
);

CREATE TABLE adjustment_run (
    adjustment_id bigint NOT NULL REFERENCES adjustment (id),
    run_id        bigint NOT NULL REFERENCES run (id),
    PRIMARY KEY (adjustment_id, run_id)
);
CREATE INDEX adjustment_run_run ON adjustment_run (run_id);

-- The versions held fixed, exactly as they were current when the draft was
-- made; one per mark.
CREATE TABLE adjustment_held (
    adjustment_id bigint NOT NULL REFERENCES adjustment (id),
    height_id     bigint NOT NULL REFERENCES height (id),
    mark_id       bigint NOT NULL REFERENCES mark (id),
    -- The mark's latest condition report when the draft was made (NULL if
    -- it had none).
    condition_id  bigint REFERENCES mark_condition (id),
    PRIMARY KEY (adjustment_id, height_id),
    UNIQUE (adjustment_id, mark_id)
);
CREATE INDEX adjustment_held_height ON adjustment_held (height_id);

-- One row per mark the adjustment reached. Held marks have no value of
-- their own to publish. The numbers a method does not give are NULL (a
-- least-squares adjustment has no "computed" height; a proportional one
-- has no standard deviation).
CREATE TABLE adjustment_result (
    adjustment_id bigint NOT NULL REFERENCES adjustment (id),
    mark_id       bigint NOT NULL REFERENCES mark (id),
    -- Order of the marks in the report.
    seq           integer NOT NULL CHECK (seq >= 1),
    held          boolean NOT NULL,
    computed_m    double precision,
    correction_m  double precision,
    -- Unrounded, in metres.
    adjusted_m    double precision NOT NULL,
    sigma_m       double precision CHECK (sigma_m >= 0),
    -- The height to publish, rounded, exactly as it will be published.
    value         numeric,
    unit          text CHECK (unit IN ('m', 'ft', 'usft')),
    decimals      smallint CHECK (decimals BETWEEN 0 AND 6),
    class         text NOT NULL DEFAULT '',
    -- The version current when the draft was made, which publishing
    -- replaces; NULL when the mark had no height on the datum.
    replaces      bigint REFERENCES height (id),
    PRIMARY KEY (adjustment_id, mark_id),
    UNIQUE (adjustment_id, seq),
    CONSTRAINT adjustment_result_value CHECK (held = (value IS NULL)),
    CONSTRAINT adjustment_result_unit CHECK ((value IS NULL) = (unit IS NULL) AND (value IS NULL) = (decimals IS NULL)),
    CONSTRAINT adjustment_result_scale CHECK (value IS NULL OR scale(value) = decimals)
);

-- A change of status: at most one per adjustment, and final.
CREATE TABLE adjustment_event (
    id            bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    adjustment_id bigint NOT NULL UNIQUE REFERENCES adjustment (id),
    status        text NOT NULL CHECK (status IN ('published', 'discarded')),
    reason        text NOT NULL CHECK (btrim(reason) <> ''),
    recorded_by   text NOT NULL CHECK (btrim(recorded_by) <> ''),
    recorded_at   timestamptz NOT NULL DEFAULT clock_timestamp()
);

ALTER TABLE height ADD CONSTRAINT height_adjustment_fk FOREIGN KEY (adjustment_id) REFERENCES adjustment (id);

-- +goose StatementBegin
-- A version that names an adjustment must come from that adjustment once
-- published: same datum, and the value, unit and decimals of its result for
-- the mark.
CREATE FUNCTION height_from_adjustment() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF NEW.adjustment_id IS NULL THEN
        RETURN NEW;
    END IF;
    IF NOT EXISTS (SELECT 1 FROM adjustment_event e WHERE e.adjustment_id = NEW.adjustment_id AND e.status = 'published') THEN
        RAISE EXCEPTION 'adjustment % is not published: no height may cite it', NEW.adjustment_id
            USING ERRCODE = 'CA003';
    END IF;
    IF NOT EXISTS (SELECT 1 FROM adjustment a JOIN adjustment_result r ON r.adjustment_id = a.id
                    WHERE a.id = NEW.adjustment_id AND a.datum_id = NEW.datum_id AND r.mark_id = NEW.mark_id
                      AND NOT r.held AND r.value = NEW.value AND r.unit = NEW.unit AND r.decimals = NEW.decimals) THEN
        RAISE EXCEPTION 'adjustment % has no result % % for this mark and datum', NEW.adjustment_id, NEW.value, NEW.unit
            USING ERRCODE = 'CA003';
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd

CREATE TRIGGER height_adjustment BEFORE INSERT ON height
    FOR EACH ROW EXECUTE FUNCTION height_from_adjustment();

CREATE TRIGGER adjustment_append_only BEFORE UPDATE OR DELETE ON adjustment
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER adjustment_no_truncate BEFORE TRUNCATE ON adjustment
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER adjustment_run_append_only BEFORE UPDATE OR DELETE ON adjustment_run
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER adjustment_run_no_truncate BEFORE TRUNCATE ON adjustment_run
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER adjustment_held_append_only BEFORE UPDATE OR DELETE ON adjustment_held
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER adjustment_held_no_truncate BEFORE TRUNCATE ON adjustment_held
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER adjustment_result_append_only BEFORE UPDATE OR DELETE ON adjustment_result
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER adjustment_result_no_truncate BEFORE TRUNCATE ON adjustment_result
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();
CREATE TRIGGER adjustment_event_append_only BEFORE UPDATE OR DELETE ON adjustment_event
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER adjustment_event_no_truncate BEFORE TRUNCATE ON adjustment_event
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();

-- +goose Down
DROP TRIGGER height_adjustment ON height;
DROP FUNCTION height_from_adjustment();
ALTER TABLE height DROP CONSTRAINT height_adjustment_fk;
DROP TABLE adjustment_event;
DROP TABLE adjustment_result;
DROP TABLE adjustment_held;
DROP TABLE adjustment_run;
DROP TABLE adjustment;
