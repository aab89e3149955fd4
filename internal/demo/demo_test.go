package demo

import (
	"context"
	"crypto/sha256"
	"os"
	"testing"
	"time"

	"cairn/internal/pgtest"
	"cairn/internal/register"
	"cairn/internal/store"
)

// The demo's adjustment publishes TC-0415 from the north loop, and its trace
// leads to the book's SHA-256 (computed here from the file) and to the
// outside citation of the held TC-0412.
func TestDemoAdjustmentTrace(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	r := register.New(pgtest.New(t).Pool)
	for _, s := range Steps {
		if s.Name == "adjustments" {
			continue
		}
		if err := s.Run(ctx, r); err != nil {
			t.Fatalf("demo %s: %v", s.Name, err)
		}
	}
	book, err := os.ReadFile("../../testdata/books/tallis-north-loop.csv")
	if err != nil {
		t.Fatal(err)
	}
	runs, err := r.RunList(ctx, register.RunListParams{})
	if err != nil {
		t.Fatal(err)
	}
	if len(runs) == 0 { // the demo does not record its books (yet): do it here
		if _, err := r.Record(ctx, register.RecordParams{Path: "tallis-north-loop.csv", Book: book, By: Clerk, NewMarks: true}); err != nil {
			t.Fatal(err)
		}
	}
	if err := adjustRuns(ctx, r); err != nil {
		t.Fatal(err)
	}
	tr, err := r.Trace(ctx, register.TraceParams{Designation: TraceMark, Datum: "NAVD88"})
	if err != nil {
		t.Fatal(err)
	}
	v := tr.Versions[0]
	sum := sha256.Sum256(book)
	if v.SourceKind != register.KindAdjustment || v.Adjustment == nil || v.Adjustment.Status != store.StatusPublished ||
		string(v.Adjustment.Runs[0].BookSHA256) != string(sum[:]) {
		t.Fatalf("%s version %d (%s) does not lead to the north loop's book", TraceMark, v.Version, v.SourceKind)
	}
	held := v.Adjustment.Held[0]
	if held.Designation != "TC-0412" || held.Source != report19 {
		t.Fatalf("held %s citing %q, want TC-0412 citing %q", held.Designation, held.Source, report19)
	}
	if s, err := r.Stale(ctx, register.StaleParams{}); err != nil || len(s.Heights) != 0 {
		t.Fatalf("stale after the demo: %v %v", s, err)
	}
}

// The demo's historical heights are in force from their sources' dates:
// asked about 2020-06-01, TC-0412 has the 2019 report's value; about 1995,
// the 1994 book's as the errata sheet corrected it from the book's date.
func TestDemoHeightsInForceFromTheirDates(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	r := register.New(pgtest.New(t).Pool)
	if err := Build(ctx, r); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		asOf        time.Time
		value, unit string
	}{
		{time.Date(2020, 6, 1, 23, 59, 59, 0, time.UTC), "234.662", "m"},
		{time.Date(1995, 1, 1, 0, 0, 0, 0, time.UTC), "769.88", "usft"},
	} {
		v, err := r.HeightShow(ctx, register.HeightShowParams{Designation: "TC-0412", Datum: "NAVD88", AsOf: &c.asOf})
		if err != nil {
			t.Fatal(err)
		}
		if len(v.Heights) != 1 || v.Heights[0].Value == nil || *v.Heights[0].Value != c.value || *v.Heights[0].Unit != c.unit {
			t.Fatalf("TC-0412 as of %s: %+v, want %s %s", c.asOf.Format("2006-01-02"), v.Heights, c.value, c.unit)
		}
	}
	before := time.Date(1994, 5, 31, 0, 0, 0, 0, time.UTC)
	if v, err := r.HeightShow(ctx, register.HeightShowParams{Designation: "TC-0412", Datum: "NAVD88", AsOf: &before}); err != nil || len(v.Heights) != 0 {
		t.Fatalf("TC-0412 on NAVD88 before the 1994 book: %v %+v, want none", err, v.Heights)
	}
}
