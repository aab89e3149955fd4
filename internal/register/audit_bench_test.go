package register_test

import (
	"context"
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
