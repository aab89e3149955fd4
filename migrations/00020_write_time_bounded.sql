-- +goose Up
-- Schema v20: a transaction's write time cannot be given by its writer.
-- cairn_write_time (00012) keeps the time in the transaction-local setting
-- cairn.write_time; any session may set that setting itself, so until
-- v20 a writer could run SET LOCAL cairn.write_time = '2099-01-01' and
-- stamp its rows with a time of its choosing. From v20 a kept time is used
-- only when it lies within the transaction itself: not before the
-- transaction began (now()) and not after the server's clock
-- (clock_timestamp()); anything else is refused (SQLSTATE CA012, the
-- clock's code). An import that writes several versions of one chain
-- moves the time on within those bounds (docs/import.md).

-- +goose StatementBegin
CREATE OR REPLACE FUNCTION cairn_write_time() RETURNS timestamptz LANGUAGE plpgsql VOLATILE
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    s text := current_setting('cairn.write_time', true);
    t timestamptz;
BEGIN
    IF s IS NOT NULL AND s <> '' THEN
        t := s::timestamp AT TIME ZONE 'UTC';
        IF t < now() OR t > clock_timestamp() THEN
            RAISE EXCEPTION 'the write time % kept in cairn.write_time is not within this transaction (begun %): a write time is the server''s, never given; nothing was written',
                s, to_char(now() AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US')
                USING ERRCODE = 'CA012';
        END IF;
        RETURN t;
    END IF;
    t := clock_timestamp();
    PERFORM set_config('cairn.write_time', to_char(t AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US'), true);
    RETURN t;
END
$$;
-- +goose StatementEnd

SELECT cairn_roles_apply();

-- +goose Down
-- +goose StatementBegin
CREATE OR REPLACE FUNCTION cairn_write_time() RETURNS timestamptz LANGUAGE plpgsql VOLATILE
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    s text := current_setting('cairn.write_time', true);
    t timestamptz;
BEGIN
    IF s IS NOT NULL AND s <> '' THEN
        RETURN s::timestamp AT TIME ZONE 'UTC';
    END IF;
    t := clock_timestamp();
    PERFORM set_config('cairn.write_time', to_char(t AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US'), true);
    RETURN t;
END
$$;
-- +goose StatementEnd
SELECT cairn_roles_apply();
