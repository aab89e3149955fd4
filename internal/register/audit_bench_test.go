package register_test

import (
	"context"
	"errors"
	"fmt"
	"os"
	"runtime"
	"runtime/debug"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"cairn/internal/auditcache"
	"cairn/internal/booktest"
	"cairn/internal/pgtest"
	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// BenchmarkAuditVerify20k: the whole audit (hash chains, the book parsed
// and reduced again against its 40,002 sightings and 20,001 sections, the
// adjustment computed again against its 20,001 results and 20,000
// versions, the schema against a scratch database migrated afresh) of the
// largest register the benchmarks build: BenchmarkPublish20k's loop of
// 20,001 marks, adjusted and published once.
func BenchmarkAuditVerify20k(b *testing.B) {
	fx := registertest.Setup(b)
	fx.Datum(b, registertest.DatumOpts{})
	loop := booktest.Loop{Setups: 20001, MarkEvery: 1, Seed: 1}
	rec := fx.Run(b, registertest.RunOpts{Path: "large.csv", Book: loop.Book(), By: "bench", NewMarks: true})
	fx.Height(b, registertest.HeightOpts{Designation: "TC-1001", Value: "100.000", Unit: "m", Source: "invented", Reason: "bench", By: "bench"})
	v := fx.Adjustment(b, registertest.AdjustmentOpts{Runs: []int64{rec.Run.ID}, Hold: []string{"TC-1001"}, By: "bench"})
	fx.Publication(b, v.Adjustment.ID, registertest.PublicationOpts{Reason: "bench", By: "bench"})
	for b.Loop() {
		rep, err := fx.Reg.AuditVerify(context.Background())
		if err != nil || rep.Count() != 0 || rep.Versions != 20001 || rep.Runs != 1 || rep.Adjustments != 1 {
			b.Fatalf("audit: %v, %d breaks, %d versions, %d runs, %d adjustments: %+v", err, rep.Count(), rep.Versions, rep.Runs, rep.Adjustments, rep.Findings)
		}
	}
}

// BenchmarkAuditVerifyEmpty: the audit of an empty register, which is
// the fixed cost of the schema's comparison: scratch, a scratch database
// made, migrated, read and dropped every time (a new process's first
// audit without a cache); cache, the reference read from the audit's
// cache (auditcache) instead, as every later process does.
func BenchmarkAuditVerifyEmpty(b *testing.B) {
	fx := registertest.Setup(b)
	for _, c := range []struct {
		name    string
		refresh bool
		from    string
	}{{"scratch", true, register.SchemaFromScratch}, {"cache", false, register.SchemaFromCache}} {
		b.Run(c.name, func(b *testing.B) {
			fx.Reg.UseSchemaCache(auditcache.Dir{Path: cacheDir, Refresh: c.refresh})
			for b.Loop() {
				register.ForgetFreshSchemas()
				rep, err := fx.Reg.AuditVerify(context.Background())
				if err != nil || rep.Count() != 0 || rep.SchemaFrom != c.from {
					b.Fatalf("audit: %v, from %q, %+v", err, rep.SchemaFrom, rep.Findings)
				}
			}
		})
	}
}

// BenchmarkAuditVerifyScaled: the whole audit of a register of
// generated loops with a mark at every setup, each loop held at its first
// mark (an outside height) and adjusted and published over and over:
//
//	CAIRN_BENCH_AUDIT_MARKS   marks in all (default 100 000)
//	CAIRN_BENCH_AUDIT_RUNS    loops (runs) they are shared out among, each
//	                          of MARKS/RUNS setups and marks (default 1)
//	CAIRN_BENCH_AUDIT_ROUNDS  adjustments and publications of each loop
//	                          (default 5)
//	CAIRN_BENCH_AUDIT_KEEP    the name of a database to build the register
//	                          in and leave on the server, for `cairn audit
//	                          verify` to measure again (default none: a
//	                          test database, dropped)
//
// so that every mark but the held ones has ROUNDS versions:
// RUNS·(1 + (MARKS/RUNS − 1)·ROUNDS) versions. The register is built
// through the register's own use cases (Record, HeightSet, Adjust,
// Publish), the loops shared out among as many goroutines as there are
// processors; building is not timed, but reported as build-s, with the
// process's peak resident memory (VmHWM) while building as build-peak-MB.
// The peak is then reset (/proc/self/clear_refs), so peak-MB is the
// audit's own.
func BenchmarkAuditVerifyScaled(b *testing.B) {
	marks, runs, rounds := envInt(b, "CAIRN_BENCH_AUDIT_MARKS", 100000), envInt(b, "CAIRN_BENCH_AUDIT_RUNS", 1), envInt(b, "CAIRN_BENCH_AUDIT_ROUNDS", 5)
	if marks%runs != 0 || marks/runs < 2 {
		b.Fatalf("CAIRN_BENCH_AUDIT_MARKS=%d over CAIRN_BENCH_AUDIT_RUNS=%d: want a whole number of at least 2 marks a loop", marks, runs)
	}
	db := pgtest.New
	if keep := os.Getenv("CAIRN_BENCH_AUDIT_KEEP"); keep != "" {
		db = func(tb testing.TB) *pgtest.DB { return pgtest.Kept(tb, keep) }
	}
	fx := registertest.On(b, db(b))
	fx.Datum(b, registertest.DatumOpts{})
	start := time.Now()
	if err := buildLoops(fx, marks/runs, runs, rounds, min(runs, runtime.GOMAXPROCS(0))); err != nil {
		b.Fatal(err)
	}
	buildS, buildMB := time.Since(start).Seconds(), peakMB(b)
	runtime.GC()
	debug.FreeOSMemory()
	if err := os.WriteFile("/proc/self/clear_refs", []byte("5"), 0); err != nil {
		b.Fatalf("reset the peak resident memory: %v", err)
	}
	versions := runs * (1 + (marks/runs-1)*rounds)
	b.ResetTimer()
	for b.Loop() {
		rep, err := fx.Reg.AuditVerify(context.Background())
		if err != nil || rep.Count() != 0 || rep.Runs != runs || rep.Adjustments != runs*rounds || rep.Versions != versions {
			b.Fatalf("audit: %v, %d breaks, %d versions (want %d), %d runs, %d adjustments", err, rep.Count(), rep.Versions, versions, rep.Runs, rep.Adjustments)
		}
		b.ReportMetric(float64(rep.Versions), "versions")
	}
	b.ReportMetric(peakMB(b), "peak-MB")
	b.ReportMetric(buildS, "build-s")
	b.ReportMetric(buildMB, "build-peak-MB")
}

// buildLoops records runs generated loops of setups setups each, a mark
// at every setup and no mark shared (loop k's marks are numbered from
// TC-1001 + k·setups), gives each loop's first mark an outside height, and
// adjusts each loop by itself, holding that mark, and publishes the draft,
// rounds times, on workers goroutines.
func buildLoops(fx *registertest.Bundle, setups, runs, rounds, workers int) error {
	ctx := fx.Ctx
	loops := make(chan int)
	errs := make(chan error, workers)
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := range loops {
				if err := buildLoop(ctx, fx, k, setups, rounds); err != nil {
					errs <- err
					return
				}
			}
		}()
	}
	var err error
