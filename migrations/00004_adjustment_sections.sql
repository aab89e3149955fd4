-- +goose Up
-- Schema v4: the outcome of each section in a least-squares adjustment. A
-- network adjustment gives every observed section a residual, its standard
-- deviation and Baarda's standardized residual; the draft keeps them, so
-- that the report (flagged sections with their runs and book lines) can be
-- shown again exactly. Written once with the draft, never changed.
-- (run_id, seq) names a row of section; there is no foreign key to it, so
-- that TRUNCATE of section still meets section's own refusal first
-- (sections are append-only, so the row never goes away).

CREATE TABLE adjustment_section (
    adjustment_id bigint NOT NULL REFERENCES adjustment (id),
    run_id        bigint NOT NULL,
    seq           integer NOT NULL,
    -- v = adjusted minus observed height difference, in metres.
    residual_m    double precision NOT NULL,
    -- σ₀·√q_vv, in metres (the a-priori standard deviation of v).
    residual_sd_m double precision NOT NULL CHECK (residual_sd_m >= 0),
    -- Baarda's w = v / (σ₀·√q_vv); NULL when the section has no redundancy
    -- (a spur or a bridge of the network) and cannot be tested.
    w             double precision,
    -- |w| over the adjustment's critical value of data snooping.
    flagged       boolean NOT NULL,
    PRIMARY KEY (adjustment_id, run_id, seq),
    FOREIGN KEY (adjustment_id, run_id) REFERENCES adjustment_run (adjustment_id, run_id),
    CONSTRAINT adjustment_section_w CHECK (w IS NOT NULL OR NOT flagged)
);

CREATE TRIGGER adjustment_section_append_only BEFORE UPDATE OR DELETE ON adjustment_section
    FOR EACH ROW EXECUTE FUNCTION refuse_change();
CREATE TRIGGER adjustment_section_no_truncate BEFORE TRUNCATE ON adjustment_section
    FOR EACH STATEMENT EXECUTE FUNCTION refuse_change();

-- +goose Down
DROP TABLE adjustment_section;
