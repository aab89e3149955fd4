package register_test

import (
	"bufio"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"cairn/internal/booktest"
	. "cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// staleLoops and staleLoopMarks shape BenchmarkStaleArea's register: 40
// loops of 50 marks each, 11 km apart north to south (the marks of a loop
// 110 m apart), each adjusted and published holding its first mark, whose
// outside height is then revised: 1,960 stale heights, 49 to a loop.
const (
	staleLoops     = 40
	staleLoopMarks = 50
)

// BenchmarkStaleArea lists the stale heights of the whole register
// against those of one loop's area (3 km around its middle), in the same register.
func BenchmarkStaleArea(b *testing.B) {
	fx := registertest.Setup(b)
	fx.Datum(b, registertest.DatumOpts{})
	dir := b.TempDir()
	loops := make([]booktest.Loop, staleLoops)
	mf, err := os.Create(filepath.Join(dir, MarksFile))
	if err != nil {
		b.Fatal(err)
	}
	hf, err := os.Create(filepath.Join(dir, HeightsFile))
	if err != nil {
		b.Fatal(err)
	}
	mw, hw := bufio.NewWriter(mf), bufio.NewWriter(hf)
	mw.WriteString("designation,type,lat,lon,by\n")
	hw.WriteString("mark,datum,kind,value,unit,decimals,in_force_from,source,reason,by\n")
	for k := range loops {
		loops[k] = booktest.Loop{Setups: 10 * staleLoopMarks, MarkEvery: 10, FirstMark: 1001 + 100*k, Seed: uint64(k + 1)}
		for i, d := range loops[k].Marks() {
			fmt.Fprintf(mw, "%s,brass disk,%.5f,-104.00000,bench\n", d, 39+0.1*float64(k)+0.001*float64(i))
		}
		fmt.Fprintf(hw, "%s,NAVD88,authority,100.000,m,3,2019-06-01,Tallis County book (invented),outside control,bench\n", loops[k].Marks()[0])
	}
	if err := mw.Flush(); err != nil {
		b.Fatal(err)
	}
	if err := hw.Flush(); err != nil {
		b.Fatal(err)
	}
	mf.Close()
	hf.Close()
	if _, err := fx.Reg.Import(fx.Ctx, ImportParams{Dir: dir, RecordedBy: "bench"}); err != nil {
		b.Fatal(err)
	}
	for k, l := range loops {
		rec := fx.Run(b, registertest.RunOpts{Path: fmt.Sprintf("loop-%d.csv", k), Book: l.Book(), By: "bench"})
		v := fx.Adjustment(b, registertest.AdjustmentOpts{Runs: []int64{rec.Run.ID}, Hold: []string{l.Marks()[0]}, By: "bench"})
		fx.Publication(b, v.Adjustment.ID, registertest.PublicationOpts{Reason: "bench", By: "bench"})
		fx.Height(b, registertest.HeightOpts{Designation: l.Marks()[0], Value: "100.010", Unit: "m", Source: "invented", Reason: "revised", By: "bench"})
	}
	if _, err := fx.DB.Pool.Exec(fx.Ctx, "ANALYZE"); err != nil {
		b.Fatal(err)
	}
	ctx := context.Background()
	b.Run("whole-register", func(b *testing.B) {
		for b.Loop() {
			s, err := fx.Reg.Stale(ctx, StaleParams{})
			if err != nil || len(s.Heights) != staleLoops*(staleLoopMarks-1) {
				b.Fatalf("%d stale, %v", len(s.Heights), err)
			}
		}
	})
	b.Run("one-area", func(b *testing.B) {
		for b.Loop() {
			s, err := fx.Reg.Stale(ctx, StaleParams{Near: &store.LatLon{Lat: 39 + 0.1*20 + 0.0245, Lon: -104}, RadiusM: 3000, Datum: "NAVD88"})
			if err != nil || len(s.Heights) != staleLoopMarks-1 {
				b.Fatalf("%d stale, %v", len(s.Heights), err)
			}
		}
	})
}
