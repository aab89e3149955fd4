-- +goose Up
-- Schema v9: names are the same name once folded, and no record is dated
-- in the future.
--
-- A mark designation or a datum code is unique by its folded form:
-- lower(normalize(x, NFKC)), so TC-0412, tc-0412 and the fullwidth
-- ＴＣ-0412 are one name. (cairn folds with NFKC and Unicode case folding,
-- internal/names; the designations the schema allows are ASCII, where the
-- two agree.) A register that already holds two names of one folded form
-- is not migrated: the migration stops and lists them. It never merges
-- marks or datums; which of the two is right is for a person to decide.
--
-- A condition report and a run may not be dated after the last date that
-- is today somewhere on Earth (UTC+14): the database does not know the
-- writer's time zone, so it refuses only what is in the future everywhere.
-- cairn itself refuses, before writing, a date after the machine's date.

-- +goose StatementBegin
DO $$
DECLARE
    marks  text;
    datums text;
BEGIN
    SELECT string_agg(names, '; ' ORDER BY names) INTO marks FROM (
        SELECT string_agg(designation, ' = ' ORDER BY designation) AS names
        FROM mark GROUP BY lower(normalize(designation, NFKC)) HAVING count(*) > 1) AS c;
    SELECT string_agg(codes, '; ' ORDER BY codes) INTO datums FROM (
        SELECT string_agg(code, ' = ' ORDER BY code) AS codes
        FROM datum GROUP BY lower(normalize(code, NFKC)) HAVING count(*) > 1) AS c;
    IF marks IS NOT NULL OR datums IS NOT NULL THEN
        RAISE EXCEPTION 'schema v9 (names unique once case and character forms are folded) cannot be applied: %',
            concat_ws('; ', 'marks ' || marks, 'datums ' || datums)
            USING ERRCODE = 'CA008',
                  DETAIL = 'each group is one name written in more than one way; the register holds each name once',
                  HINT = 'decide which record of each group is the right one and rename or remove the other (in SQL, as the owner of the database), then migrate again; cairn never merges them';
    END IF;
END
$$;
-- +goose StatementEnd

CREATE UNIQUE INDEX mark_designation_folded ON mark (lower(normalize(designation, NFKC)));
CREATE UNIQUE INDEX datum_code_folded ON datum (lower(normalize(code, NFKC)));

-- +goose StatementBegin
-- not_after_today refuses a record whose date (column observed_on) has not
-- come yet anywhere on Earth.
CREATE FUNCTION not_after_today() RETURNS trigger LANGUAGE plpgsql
SET search_path = pg_catalog, public, pg_temp AS $$
DECLARE
    latest date := (statement_timestamp() AT TIME ZONE 'Etc/GMT-14')::date;
BEGIN
    IF NEW.observed_on > latest THEN
        RAISE EXCEPTION '%: observed on % is in the future (it is % at the most anywhere today)',
            TG_TABLE_NAME, NEW.observed_on, latest
            USING ERRCODE = 'CA009', COLUMN = 'observed_on', TABLE = TG_TABLE_NAME;
    END IF;
    RETURN NEW;
END
$$;
-- +goose StatementEnd

CREATE TRIGGER mark_condition_not_after_today BEFORE INSERT ON mark_condition
    FOR EACH ROW EXECUTE FUNCTION not_after_today();
CREATE TRIGGER run_not_after_today BEFORE INSERT ON run
    FOR EACH ROW EXECUTE FUNCTION not_after_today();
REVOKE ALL ON FUNCTION not_after_today() FROM PUBLIC;

-- +goose Down
DROP TRIGGER run_not_after_today ON run;
DROP TRIGGER mark_condition_not_after_today ON mark_condition;
DROP FUNCTION not_after_today();
DROP INDEX datum_code_folded;
DROP INDEX mark_designation_folded;
