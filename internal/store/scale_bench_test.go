package store_test

import (
	"bufio"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// scaleMarks is the size of BenchmarkScale's register: 20,000 marks with
// 100,000 height versions and 60,000 condition reports (the most rows a
// benchmark of the shared machine may hold, docs/performance.md).
const scaleMarks = 20000

// scaleFixture imports a register of scaleMarks marks through the
// register's import (docs/import.md: every invariant kept, hash chains
// built by the triggers): TC-0000000 to TC-0019999 on a grid 0.0002° apart
// (141 columns: about 17 m east-west and 22 m north-south at 39.5°N, some
// 2.4 × 3.1 km in all, so that 2 km from its centre holds most of them, as
// a city holds its marks), each with 5 versions on NAVD88 and 3 condition
// reports. Designations, places and values are invented.
func scaleFixture(b *testing.B) *registertest.Bundle {
	b.Helper()
	dir := b.TempDir()
	write := func(name, header string, row func(w *bufio.Writer, i int)) {
		f, err := os.Create(filepath.Join(dir, name))
		if err != nil {
			b.Fatal(err)
		}
		w := bufio.NewWriter(f)
		w.WriteString(header + "\n")
		for i := range scaleMarks {
			row(w, i)
		}
		if err := w.Flush(); err != nil {
			b.Fatal(err)
		}
		f.Close()
	}
	write(register.MarksFile, "designation,type,lat,lon,by", func(w *bufio.Writer, i int) {
		fmt.Fprintf(w, "TC-%07d,brass disk,%.5f,%.5f,bench\n", i, 39.5+0.0002*float64(i/141), -104-0.0002*float64(i%141))
	})
	write(register.ConditionsFile, "mark,observed_on,condition,by", func(w *bufio.Writer, i int) {
		for _, d := range []string{"1994-06-01", "2008-10-02", "2019-03-14"} {
			fmt.Fprintf(w, "TC-%07d,%s,good,bench\n", i, d)
		}
	})
	write(register.HeightsFile, "mark,datum,kind,value,unit,decimals,in_force_from,source,reason,by", func(w *bufio.Writer, i int) {
		for k, y := range []int{1960, 1975, 1994, 2008, 2019} {
			fmt.Fprintf(w, "TC-%07d,NAVD88,authority,%d.%03d,m,3,%d-06-01,Tallis County book %d,from the book,bench\n", i, 1700+i%100, k, y, y)
		}
	})
	fx := registertest.Setup(b)
	fx.Datum(b, registertest.DatumOpts{})
	if _, err := fx.Reg.Import(fx.Ctx, register.ImportParams{Dir: dir, RecordedBy: "bench"}); err != nil {
		b.Fatal(err)
	}
	if _, err := fx.DB.Pool.Exec(fx.Ctx, "ANALYZE"); err != nil {
		b.Fatal(err)
	}
	return fx
}

// BenchmarkScale measures the look-ups of issue 15 on one register of
// scaleMarks marks, each new form beside the statement it replaced (its
// SQL written out here as it was), in the same run. Run with
//
//	go test -run XXX -bench BenchmarkScale -benchtime 20x ./internal/store/
func BenchmarkScale(b *testing.B) {
	fx := scaleFixture(b)
	ctx := context.Background()
	db := fx.DB.Pool
	ids := make([]int64, 0, scaleMarks)
	if err := func() error {
		rows, err := db.Query(ctx, "SELECT id FROM mark ORDER BY id")
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var id int64
			if err := rows.Scan(&id); err != nil {
				return err
			}
			ids = append(ids, id)
		}
		return rows.Err()
	}(); err != nil {
		b.Fatal(err)
	}
	var datumID int64
	if err := db.QueryRow(ctx, "SELECT id FROM datum WHERE code = 'NAVD88'").Scan(&datumID); err != nil {
		b.Fatal(err)
	}
	centre := store.LatLon{Lat: 39.5 + 0.0002*70, Lon: -104 - 0.0002*70}

	// "Did you mean": a designation one letter too long.
	b.Run("did-you-mean/prefix-ranges", func(b *testing.B) {
		for b.Loop() {
			_, err := fx.Reg.MarkShow(ctx, "TC-00123456")
			if err == nil || !strings.Contains(err.Error(), "did you mean TC-0012345") {
				b.Fatalf("hint: %v", err)
			}
		}
	})
	b.Run("did-you-mean/before:first-10000-of-the-letter", func(b *testing.B) {
		for b.Loop() {
			rows, err := db.Query(ctx, "SELECT designation FROM mark WHERE lower(normalize(left(designation, 1), NFKC)) = left($1, 1) ORDER BY designation LIMIT $2", "tc-00123456", 10000)
			if err != nil {
				b.Fatal(err)
			}
			n := 0
			for rows.Next() {
				n++
			}
			rows.Close()
			if n != 10000 {
				b.Fatalf("%d rows", n)
			}
		}
	})

	// Near: the 50 nearest within 2 km, against every mark within 2 km
	// sorted.
	var within int
	b.Run("near/nearest-50", func(b *testing.B) {
		for b.Loop() {
			ms, err := store.MarkList(ctx, db, store.MarkListParams{Near: &centre, RadiusM: 2000, Limit: 50})
			if err != nil || len(ms) != 50 {
				b.Fatalf("%d marks, %v", len(ms), err)
			}
		}
	})
	b.Run("near/before:all-within-2km", func(b *testing.B) {
		for b.Loop() {
			ms, err := store.MarkList(ctx, db, store.MarkListParams{Near: &centre, RadiusM: 2000})
			if err != nil {
				b.Fatal(err)
			}
			within = len(ms)
		}
		b.ReportMetric(float64(within), "marks")
	})

	// An area's marks for stale and adjust --area: ids alone, against
	// whole rows with conditions and aliases.
	b.Run("area/ids", func(b *testing.B) {
		for b.Loop() {
			if got, err := store.MarkIDsWithin(ctx, db, centre, 2000); err != nil || len(got) != within {
				b.Fatalf("%d ids (want %d), %v", len(got), within, err)
			}
		}
	})

	// The latest height of every mark on NAVD88, and the latest condition
	// report of every mark.
	b.Run("latest-heights/unnest-lateral", func(b *testing.B) {
		for b.Loop() {
			if hs, err := store.HeightLatestMany(ctx, db, store.HeightLatestManyParams{MarkIDs: ids, DatumID: datumID}); err != nil || len(hs) != scaleMarks {
				b.Fatalf("%d heights, %v", len(hs), err)
			}
		}
	})
	b.Run("latest-heights/before:any-distinct-on", func(b *testing.B) {
		for b.Loop() {
			rows, err := db.Query(ctx, "SELECT DISTINCT ON (h.mark_id) "+store.HeightColumns+store.HeightFrom+
				" WHERE h.mark_id = ANY($1) AND h.datum_id = $2 ORDER BY h.mark_id, h.version DESC", ids, datumID)
			if err != nil {
				b.Fatal(err)
			}
			n := 0
			for rows.Next() {
				n++
			}
			rows.Close()
			if n != scaleMarks {
				b.Fatalf("%d rows", n)
			}
		}
	})
	// The two shapes with the version's id alone: what the statement costs
	// without the columns (the in-force test of heightCurrent above all).
	ids1 := func(b *testing.B, q string) {
		for b.Loop() {
			rows, err := db.Query(ctx, q, ids, datumID)
			if err != nil {
				b.Fatal(err)
			}
			n := 0
			for rows.Next() {
				n++
			}
			rows.Close()
			if n != scaleMarks {
				b.Fatalf("%d rows", n)
			}
		}
	}
	b.Run("latest-heights/floor:unnest-lateral-ids", func(b *testing.B) {
		ids1(b, `SELECT l.id FROM unnest($1::bigint[]) AS u (mark_id) CROSS JOIN LATERAL (SELECT x.id FROM height x
			WHERE x.mark_id = u.mark_id AND x.datum_id = $2 ORDER BY x.version DESC LIMIT 1) l`)
	})
	b.Run("latest-heights/floor:any-distinct-on-ids", func(b *testing.B) {
		ids1(b, `SELECT DISTINCT ON (h.mark_id) h.id FROM height h WHERE h.mark_id = ANY($1) AND h.datum_id = $2 ORDER BY h.mark_id, h.version DESC`)
	})
	b.Run("latest-conditions/unnest-lateral", func(b *testing.B) {
		for b.Loop() {
			if cs, err := store.ConditionLatestMany(ctx, db, ids); err != nil || len(cs) != scaleMarks {
				b.Fatalf("%d conditions, %v", len(cs), err)
			}
		}
	})
	b.Run("latest-conditions/before:any-distinct-on", func(b *testing.B) {
		for b.Loop() {
			rows, err := db.Query(ctx, `SELECT DISTINCT ON (mark_id) id, mark_id, condition, note, observed_on, recorded_at, recorded_by
				FROM mark_condition WHERE mark_id = ANY($1) ORDER BY mark_id, observed_on DESC, id DESC`, ids)
			if err != nil {
				b.Fatal(err)
			}
			n := 0
			for rows.Next() {
				n++
			}
			rows.Close()
			if n != scaleMarks {
				b.Fatalf("%d rows", n)
			}
		}
	})
}
