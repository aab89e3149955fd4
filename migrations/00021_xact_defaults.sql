-- +goose Up
-- Schema v21: created_xid's default without a function call per row.
-- Since v14 every row's created_xid defaulted to cairn_xact(), a SQL
-- function with a fixed search_path: PostgreSQL calls such a function
-- row by row with its settings saved and restored, about 4 µs a row, which
-- made recording a 20 000-setup book some 0.2 s slower. From v21 the
-- default is the expression itself, the server's id plus the register's
-- base in this cluster written as a constant: a default is stored parsed,
-- its functions and casts resolved, so no search path can change it.
-- cairn_xact_defaults() writes it on every table of the evidence;
-- cairn_cluster_carry() calls it whenever it writes a new base, and a
-- migration that adds a table to the evidence calls it too.
-- cairn_xact() stays, for the seals and the commit stamp, from the same
-- base.

-- +goose StatementBegin
CREATE FUNCTION cairn_xact_defaults() RETURNS void LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    base bigint := coalesce((SELECT c.xact_base FROM public.register_cluster c ORDER BY c.id DESC LIMIT 1), 0);
    t    text;
BEGIN
    FOR t IN SELECT tbl FROM cairn_evidence_tables() LOOP
        EXECUTE format('ALTER TABLE public.%I ALTER COLUMN created_xid SET DEFAULT '
                       '(((pg_catalog.pg_current_xact_id())::text)::bigint + %s)::text::xid8', t, base);
    END LOOP;
END
$$;
-- +goose StatementEnd

-- +goose StatementBegin
DO $$
DECLARE
    d text := pg_get_functiondef('cairn_cluster_carry()'::regprocedure);
BEGIN
    IF position(E'    RETURN true;\nEND' IN d) = 0 THEN
        RAISE EXCEPTION 'cairn_cluster_carry is not as 00014 made it: migration 00021 cannot edit it';
    END IF;
    EXECUTE replace(d, E'    RETURN true;\nEND', E'    PERFORM cairn_xact_defaults();\n    RETURN true;\nEND');
END
$$;
-- +goose StatementEnd

SELECT cairn_xact_defaults();
SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
DO $$
DECLARE
    t text;
BEGIN
    EXECUTE replace(pg_get_functiondef('cairn_cluster_carry()'::regprocedure),
        E'    PERFORM cairn_xact_defaults();\n    RETURN true;\nEND', E'    RETURN true;\nEND');
    FOR t IN SELECT tbl FROM cairn_evidence_tables() LOOP
        EXECUTE format('ALTER TABLE public.%I ALTER COLUMN created_xid SET DEFAULT cairn_xact()', t);
    END LOOP;
END
$$;
-- +goose StatementEnd
DROP FUNCTION cairn_xact_defaults();
