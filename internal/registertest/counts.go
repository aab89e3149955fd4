package registertest

import (
	"maps"
	"testing"

	"cairn/internal/store"
)

// Counts returns the number of rows of every table of the register on db
// (store.TableCount: every table, as the catalog lists them).
func Counts(tb testing.TB, db store.DBTX) store.TableCounts {
	tb.Helper()
	c, err := store.TableCount(tb.Context(), db)
	if err != nil {
		tb.Fatalf("registertest: count rows: %v", err)
	}
	return c
}

// The assertions report a failure with Errorf, naming every table that
// differs, and return whether they held: a test goes on unless it stops
// itself.

// AssertNothingWritten fails the test unless every table of the register
// on db holds as many rows as before.
func AssertNothingWritten(tb testing.TB, db store.DBTX, before store.TableCounts) bool {
	tb.Helper()
	if after := Counts(tb, db); !after.Equal(before) {
		tb.Errorf("rows written: %s", before.Diff(after))
		return false
	}
	return true
}

// AssertWrote fails the test unless the tables named in added gained
// exactly those numbers of rows since before, and every other table is as
// it was.
func AssertWrote(tb testing.TB, db store.DBTX, before store.TableCounts, added map[string]int64) bool {
	tb.Helper()
	want := maps.Clone(before)
	for t, n := range added {
		want[t] = before.Rows(t) + n
	}
	if after := Counts(tb, db); !after.Equal(want) {
		tb.Errorf("rows written: %s; want %v more (off by: %s)", before.Diff(after), added, want.Diff(after))
		return false
	}
	return true
}

// AssertCounts fails the test unless each table named in want holds
// exactly that many rows (other tables are not looked at).
func AssertCounts(tb testing.TB, db store.DBTX, want map[string]int64) bool {
	tb.Helper()
	c := Counts(tb, db)
	got := map[string]int64{}
	for t := range want {
		got[t] = c.Rows(t)
	}
	if !maps.Equal(got, want) {
		tb.Errorf("rows %v, want %v (all: %s)", got, want, c)
		return false
	}
	return true
}

// Counts returns the number of rows of every table of b's register.
func (b *Bundle) Counts(tb testing.TB) store.TableCounts {
	tb.Helper()
	return Counts(tb, b.DB.Pool)
}

// AssertNothingWritten fails the test unless every table of b's register
// holds as many rows as before.
func (b *Bundle) AssertNothingWritten(tb testing.TB, before store.TableCounts) bool {
	tb.Helper()
	return AssertNothingWritten(tb, b.DB.Pool, before)
}

// AssertWrote fails the test unless b's register gained exactly the rows
// of added since before, and nothing else.
func (b *Bundle) AssertWrote(tb testing.TB, before store.TableCounts, added map[string]int64) bool {
	tb.Helper()
	return AssertWrote(tb, b.DB.Pool, before, added)
}

// AssertCounts fails the test unless each table named in want holds
// exactly that many rows.
func (b *Bundle) AssertCounts(tb testing.TB, want map[string]int64) bool {
	tb.Helper()
	return AssertCounts(tb, b.DB.Pool, want)
}
