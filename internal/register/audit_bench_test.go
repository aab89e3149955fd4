package register_test

import (
	"context"
	"os"
	"strconv"
	"strings"
	"testing"

	"cairn/internal/booktest"
	"cairn/internal/registertest"
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
// the fixed cost of the schema's comparison (a scratch database made,
// migrated, read and dropped).
func BenchmarkAuditVerifyEmpty(b *testing.B) {
	fx := registertest.Setup(b)
	for b.Loop() {
		rep, err := fx.Reg.AuditVerify(context.Background())
		if err != nil || rep.Count() != 0 {
			b.Fatalf("audit: %v, %+v", err, rep.Findings)
		}
	}
}

// BenchmarkAuditVerifyScaled: the whole audit of a register of one
// generated loop with a mark at every setup, CAIRN_BENCH_AUDIT_MARKS
// marks (default 100 000), adjusted and published CAIRN_BENCH_AUDIT_ROUNDS
// times (default 5), so that every mark but the held one has that many
// versions. It reports the process's peak resident memory (VmHWM) as
// peak-MB. Building the register is not timed.
func BenchmarkAuditVerifyScaled(b *testing.B) {
	marks, rounds := envInt(b, "CAIRN_BENCH_AUDIT_MARKS", 100000), envInt(b, "CAIRN_BENCH_AUDIT_ROUNDS", 5)
	fx := registertest.Setup(b)
	fx.Datum(b, registertest.DatumOpts{})
	loop := booktest.Loop{Setups: marks, MarkEvery: 1, Seed: 1}
	rec := fx.Run(b, registertest.RunOpts{Path: "large.csv", Book: loop.Book(), By: "bench", NewMarks: true})
	fx.Height(b, registertest.HeightOpts{Designation: "TC-1001", Value: "100.000", Unit: "m", Source: "invented", Reason: "bench", By: "bench"})
	for range rounds {
		v := fx.Adjustment(b, registertest.AdjustmentOpts{Runs: []int64{rec.Run.ID}, Hold: []string{"TC-1001"}, By: "bench"})
		fx.Publication(b, v.Adjustment.ID, registertest.PublicationOpts{Reason: "bench", By: "bench"})
	}
	b.ResetTimer()
	for b.Loop() {
		rep, err := fx.Reg.AuditVerify(context.Background())
		if err != nil || rep.Count() != 0 || rep.Runs != 1 || rep.Adjustments != rounds {
			b.Fatalf("audit: %v, %d breaks, %d versions, %d runs, %d adjustments", err, rep.Count(), rep.Versions, rep.Runs, rep.Adjustments)
		}
		b.ReportMetric(float64(rep.Versions), "versions")
	}
	b.ReportMetric(peakMB(b), "peak-MB")
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
