package register_test

import (
	"slices"
	"testing"

	. "cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// ExportTable reads the same marks, heights and doubts whatever its batch
// size (keyset pages by designation over one snapshot), and an area keeps
// only the marks within its radius (by the register's haversine distance).
func TestExportTableBatches(t *testing.T) {
	t.Parallel()
	fx := registertest.Setup(t)
	fx.Datum(t, registertest.DatumOpts{})
	// Marks 0.01° of latitude apart (about 1.11 km, common practice)
	// from 41.62° N: TC-0412 … TC-0418.
	for range 7 {
		m := fx.Mark(t, registertest.MarkOpts{})
		fx.Height(t, registertest.HeightOpts{Designation: m.Designation})
	}
	fx.Mark(t, registertest.MarkOpts{Designation: "MR-1", NoPosition: true})
	fx.Condition(t, registertest.ConditionOpts{Designation: "TC-0413", Condition: "disturbed"})
	read := func(p ExportTableParams) (marks []string, heights int, inDoubt []string, batches int) {
		t.Helper()
		var total int64
		err := fx.Reg.ExportTable(fx.Ctx, p, func(s ExportTableStart) error { total = s.Marks; return nil }, func(ss []Datasheet) error {
			batches++
			if p.Batch > 0 && len(ss) > p.Batch {
				t.Errorf("a batch of %d marks, asked for %d", len(ss), p.Batch)
			}
			for _, s := range ss {
				marks, heights = append(marks, s.Mark.Designation), heights+len(s.Heights)
				if len(s.Doubts) > 0 {
					inDoubt = append(inDoubt, s.Mark.Designation)
				}
			}
			return nil
		})
		if err != nil || total != 8 {
			t.Fatalf("ExportTable: %v (register of %d marks, want 8)", err, total)
		}
		return
	}
	all, h, doubt, _ := read(ExportTableParams{})
	want := []string{"MR-1", "TC-0412", "TC-0413", "TC-0414", "TC-0415", "TC-0416", "TC-0417", "TC-0418"}
	if !slices.Equal(all, want) || h != 7 || !slices.Equal(doubt, []string{"TC-0413"}) {
		t.Errorf("export: marks %v, %d heights, in doubt %v; want %v, 7, [TC-0413]", all, h, doubt, want)
	}
	for _, size := range []int{1, 3, 8} {
		got, gh, gd, batches := read(ExportTableParams{Batch: size})
		if !slices.Equal(got, all) || gh != h || !slices.Equal(gd, doubt) || batches != (8+size-1)/size {
			t.Errorf("batches of %d: %v, %d heights, %v in doubt, %d batches", size, got, gh, gd, batches)
		}
	}
	// Within 2.5 km of TC-0414 (41.64° N): TC-0412 to TC-0416, the
	// neighbours 1.11 and 2.22 km away; TC-0417 is 3.3 km away.
	near, _, _, _ := read(ExportTableParams{Near: &store.LatLon{Lat: 41.64, Lon: -97.95}, RadiusM: 2500, Batch: 2})
	if want := []string{"TC-0412", "TC-0413", "TC-0414", "TC-0415", "TC-0416"}; !slices.Equal(near, want) {
		t.Errorf("export of the area: %v, want %v", near, want)
	}
}