send:
	for k := range runs {
		select {
		case loops <- k:
		case err = <-errs:
			break send
		}
	}
	close(loops)
	wg.Wait()
	close(errs)
	if err != nil {
		return err
	}
	return <-errs
}

// buildLoop records and adjusts loop k of buildLoops.
func buildLoop(ctx context.Context, fx *registertest.Bundle, k, setups, rounds int) error {
	loop := booktest.Loop{Name: fmt.Sprintf("Generated loop %d", k+1), Setups: setups, MarkEvery: 1, FirstMark: 1001 + k*setups, Seed: uint64(k + 1)}
	rec, err := fx.Reg.Record(ctx, register.RecordParams{Path: fmt.Sprintf("loop-%d.csv", k+1), Book: loop.Book(), By: "bench", NewMarks: true})
	if err != nil {
		return err
	}
	held := loop.Marks()[0]
	if _, err := fx.Reg.HeightSet(ctx, register.HeightSetParams{Designation: held, Datum: "NAVD88", Value: "100.000", Unit: "m",
		Source: "invented", Reason: "bench", RecordedBy: "bench"}); err != nil {
		return err
	}
	for range rounds {
		p := fx.AdjustParams(registertest.AdjustmentOpts{Runs: []int64{rec.Run.ID}, Hold: []string{held}, By: "bench"})
		v, err := fx.Reg.Adjust(ctx, p)
		for try := 1; try < 10 && isConflict(err); try++ {
			// Adjust tries its own snapshot up to three times against the
			// other goroutines' commits; try again from the start.
			v, err = fx.Reg.Adjust(ctx, p)
		}
		if err != nil {
			return fmt.Errorf("adjust loop %d: %w", k+1, err)
		}
		if _, err := fx.Reg.Publish(ctx, register.PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "bench", By: "bench"}); err != nil {
			return fmt.Errorf("publish loop %d: %w", k+1, err)
		}
	}
	return nil
}

// isConflict says whether err is the register's conflict with another
// writer (nothing was written; try again).
func isConflict(err error) bool {
	var ce *register.ConflictError
	return errors.As(err, &ce) || errors.Is(err, store.ErrConflict)
}

// envInt reads a positive whole number from the environment, or def.
func envInt(b *testing.B, name string, def int) int {
	s := os.Getenv(name)
	if s == "" {
		return def
	}
	n, err := strconv.Atoi(s)
	if err != nil || n <= 0 {
		b.Fatalf("%s=%q: want a positive whole number", name, s)
	}
	return n
}

