package register_test

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
	"cairn/internal/standards"
	"cairn/internal/store"
)

// A recorded run keeps the profile that judged it: a built-in by name and
// edition, an office's file by its SHA-256 and its bytes; audit verify
// derives the run again with the stored profile and finds nothing.
func TestRecordKeepsStandards(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	rec, err := b.Reg.Record(b.Ctx, params("harbour.csv", []byte(loopBook)))
	if err != nil {
		t.Fatal(err)
	}
	if s := rec.Run.Standards; s.Profile != standards.FGCC1984 || s.Version != "2" || s.File != nil || !strings.Contains(s.Source, "1984") {
		t.Errorf("default profile stored as %+v", s)
	}

	// The book names the office's file, read from the book's directory.
	dir := t.TempDir()
	data, err := os.ReadFile("../../testdata/standards/tallis-county.std")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "tallis-county.std"), data, 0o644); err != nil {
		t.Fatal(err)
	}
	book := strings.Replace(loopBook, "# class: third\n", "# class: third\n# standards: tallis-county.std\n", 1)
	book = strings.Replace(book, "TC-0412,FS,1.651,1.501,1.351,", "TC-0412,FS,1.652,1.502,1.352,", 1)
	p := params(filepath.Join(dir, "harbour2.csv"), []byte(book))
	rec2, err := b.Reg.Record(b.Ctx, p)
	if err != nil {
		t.Fatal(err)
	}
	s := rec2.Run.Standards
	if s.Profile != "tallis-county" || !strings.HasPrefix(s.Version, "sha256:") || string(s.File) != string(data) {
		t.Errorf("office profile stored as %+v", s)
	}
	if rec2.Result.Standards.Name != "tallis-county" {
		t.Errorf("reduction judged by %+v", rec2.Result.Standards)
	}
	got, err := b.Reg.Run(b.Ctx, rec2.Run.ID)
	if err != nil || got.Run.Standards.Version != s.Version {
		t.Errorf("run %d read back: %+v, %v", rec2.Run.ID, got.Run.Standards, err)
	}
	rep, err := b.Reg.AuditVerify(b.Ctx)
	if err != nil || rep.Count() != 0 {
		t.Errorf("audit: %v, %+v", err, rep)
	}
	ev, err := b.Reg.EvidenceVerify(b.Ctx, nil)
	if err != nil || len(ev.Breaks) != 0 || ev.Rows["run"] != 2 {
		t.Errorf("evidence: %v, %+v", err, ev)
	}
}

// A profile that cannot be read refuses the book, naming the file, line
// and field, and writes nothing.
func TestRecordBadStandardsFile(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "office.std"), []byte("cairn-standards: 1\nprofile: o\nsource: s\nclass,loop_mm_sqrt_km\nthird,12\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	before := b.Counts(t)
	book := strings.Replace(loopBook, "# class: third\n", "# standards: office.std\n", 1)
	_, err := b.Reg.Record(b.Ctx, params(filepath.Join(dir, "b.csv"), []byte(book)))
	if err == nil || !strings.Contains(err.Error(), "office.std:4: section_mm_sqrt_km: missing column") {
		t.Errorf("error %v", err)
	}
	assertNothingRecorded(t, b, before)
}

// A run recorded before schema v15 keeps the canonical text its commit's
// digest was made of: the standards columns, NULL on it, are left out, and
// the commit chain verifies after the migration.
func TestRunBeforeStandardsVerifies(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	if err := store.MigrateTo(ctx, db.Pool, 13); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Pool.Exec(ctx, `INSERT INTO run (unit, file_name, book, book_sha256, recorded_by, checks_failed)
		VALUES ('m', 'old.csv', '\x00'::bytea, sha256('\x00'::bytea), 'test', 0)`); err != nil {
		t.Fatal(err)
	}
	if err := store.Migrate(ctx, db.Pool); err != nil {
		t.Fatal(err)
	}
	b := registertest.On(t, db)
	rep, err := b.Reg.AuditVerify(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range rep.Findings {
		if f.Kind != "book" { // the row has no sightings to derive
			t.Errorf("finding after the migration: %+v", f)
		}
	}
	if len(rep.Breaks) != 0 {
		t.Errorf("breaks: %+v", rep.Breaks)
	}
	// The rows read by plain SELECTs, and the database's own manifest,
	// give every commit's digest as stamped.
	ev, err := b.Reg.EvidenceVerify(ctx, nil)
	if err != nil || len(ev.Breaks) != 0 || ev.Rows["run"] != 1 {
		t.Errorf("evidence after the migration: %v, %+v", err, ev)
	}
	var bad int
	if err := db.Pool.QueryRow(ctx, `SELECT count(*) FROM register_commit
		WHERE digest <> sha256(convert_to(cairn_commit_manifest(CASE WHEN seq = 0 THEN NULL ELSE xid END), 'UTF8'))`).Scan(&bad); err != nil || bad != 0 {
		t.Errorf("%d commits whose manifest the database no longer makes again (%v)", bad, err)
	}
	run, err := store.RunGet(ctx, db.Pool, 1)
	if err != nil || run.Standards.Profile != "" {
		t.Errorf("old run: %+v, %v", run.Standards, err)
	}
}
