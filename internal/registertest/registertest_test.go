package registertest_test

import (
	"fmt"
	"strings"
	"testing"

	"cairn/internal/registertest"
)

// recorder is a test that keeps the failures reported to it.
type recorder struct {
	testing.TB
	failures []string
}

func (r *recorder) Errorf(format string, args ...any) {
	r.failures = append(r.failures, fmt.Sprintf(format, args...))
}

// The zero options give the documented defaults.
func TestFactoryDefaults(t *testing.T) {
	t.Parallel()
	b := registertest.Setup(t)
	m1, m2 := b.Mark(t, registertest.MarkOpts{}), b.Mark(t, registertest.MarkOpts{})
	if m1.Designation != "TC-0412" || m2.Designation != "TC-0413" || m1.Lat == nil || *m1.Lat != 41.62 || *m1.Lon != -97.95 {
		t.Fatalf("default marks %+v and %+v", m1, m2)
	}
	h := b.Height(t, registertest.HeightOpts{Designation: "TC-0412"})
	if *h.Value != "10.000" || *h.Unit != "m" || h.SourceKind != "authority" || h.RecordedBy != registertest.By {
		t.Fatalf("default height %+v", h)
	}
	c := b.Condition(t, registertest.ConditionOpts{})
	if c.Condition != "good" || c.ObservedOn.Format("2006-01-02") != "2024-05-01" {
		t.Fatalf("default condition %+v", c)
	}
	r1, r2 := b.Run(t, registertest.RunOpts{}), b.Run(t, registertest.RunOpts{})
	if string(r1.Run.BookSHA256) == string(r2.Run.BookSHA256) || len(b.Runs) != 2 {
		t.Fatalf("default runs %d and %d, bundle runs %v", r1.Run.ID, r2.Run.ID, b.Runs)
	}
	b.AssertCounts(t, map[string]int64{"datum": 1, "mark": 6, "height": 1, "run": 2})
}

// The worked circuit is adjusted and published with the defaults: its
// runs, holding BM1.
func TestWorkedCircuitAdjustPublish(t *testing.T) {
	t.Parallel()
	b := registertest.Setup(t)
	runs := b.WorkedCircuit(t, registertest.WorkedCircuitOpts{Copies: 2})
	if len(runs) != 2 || len(b.Held) != 1 || b.Held[0] != "BM1" {
		t.Fatalf("runs %v, held %v", runs, b.Held)
	}
	before := b.Counts(t)
	v := b.Adjustment(t, registertest.AdjustmentOpts{Runs: runs[:1]})
	pub := b.Publication(t, v.Adjustment.ID, registertest.PublicationOpts{})
	if len(pub.Versions) != 5 {
		t.Fatalf("%d versions published, want 5", len(pub.Versions))
	}
	b.AssertWrote(t, before, map[string]int64{"adjustment": 1, "adjustment_run": 1, "adjustment_held": 1,
		"adjustment_result": 6, "adjustment_event": 1, "height": 5, "register_commit": 2})
}

// The assertions fail when they should, naming the table.
func TestAssertionsFail(t *testing.T) {
	t.Parallel()
	b := registertest.Setup(t)
	before := b.Counts(t)
	b.Mark(t, registertest.MarkOpts{})
	r := &recorder{TB: t}
	if b.AssertNothingWritten(r, before) || len(r.failures) != 1 || !strings.Contains(r.failures[0], "mark 0 → 1") {
		t.Errorf("AssertNothingWritten after a mark: %q", r.failures)
	}
	r = &recorder{TB: t}
	if b.AssertWrote(r, before, map[string]int64{"datum": 1}) || len(r.failures) != 1 {
		t.Errorf("AssertWrote of a datum after a mark: %q", r.failures)
	}
	r = &recorder{TB: t}
	if b.AssertCounts(r, map[string]int64{"mark": 2}) || len(r.failures) != 1 {
		t.Errorf("AssertCounts of 2 marks after 1: %q", r.failures)
	}
	r = &recorder{TB: t}
	if !b.AssertWrote(r, before, map[string]int64{"mark": 1, "register_commit": 1}) || !b.AssertCounts(r, map[string]int64{"mark": 1}) || len(r.failures) != 0 {
		t.Errorf("assertions that hold failed: %q", r.failures)
	}
}
