package cli

import (
	"context"
	"strings"
	"testing"

	"cairn/internal/demo"
	"cairn/internal/pgtest"
	"cairn/internal/register"
	"cairn/internal/store"
)

// TestDemoHelpSaysWhatItBuilds builds the demo register and holds `cairn
// demo --help` to it: the numbers of datums, marks, runs and published
// adjustments it names, the one mark created unverified by a book, the one
// disturbed, and the one reported not found and later recovered.
func TestDemoHelpSaysWhatItBuilds(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	db := pgtest.New(t)
	r := register.New(db.Pool)
	if err := demo.Build(ctx, r); err != nil {
		t.Fatal(err)
	}
	datums, err := r.DatumList(ctx)
	if err != nil {
		t.Fatal(err)
	}
	marks, err := r.MarkList(ctx, register.MarkListParams{})
	if err != nil {
		t.Fatal(err)
	}
	runs, err := r.RunList(ctx, register.RunListParams{})
	if err != nil {
		t.Fatal(err)
	}
	published, err := r.AdjustmentList(ctx, register.AdjustmentListParams{Status: store.StatusPublished})
	if err != nil {
		t.Fatal(err)
	}
	latest := map[string]int{}
	recovered, replaced := 0, 0
	for _, m := range marks {
		if m.Retired != nil && m.Retired.ReplacedBy != "" {
			replaced++
		}
		if m.Latest != nil {
			latest[m.Latest.Condition]++
		}
		v, err := r.MarkShow(ctx, m.Designation)
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range v.Conditions {
			if c.Condition == "not-found" && m.Latest != nil && m.Latest.Condition == "good" {
				recovered++
			}
		}
	}
	words := map[int]string{1: "one", 2: "two", 11: "eleven", 12: "twelve"}
	text := strings.Join(strings.Fields(demoContents), " ")
	for _, c := range []struct {
		n    int
		what string
	}{
		{len(datums), "%s datums"},
		{len(marks), "%s benchmarks"},
		{latest["unverified"], "%s of them created by recording a field book (its condition unverified)"},
		{latest["disturbed"], "%s mark disturbed"},
		{latest["reset"], "%s mark reset in place"},
		{replaced, "%s mark destroyed by road works, retired and replaced"},
		{recovered, "%s reported not found in 2023 and recovered in 2024"},
		{len(runs), "%s field books recorded as runs"},
		{len(published), "%s adjustments of them, published"},
	} {
		w, ok := words[c.n]
		if want := strings.Replace(c.what, "%s", w, 1); !ok || !strings.Contains(text, want) {
			t.Errorf("the demo has %d for %q; its help says: %s", c.n, c.what, text)
		}
	}
}

// `cairn demo --url` prints the demo register's URL on the server cairn
// would use.
func TestDemoURL(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	out := mustRun(t, db.URL, "demo", "--url")
	want, err := store.WithDatabase(db.URL, demoDatabase)
	if err != nil {
		t.Fatal(err)
	}
	if strings.TrimSpace(out) != want {
		t.Fatalf("demo --url printed %q, want %q", out, want)
	}
}
