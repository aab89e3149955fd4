-- +goose Up
-- Schema v24: indexes for look-ups that must stay right and quick on a
-- national register (issue 15).
--
-- mark_designation_hint: "did you mean" (register.didYouMean) compares the
-- folded designation (lower(normalize(designation, NFKC)), as in 00009)
-- with its punctuation (- _ . /) left out. It reads the candidates by
-- prefix ranges of that key in byte order (COLLATE "C", whatever the
-- database's collation), so that every designation whose key starts with
-- what was typed is found, at any size of the register.
CREATE INDEX mark_designation_hint ON mark
    ((translate(lower(normalize(designation, NFKC)), '-_./', '') COLLATE "C"));

-- +goose Down
DROP INDEX mark_designation_hint;
