package booktest

import (
	"bytes"
	"math"
	"testing"

	"cairn/internal/levelbook"
	"cairn/internal/reduce"
)

// A generated loop parses, reduces through its marks in order, passes every
// check of its class, closes within half a millimetre, and is the same bytes
// each time.
func TestLoopReducesCleanly(t *testing.T) {
	t.Parallel()
	for _, l := range []Loop{
		{Setups: 2},
		{Setups: 7, MarkEvery: 3},
		{Setups: 120, Seed: 4},
		{Setups: 20000, Seed: 9},
		{Setups: 30, MarkEvery: 10, Designations: []string{"TC-0000412", "TC-0000007", "TC-0123456"}},
	} {
		data := l.Book()
		if !bytes.Equal(data, l.Book()) {
			t.Fatalf("%+v: two books differ", l)
		}
		book, err := levelbook.Parse("loop.csv", data)
		if err != nil {
			t.Fatalf("%+v: %v", l, err)
		}
		res, err := reduce.Reduce(book, reduce.Options{})
		if err != nil {
			t.Fatalf("%+v: %v", l, err)
		}
		if res.Class == "" || len(res.Setups) != l.Setups || !res.Loop {
			t.Errorf("%+v: class %q, %d setups, loop %v", l, res.Class, len(res.Setups), res.Loop)
		}
		marks := l.Marks()
		if len(res.Sections) != l.Sections() {
			t.Fatalf("%+v: %d sections, want %d", l, len(res.Sections), l.Sections())
		}
		for i, s := range res.Sections {
			to := marks[(i+1)%len(marks)]
			if s.From != marks[i] || s.To != to {
				t.Errorf("%+v: section %d runs %s to %s, want %s to %s", l, i+1, s.From, s.To, marks[i], to)
			}
		}
		for _, f := range res.Failures {
			t.Errorf("%+v: line %d: %s: %s", l, f.Line, f.Kind, f.Message)
		}
		if len(res.Misclosures) != 1 || math.Abs(res.Misclosures[0].MisclosureM) > 0.0005 {
			t.Errorf("%+v: misclosures %+v", l, res.Misclosures)
		}
	}
}
