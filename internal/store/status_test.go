package store_test

import (
	"fmt"
	"testing"

	"cairn/internal/registertest"
	"cairn/internal/store"
)

// RegisterCount counts a small register row by row and gives a large
// one's size from the planner's statistics (pg_class.reltuples; PostgreSQL
// 15 documentation, "pg_class": "Number of live rows in the table. This is
// only an estimate used by the planner"; -1 before the first ANALYZE),
// saying so. The threshold is lowered here so that 30 marks count as
// large. Not parallel: it sets the package's threshold.
func TestRegisterCountEstimates(t *testing.T) {
	b := registertest.Setup(t)
	var names []string
	for i := range 30 {
		names = append(names, fmt.Sprintf("TC-%04d", 700+i))
	}
	b.Marks(t, names...)
	n, applied, err := store.RegisterCount(b.Ctx, b.DB.Pool)
	if err != nil || !applied || n.Marks != 30 || n.Estimated {
		t.Fatalf("small register: %+v %v %v; want 30 marks counted", n, applied, err)
	}
	defer func(was int64) { store.CountExactlyBelow = was }(store.CountExactlyBelow)
	store.CountExactlyBelow = 10
	if _, err := b.DB.Pool.Exec(b.Ctx, "ANALYZE mark; ANALYZE height"); err != nil {
		t.Fatal(err)
	}
	n, _, err = store.RegisterCount(b.Ctx, b.DB.Pool)
	if err != nil || !n.Estimated || n.Marks != 30 || n.HeightVersions != 0 {
		t.Fatalf("large register, analyzed: %+v %v; want the estimate, 30 marks, marked estimated", n, err)
	}
}
