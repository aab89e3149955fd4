-- +goose Up
-- Schema v23: the whole life of a mark in the import's layout.
-- An import (00019) took each mark with one description, its aliases in
-- one column and no photographs, so an export of a register whose marks
-- were edited, named by other agencies with notes, or photographed lost
-- that part of their life on the way back in. From v23 the layout has
-- descriptions.csv (every later version of a mark's description, in
-- order), aliases.csv (each alias with its note and who recorded it),
-- photos.csv with the photographs' files (each tied to a condition report
-- by the report's ref, a name within the files), and a retirement's own
-- "by". Their staging tables follow 00019's: unlogged, in cairn_staging,
-- keyed by the importing transaction, empty between imports.

ALTER TABLE cairn_staging.import_mark ADD COLUMN retired_by text NOT NULL DEFAULT '';
ALTER TABLE cairn_staging.import_condition ADD COLUMN ref text NOT NULL DEFAULT '';

CREATE UNLOGGED TABLE cairn_staging.import_description (
    import_xid      xid8 NOT NULL DEFAULT pg_current_xact_id(),
    line            bigint NOT NULL,
    mark            text NOT NULL,
    folded          text NOT NULL,
    mark_type       text NOT NULL,
    setting         text NOT NULL,
    stamping        text NOT NULL,
    directions      text NOT NULL,
    description     text NOT NULL,
    lat             double precision,
    lon             double precision,
    position_source text NOT NULL,
    reason          text NOT NULL,
    by              text NOT NULL
);
CREATE INDEX ON cairn_staging.import_description (import_xid);
CREATE UNLOGGED TABLE cairn_staging.import_alias (
    import_xid xid8 NOT NULL DEFAULT pg_current_xact_id(),
    line       bigint NOT NULL,
    mark       text NOT NULL,
    folded     text NOT NULL,
    alias      text NOT NULL,
    alias_folded text NOT NULL,
    kind       text NOT NULL,
    agency     text NOT NULL,
    note       text NOT NULL,
    by         text NOT NULL
);
CREATE INDEX ON cairn_staging.import_alias (import_xid);
CREATE UNLOGGED TABLE cairn_staging.import_photo (
    import_xid xid8 NOT NULL DEFAULT pg_current_xact_id(),
    line       bigint NOT NULL,
    condition  text NOT NULL,
    view       text NOT NULL,
    media_type text NOT NULL,
    file_name  text NOT NULL,
    content    bytea NOT NULL,
    sha256     bytea NOT NULL,
    by         text NOT NULL
);
CREATE INDEX ON cairn_staging.import_photo (import_xid);

-- +goose StatementBegin
-- cairn_roles_apply as in 00019, with the new staging tables for the
-- publisher, edited in the function's own text.
DO $$
DECLARE
    d text := pg_get_functiondef('cairn_roles_apply()'::regprocedure);
BEGIN
    IF position($r$cairn_staging.import_height TO cairn_publisher;$r$ IN d) = 0 THEN
        RAISE EXCEPTION 'cairn_roles_apply is not as 00019 made it: migration 00023 cannot add its tables';
    END IF;
    d := replace(d, $r$cairn_staging.import_height TO cairn_publisher;$r$,
        $r$cairn_staging.import_height, cairn_staging.import_description, cairn_staging.import_alias, cairn_staging.import_photo TO cairn_publisher;$r$);
    EXECUTE d;
END
$$;
-- +goose StatementEnd

SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
DO $$
BEGIN
    EXECUTE replace(pg_get_functiondef('cairn_roles_apply()'::regprocedure),
        $r$cairn_staging.import_height, cairn_staging.import_description, cairn_staging.import_alias, cairn_staging.import_photo TO cairn_publisher;$r$,
        $r$cairn_staging.import_height TO cairn_publisher;$r$);
END
$$;
-- +goose StatementEnd
DROP TABLE cairn_staging.import_description, cairn_staging.import_alias, cairn_staging.import_photo;
ALTER TABLE cairn_staging.import_condition DROP COLUMN ref;
ALTER TABLE cairn_staging.import_mark DROP COLUMN retired_by;
SELECT cairn_roles_apply();
