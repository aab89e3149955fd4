package store_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"

	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// haversineM is the great-circle distance on the sphere of radius
// store.MeanEarthRadiusM, by the haversine formula (R. W. Sinnott,
// "Virtues of the Haversine", Sky and Telescope 68(2), 1984, p. 159;
// details from memory), computed here apart from the register's SQL.
func haversineM(lat1, lon1, lat2, lon2 float64) float64 {
	r := math.Pi / 180
	h := math.Pow(math.Sin((lat2-lat1)*r/2), 2) + math.Cos(lat1*r)*math.Cos(lat2*r)*math.Pow(math.Sin((lon2-lon1)*r/2), 2)
	return 2 * store.MeanEarthRadiusM * math.Asin(math.Min(1, math.Sqrt(h)))
}

// A near search with a limit, read nearest first from the GiST indexes,
// lists the same marks in the same order as sorting every mark within the
// radius by its great-circle distance (computed here in Go), also at 60°
// north, where a degree of longitude is half a degree of latitude and the
// indexes' order (plane distance in degrees) is not the order of distance,
// and also for marks that have moved (their current position, not their
// first, decides).
func TestMarkListNearestIsTheNearest(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	tx, err := db.Pool.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback(ctx)
	rng := rand.New(rand.NewPCG(15, 7))
	type pos struct{ lat, lon float64 }
	at := map[int64]pos{}
	for i := range 1500 {
		lat, lon := 60+(rng.Float64()-0.5)*0.1, 10+(rng.Float64()-0.5)*0.1
		id, err := store.MarkInsert(ctx, tx, store.MarkInsertParams{Designation: fmt.Sprintf("OB-%04d", i),
			Lat: &lat, Lon: &lon, CreatedBy: "test"})
		if err != nil {
			t.Fatal(err)
		}
		at[id] = pos{lat, lon}
		if i%10 == 0 { // moved: the version's position is current
			lat, lon := 60+(rng.Float64()-0.5)*0.1, 10+(rng.Float64()-0.5)*0.1
			if _, err := store.MarkVersionInsert(ctx, tx, store.MarkVersionInsertParams{MarkID: id, Lat: &lat, Lon: &lon,
				Reason: "reset (invented)", RecordedBy: "test"}); err != nil {
				t.Fatal(err)
			}
			at[id] = pos{lat, lon}
		}
	}
	for _, c := range []store.LatLon{{Lat: 60, Lon: 10}, {Lat: 60.04, Lon: 9.96}, {Lat: 59.9, Lon: 10}} {
		type near struct {
			id int64
			d  float64
		}
		var want []near
		for id, p := range at {
			if d := haversineM(c.Lat, c.Lon, p.lat, p.lon); d <= 3000 {
				want = append(want, near{id, d})
			}
		}
		slices.SortFunc(want, func(a, b near) int { return cmpFloat(a.d, b.d) })
		for _, limit := range []int{1, 7, 50, 400, 5000} {
			ms, err := store.MarkList(ctx, tx, store.MarkListParams{Near: &c, RadiusM: 3000, Limit: limit})
			if err != nil {
				t.Fatal(err)
			}
			n := min(limit, len(want))
			if len(ms) != n {
				t.Errorf("%v, limit %d: %d marks, want %d", c, limit, len(ms), n)
				continue
			}
			for i, m := range ms {
				if m.ID != want[i].id || math.Abs(*m.DistanceM-want[i].d) > 1e-6 {
					t.Errorf("%v, limit %d: %d-th is mark %d at %.3f m, want mark %d at %.3f m", c, limit, i, m.ID, *m.DistanceM, want[i].id, want[i].d)
					break
				}
			}
		}
	}
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// The nearest-first read is an ordered scan of both GiST indexes (an
// "Order By" on mark_position and on mark_version_position), not a sort.
func TestMarkListNearestUsesTheIndexOrder(t *testing.T) {
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
	q := store.NearestSQL()
	rows, err := tx.Query(ctx, "EXPLAIN "+q, -97.95, 41.62, 64)
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
	p := strings.Join(plan, "\n")
	for _, idx := range []string{"Index Scan using mark_position", "Index Scan using mark_version_position"} {
		if !strings.Contains(p, idx) {
			t.Errorf("the nearest-first read lacks %q:\n%s", idx, p)
		}
	}
	if strings.Count(p, "Order By: (point(lon, lat) <-> ") != 2 {
		t.Errorf("the nearest-first read is not ordered by both indexes:\n%s", p)
	}
}

// A near search with a limit, which keeps the nearest marks by their
// current positions and reads the whole rows of those alone, lists the
// same marks, row for row (descriptions, conditions, aliases), as the
// first of the whole listing within the radius sorted by distance, also
// when it keeps only marks of some conditions or of one name.
func TestMarkListNearestFiltersAsTheWholeListing(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	tx, err := db.Pool.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback(ctx)
	rng := rand.New(rand.NewPCG(4, 2))
	conditions := []string{"good", "disturbed", "not-found", ""}
	for i := range 600 {
		lat, lon := 41.6+(rng.Float64()-0.5)*0.05, -97.95+(rng.Float64()-0.5)*0.05
		id, err := store.MarkInsert(ctx, tx, store.MarkInsertParams{Designation: fmt.Sprintf("TC-%04d", i),
			Lat: &lat, Lon: &lon, CreatedBy: "test"})
		if err != nil {
			t.Fatal(err)
		}
		if c := conditions[rng.IntN(len(conditions))]; c != "" {
			if _, err := store.ConditionInsert(ctx, tx, store.ConditionInsertParams{MarkID: id, Condition: c,
				ObservedOn: time.Date(2020, 1, 1+rng.IntN(300), 0, 0, 0, 0, time.UTC), RecordedBy: "test"}); err != nil {
				t.Fatal(err)
			}
		}
		if i%7 == 0 {
			lat, lon := 41.6+(rng.Float64()-0.5)*0.05, -97.95+(rng.Float64()-0.5)*0.05
			if _, err := store.MarkVersionInsert(ctx, tx, store.MarkVersionInsertParams{MarkID: id, Lat: &lat, Lon: &lon,
				Reason: "reset (invented)", RecordedBy: "test"}); err != nil {
				t.Fatal(err)
			}
		}
	}
	c := store.LatLon{Lat: 41.6, Lon: -97.95}
	for _, f := range []store.MarkListParams{
		{},
		{Conditions: []string{"disturbed", "unknown"}},
		{Conditions: []string{"good"}},
		{Name: "tc-0042"},
	} {
		f.Near, f.RadiusM = &c, 1500
		all, err := store.MarkList(ctx, tx, f)
		if err != nil {
			t.Fatal(err)
		}
		if len(all) < 10 && f.Name == "" {
			t.Fatalf("%+v: only %d marks within the radius", f, len(all))
		}
		for _, limit := range []int{1, 9, 50, 1000} {
			f.Limit = limit
			got, err := store.MarkList(ctx, tx, f)
			if err != nil {
				t.Fatal(err)
			}
			want := all[:min(limit, len(all))]
			if !reflect.DeepEqual(got, want) {
				t.Errorf("conditions %v, name %q, limit %d: %d marks, want the first %d of the whole listing", f.Conditions, f.Name, limit, len(got), len(want))
			}
		}
	}
}
