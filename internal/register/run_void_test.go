package register_test

import (
	"crypto/sha256"
	"encoding/json"
	"errors"
	"strings"
	"testing"

	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/levelbook"
	"cairn/internal/register"
	"cairn/internal/store"
)

// storeAsBeforeFingerprints stores book as a run was stored before schema
// v6: its row without an observations fingerprint, and its sightings, in
// one transaction (a run is sealed once its transaction ends).
func storeAsBeforeFingerprints(t *testing.T, pool *pgxpool.Pool, name string, data []byte) int64 {
	t.Helper()
	ctx := t.Context()
	db, err := pool.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer func() { _ = db.Rollback(ctx) }()
	book, err := levelbook.Parse(name, data)
	if err != nil {
		t.Fatal(err)
	}
	meta, err := json.Marshal(book.Meta)
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256Sum(data)
	id, err := store.RunInsert(ctx, db, store.RunInsertParams{Name: book.Meta.Run, Unit: string(book.Meta.Unit), Meta: meta,
		FileName: name, Book: data, BookSHA256: sum, RecordedBy: "before v6"})
	if err != nil {
		t.Fatal(err)
	}
	gs := make([]store.Sighting, len(book.Sightings))
	for i, s := range book.Sightings {
		g := store.Sighting{Seq: i + 1, Line: s.Line, Point: s.Point, Sight: string(s.Sight), TurningPoint: s.TurningPoint,
			Middle: s.Middle, DistanceFrom: string(s.DistanceFrom), Note: s.Note}
		if s.ThreeWire {
			u, l := s.Upper, s.Lower
			g.Upper, g.Lower = &u, &l
		}
		if s.HasDistance() {
			d := s.Distance
			g.Distance = &d
		}
		gs[i] = g
	}
	if _, err := store.SightingCopy(ctx, db, store.SightingCopyParams{RunID: id, Sightings: gs}); err != nil {
		t.Fatal(err)
	}
	if err := db.Commit(ctx); err != nil {
		t.Fatal(err)
	}
	return id
}

// A run recorded before observations were fingerprinted (no fingerprint
// stored) still holds its observations: a book of the same observations
// is refused, naming it, found by recomputing its fingerprint from its
// stored sightings; a book of other observations with as many sightings is
// recorded; once the old run is voided, its observations may be recorded.
func TestRecordComparesRunsBeforeFingerprints(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	old := storeAsBeforeFingerprints(t, b.DB.Pool, "harbour-1999.csv", []byte(loopBook))
	run, err := b.Reg.Run(b.Ctx, old)
	if err != nil {
		t.Fatal(err)
	}
	if run.Run.ObservationsSHA256 != nil {
		t.Fatalf("the old run has a fingerprint: %x", run.Run.ObservationsSHA256)
	}
	crlf := []byte(strings.ReplaceAll(loopBook, "\n", "\r\n"))
	before := b.Counts(t)
	_, err = b.Reg.Record(b.Ctx, params("harbour.csv", crlf))
	var soe *register.SameObservationsError
	if !errors.As(err, &soe) || soe.Run.ID != old {
		t.Fatalf("error %v, want the same observations as run %d", err, old)
	}
	if !strings.HasPrefix(err.Error(), "harbour.csv holds the same observations as run 1 (from harbour-1999.csv, recorded ") {
		t.Errorf("message %q", err)
	}
	b.AssertNothingWritten(t, before)

	other := strings.Replace(loopBook, "TC-0415,BS,1.450,1.300,1.150", "TC-0415,BS,1.451,1.301,1.151", 1)
	if _, err := b.Reg.Record(b.Ctx, params("harbour-other.csv", []byte(other))); err != nil {
		t.Errorf("other observations: %v", err)
	}

	if _, err := b.Reg.VoidRun(b.Ctx, register.VoidRunParams{RunID: old, Reason: "superseded by the rerun", By: "P. Senior"}); err != nil {
		t.Fatal(err)
	}
	rec, err := b.Reg.Record(b.Ctx, params("harbour.csv", crlf))
	if err != nil {
		t.Fatalf("after the void: %v", err)
	}
	if got := (*[32]byte)(rec.Run.ObservationsSHA256); got == nil || *got != mustParse(t, loopBook).ObservationsSHA256() {
		t.Errorf("stored fingerprint %x", rec.Run.ObservationsSHA256)
	}
}

// VoidRun wants a reason and who, voids once, and says which runs are
// voided.
func TestVoidRun(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	rec, err := b.Reg.Record(b.Ctx, params("harbour.csv", []byte(loopBook)))
	if err != nil {
		t.Fatal(err)
	}
	id := rec.Run.ID
	before := b.Counts(t)
	for _, c := range []struct {
		p     register.VoidRunParams
		field string
	}{
		{register.VoidRunParams{RunID: id, Reason: " ", By: "P. Senior"}, "reason"},
		{register.VoidRunParams{RunID: id, Reason: "wrong rod", By: ""}, "by"},
		{register.VoidRunParams{RunID: id + 1, Reason: "wrong rod", By: "P. Senior"}, "run"},
	} {
		var ie *register.InputError
		if _, err := b.Reg.VoidRun(b.Ctx, c.p); !errors.As(err, &ie) || ie.Field != c.field {
			t.Errorf("%+v: error %v, want one naming %s", c.p, err, c.field)
		}
	}
	b.AssertNothingWritten(t, before)
	voids, err := b.Reg.VoidedRuns(b.Ctx, []int64{id})
	if err != nil || len(voids) != 0 {
		t.Fatalf("voided before the void: %v %v", voids, err)
	}
	run, err := b.Reg.VoidRun(b.Ctx, register.VoidRunParams{RunID: id, Reason: " wrong rod ", By: "P. Senior"})
	if err != nil || run.Voided == nil || run.Voided.Reason != "wrong rod" || run.Voided.RecordedBy != "P. Senior" {
		t.Fatalf("void: %+v, %v", run.Voided, err)
	}
	b.AssertWrote(t, before, map[string]int64{"run_event": 1, "register_commit": 1})
	before = b.Counts(t)
	var ie *register.InputError
	if _, err := b.Reg.VoidRun(b.Ctx, register.VoidRunParams{RunID: id, Reason: "again", By: "P. Senior"}); !errors.As(err, &ie) ||
		ie.Field != "run" || !strings.Contains(ie.Msg, "is voided already") || !strings.Contains(ie.Msg, "by P. Senior: wrong rod") {
		t.Errorf("voided twice: %v", err)
	}
	b.AssertNothingWritten(t, before)
	voids, err = b.Reg.VoidedRuns(b.Ctx, []int64{id, id + 1})
	if err != nil || len(voids) != 1 || voids[id].Reason != "wrong rod" {
		t.Errorf("voided runs %+v, %v", voids, err)
	}
	// The void is history: the database refuses to change or remove it.
	for _, sql := range []string{"UPDATE run_event SET reason = 'x'", "DELETE FROM run_event", "TRUNCATE run_event"} {
		if _, err := b.DB.Pool.Exec(b.Ctx, sql); err == nil || !strings.Contains(err.Error(), "append-only") {
			t.Errorf("%s: %v, want the append-only refusal", sql, err)
		}
	}
}

func sha256Sum(b []byte) []byte {
	s := sha256.Sum256(b)
	return s[:]
}

func mustParse(t *testing.T, book string) *levelbook.Book {
	t.Helper()
	b, err := levelbook.Parse("b.csv", []byte(book))
	if err != nil {
		t.Fatal(err)
	}
	return b
}