// peakMB is the process's peak resident memory in MB, from
// /proc/self/status (Linux).
func peakMB(b *testing.B) float64 {
	st, err := os.ReadFile("/proc/self/status")
	if err != nil {
		b.Fatal(err)
	}
	for _, line := range strings.Split(string(st), "\n") {
		if f := strings.Fields(line); len(f) == 3 && f[0] == "VmHWM:" {
			kb, err := strconv.ParseFloat(f[1], 64)
			if err != nil {
				b.Fatal(err)
			}
			return kb / 1024
		}
	}
	b.Fatal("no VmHWM in /proc/self/status")
	return 0
}

// BenchmarkAuditSincePublication is the incremental audit after a
// publication: a loop of CAIRN_BENCH_AUDIT_PUB_MARKS setups (default
// 50,000), a new mark at each, recorded, its first mark given an outside
// height, adjusted holding it, a statement made, and
// then the adjustment published (the marks' versions, written after the
// statement). since-all is all of audit verify --since after reading the
// statement, as the command does it (the evidence read while the chains
// are), the adjustment computed again from its stored inputs among the
// rest; derive-schema the derivation and the schema alone; evidence and
// chains the others alone.
func BenchmarkAuditSincePublication(b *testing.B) {
	marks := envInt(b, "CAIRN_BENCH_AUDIT_PUB_MARKS", 50000)
	fx := registertest.Setup(b)
	fx.Datum(b, registertest.DatumOpts{})
	loop := booktest.Loop{Setups: marks, MarkEvery: 1, Seed: 1}
	rec := fx.Run(b, registertest.RunOpts{Path: "large.csv", Book: loop.Book(), By: "bench", NewMarks: true})
	fx.Height(b, registertest.HeightOpts{Designation: "TC-1001", Value: "100.000", Unit: "m", Source: "invented", Reason: "bench", By: "bench"})
	// Proportional, the register's default: a least-squares solution of
	// one loop has one redundancy, and its chi-square test refuses the
	// generated readings' near-zero misclosure.
	v := fx.Adjustment(b, registertest.AdjustmentOpts{Runs: []int64{rec.Run.ID}, Hold: []string{"TC-1001"}, By: "bench"})
	stmt, _, err := fx.Reg.MakeStatement(fx.Ctx, "bench", nil)
	if err != nil {
		b.Fatal(err)
	}
	fx.Publication(b, v.Adjustment.ID, registertest.PublicationOpts{Reason: "bench", By: "bench"})
	xid, err := fx.Reg.StatementXid(fx.Ctx, stmt)
	if err != nil {
		b.Fatal(err)
	}
	published := marks - 1
	fx.Reg.UseSchemaCache(auditcache.Dir{Path: cacheDir})
	if _, err := fx.Reg.AuditVerifySince(fx.Ctx, xid, nil); err != nil { // the cache filled
		b.Fatal(err)
	}
	b.Run("since-all", func(b *testing.B) {
		for b.Loop() {
			register.ForgetFreshSchemas()
			xid, err := fx.Reg.StatementXid(fx.Ctx, stmt)
			if err != nil {
				b.Fatal(err)
			}
			type evidence struct {
				rep register.EvidenceReport
				err error
			}
			evc := make(chan evidence, 1)
			go func() {
				ev, err := fx.Reg.EvidenceVerifySince(fx.Ctx, stmt)
				evc <- evidence{ev, err}
			}()
			rep, err := fx.Reg.AuditVerifySince(fx.Ctx, xid, nil)
			ev := <-evc
			if ev.err != nil || len(ev.rep.Breaks) != 0 || ev.rep.Commits != 1 {
				b.Fatalf("evidence since: %v, %d commits, %+v", ev.err, ev.rep.Commits, ev.rep.Breaks)
			}
			if err != nil || rep.Count() != 0 || rep.Versions != published || rep.Adjustments != 1 || rep.SchemaFrom != register.SchemaFromCache {
				b.Fatalf("audit since: %v, %d versions (want %d), %d adjustments, schema from %q, %+v %+v", err, rep.Versions, published, rep.Adjustments, rep.SchemaFrom, rep.Breaks, rep.Findings)
			}
		}
	})
	b.Run("derive-schema", func(b *testing.B) {
		for b.Loop() {
			register.ForgetFreshSchemas()
			rep, err := fx.Reg.AuditDeriveSince(fx.Ctx, xid)
			if err != nil || rep.Count() != 0 || rep.Adjustments != 1 {
				b.Fatalf("derive since: %v, %d adjustments, %+v", err, rep.Adjustments, rep.Findings)
			}
		}
	})
	b.Run("evidence", func(b *testing.B) {
		for b.Loop() {
			if ev, err := fx.Reg.EvidenceVerifySince(fx.Ctx, stmt); err != nil || len(ev.Breaks) != 0 {
				b.Fatalf("evidence since: %v, %+v", err, ev.Breaks)
			}
		}
	})
	b.Run("chains", func(b *testing.B) {
		for b.Loop() {
			if rep, err := fx.Reg.AuditChainsSince(fx.Ctx, &xid); err != nil || len(rep.Breaks) != 0 || rep.Versions != published {
				b.Fatalf("chains since: %v, %d versions, %+v", err, rep.Versions, rep.Breaks)
			}
		}
	})
}
