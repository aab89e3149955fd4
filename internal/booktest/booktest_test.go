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

// A generated line parses, reduces to its sections in order with the
// differences asked for (to the millimetre) and lengths near those asked
// for, and, held at both ends at heights that differ by the sum of its
// sections, passes every check of its class.
func TestLineReducesCleanly(t *testing.T) {
	t.Parallel()
	l := Line{Marks: []string{"TC-2001", "TC-2002", "TC-2003", "TC-2004"}, DhM: []float64{7.3214, -0.0004, -12.5}, LengthM: []float64{820, 35, 2400}, Seed: 3}
	book, err := levelbook.Parse("line.csv", l.Book())
	if err != nil {
		t.Fatal(err)
	}
	// 7.321 + 0.000 - 12.500 m, as booked to the millimetre.
	res, err := reduce.Reduce(book, reduce.Options{Hold: map[string]float64{"TC-2001": 100, "TC-2004": 94.821}})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Sections) != 3 || res.Loop {
		t.Fatalf("%d sections, loop %v", len(res.Sections), res.Loop)
	}
	for i, s := range res.Sections {
		if s.From != l.Marks[i] || s.To != l.Marks[i+1] {
			t.Errorf("section %d runs %s to %s", i+1, s.From, s.To)
		}
		if want := math.Round(l.DhM[i]*1000) / 1000; math.Abs(s.DifferenceM-want) > 1e-9 {
			t.Errorf("section %d: difference %.4f m, want %.3f", i+1, s.DifferenceM, want)
		}
		if s.LengthM < l.LengthM[i]*0.9 || s.LengthM > l.LengthM[i]*1.1+10 {
			t.Errorf("section %d: length %.1f m, want about %.0f", i+1, s.LengthM, l.LengthM[i])
		}
	}
	for _, f := range res.Failures {
		t.Errorf("line %d: %s: %s", f.Line, f.Kind, f.Message)
	}
}
