package store_test

import (
	"context"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// The near search's bounding box is answered by the GiST index.
func TestMarkListNearUsesIndex(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	tx, err := db.Pool.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback(ctx)
	// With sequential scans priced out, a query the index can answer uses it.
	if _, err := tx.Exec(ctx, "SET LOCAL enable_seqscan = off"); err != nil {
		t.Fatal(err)
	}
	q, args := store.MarkListSQL(store.MarkListParams{Near: &store.LatLon{Lat: 41.62, Lon: -97.95}, RadiusM: 2000})
	rows, err := tx.Query(ctx, "EXPLAIN "+q, args...)
	if err != nil {
		t.Fatal(err)
	}
	var plan []string
	for rows.Next() {
		var line string
		if err := rows.Scan(&line); err != nil {
			t.Fatal(err)
		}
		plan = append(plan, line)
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	if p := strings.Join(plan, "\n"); !strings.Contains(p, "mark_position") {
		t.Fatalf("near search does not use index mark_position:\n%s", p)
	}
}

func TestBoundingBoxesSplitAtAntimeridian(t *testing.T) {
	t.Parallel()
	bs := store.BoundingBoxes(store.LatLon{Lat: 0, Lon: 179.99}, 5000)
	if len(bs) != 2 || bs[0][2] != 180 || bs[1][0] != -180 {
		t.Fatalf("boxes %v, want two meeting at ±180", bs)
	}
	// Within 5 km of the pole, every longitude is in reach.
	bs = store.BoundingBoxes(store.LatLon{Lat: 89.99, Lon: 10}, 5000)
	if len(bs) != 1 || bs[0][0] != -180 || bs[0][2] != 180 || bs[0][3] != 90 {
		t.Fatalf("boxes %v, want the whole polar cap", bs)
	}
}

// The near search's haversine computes with MeanEarthRadiusM, written out in
// full: one number in Go and SQL.
func TestMarkListNearSQLUsesMeanRadius(t *testing.T) {
	t.Parallel()
	q, _ := store.MarkListSQL(store.MarkListParams{Near: &store.LatLon{Lat: 41.62, Lon: -97.95}, RadiusM: 2000})
	if want := "2 * 6371008.8 * asin("; store.MeanEarthRadiusM != 6371008.8 || !strings.Contains(q, want) {
		t.Fatalf("near search SQL does not compute with R = %v m as %q:\n%s", store.MeanEarthRadiusM, want, q)
	}
}

// A page of marks is served by indexes: the box by the GiST index on the
// positions, the order and start by the unique index on the designation.
func TestMarkPageUsesIndexes(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	tx, err := db.Pool.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback(ctx)
	if _, err := tx.Exec(ctx, "SET LOCAL enable_seqscan = off"); err != nil {
		t.Fatal(err)
	}
	explain := func(p store.MarkPageParams) string {
		q, args := store.MarkPageSQL(p)
		rows, err := tx.Query(ctx, "EXPLAIN "+q, args...)
		if err != nil {
			t.Fatal(err)
		}
		var plan []string
		for rows.Next() {
			var line string
			if err := rows.Scan(&line); err != nil {
				t.Fatal(err)
			}
			plan = append(plan, line)
		}
		if err := rows.Err(); err != nil {
			t.Fatal(err)
		}
		return strings.Join(plan, "\n")
	}
	if p := explain(store.MarkPageParams{BBox: &store.BBox{West: -98, South: 41, East: -97, North: 42}, Limit: 10}); !strings.Contains(p, "mark_position") {
		t.Errorf("a box does not use index mark_position:\n%s", p)
	}
	if p := explain(store.MarkPageParams{BBox: &store.BBox{West: 170, South: 41, East: -170, North: 42}, Limit: 10}); !strings.Contains(p, "mark_position") {
		t.Errorf("a box across the antimeridian does not use index mark_position:\n%s", p)
	}
	if p := explain(store.MarkPageParams{After: "TC-0412", Limit: 10}); !strings.Contains(p, "Index") || !strings.Contains(p, "designation") {
		t.Errorf("a page after a designation is not served by its index:\n%s", p)
	}
}
