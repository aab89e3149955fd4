-- +goose Up
-- Placeholder until the schema of datums, marks and heights lands.
CREATE TABLE cairn_meta (key text PRIMARY KEY, value text NOT NULL);

-- +goose Down
DROP TABLE cairn_meta;
