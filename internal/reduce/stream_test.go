package reduce

import (
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"cairn/internal/booktest"
	"cairn/internal/levelbook"
	"cairn/internal/standards"
)

// scanned reduces data with ReduceScan, a sighting at a time.
func scanned(t *testing.T, data []byte, o Options) (*Result, error) {
	t.Helper()
	sum, err := levelbook.Summarize("t.csv", data)
	if err != nil {
		t.Fatal(err)
	}
	sc, err := sum.Rescan(data)
	if err != nil {
		t.Fatal(err)
	}
	res, err := ReduceScan(sum, func(yield func(*levelbook.Sighting) bool) {
		for sc.Next() && yield(sc.Sighting()) {
		}
	}, o)
	if sc.Err() != nil {
		t.Fatal(sc.Err())
	}
	return res, err
}

// without is r as JSON, its rows and setups left out.
func without(t *testing.T, r *Result) string {
	t.Helper()
	c := *r
	c.Rows, c.Setups = nil, nil
	b, err := json.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// A book reduced a sighting at a time (ReduceScan) comes out as Reduce
// reduces it whole, rows and setups apart, under every option: every
// section, closure, double run, connection, spot height, held sight, check
// and failure, and the summary; Republish gives what Reduce gives with the
// published heights. Reduce, checked against the worked examples of
// reduce_test.go, is the reference.
func TestReduceScanIsReduce(t *testing.T) {
	t.Parallel()
	type input struct {
		name string
		data []byte
		opts []Options
		pub  map[string]float64
	}
	var inputs []input
	file := func(name string) []byte {
		data, err := os.ReadFile(filepath.Join(books, name))
		if err != nil {
			t.Fatal(err)
		}
		return data
	}
	third := standards.Class("third")
	inputs = append(inputs,
		input{"mere-river-line.csv", file("mere-river-line.csv"), []Options{{}, {Hold: map[string]float64{"TC-0420": 10, "TC-0424": 10.9}}, {Class: "first-I"}, {CurvatureRefraction: true}},
			map[string]float64{"TC-0422": 10.4}},
		input{"orrin-bay-spot-heights.csv", file("orrin-bay-spot-heights.csv"), []Options{{}, {Hold: map[string]float64{"TC-0420": 10}}, {Hold: map[string]float64{"TC-0420": 10}, Class: "first-I"}}, nil},
		input{"tallis-north-loop.csv", file("tallis-north-loop.csv"), []Options{{}, {Class: third}, {Hold: map[string]float64{"TC-0413": 3}}}, map[string]float64{"TC-0412": 1, "TC-0415": 2}},
		input{"usm-ukur-aras.csv", file("usm-ukur-aras.csv"), []Options{{}, {Hold: map[string]float64{"OBM1": 29.23, "OBM2": 29.66}}}, nil},
		input{"generated loop", booktest.Loop{Setups: 600, MarkEvery: 7, Seed: 3}.Book(), []Options{{}, {Class: "first-I"}, {Hold: map[string]float64{"TC-1003": 5}}},
			map[string]float64{"TC-1001": 0, "TC-1050": 3}},
	)
	for _, in := range inputs {
		full, err := levelbook.Parse("t.csv", in.data)
		if err != nil {
			t.Fatalf("%s: %v", in.name, err)
		}
		for _, o := range in.opts {
			want, werr := Reduce(full, o)
			got, gerr := scanned(t, in.data, o)
			if (werr == nil) != (gerr == nil) || werr != nil && werr.Error() != gerr.Error() {
				t.Errorf("%s %+v: error %v, want %v", in.name, o, gerr, werr)
				continue
			}
			if werr != nil {
				continue
			}
			if len(got.Rows) != 0 || len(got.Setups) != 0 {
				t.Errorf("%s %+v: %d rows, %d setups kept", in.name, o, len(got.Rows), len(got.Setups))
			}
			if g, w := without(t, got), without(t, want); g != w {
				t.Errorf("%s %+v:\n got %s\nwant %s", in.name, o, g, w)
			}
			if in.pub == nil {
				continue
			}
			po := o
			po.Published = in.pub
			wantPub, err := Reduce(full, po)
			if err != nil {
				t.Fatal(err)
			}
			got.Republish(in.pub)
			want.Republish(in.pub)
			if g, w := without(t, got), without(t, wantPub); g != w {
				t.Errorf("%s %+v, published: \n got %s\nwant %s", in.name, o, g, w)
			}
			if g, w := without(t, want), without(t, wantPub); g != w {
				t.Errorf("%s %+v, republished whole: \n got %s\nwant %s", in.name, o, g, w)
			}
		}
	}
}

// The rows of a book scanned again (ScanRows), after a reduction a
// sighting at a time or whole, are Reduce's rows, in order, each
// foresight with Reduce's setup, under every option, and the scan stops
// when asked. Reduce, checked against the worked examples of
// reduce_test.go, is the reference.
func TestScanRowsIsReducesRows(t *testing.T) {
	t.Parallel()
	file := func(name string) []byte {
		data, err := os.ReadFile(filepath.Join(books, name))
		if err != nil {
			t.Fatal(err)
		}
		return data
	}
	inputs := []struct {
		name string
		data []byte
		opts []Options
	}{
		{"mere-river-line.csv", file("mere-river-line.csv"), []Options{{}, {Hold: map[string]float64{"TC-0420": 10}}, {CurvatureRefraction: true}}},
		{"orrin-bay-spot-heights.csv", file("orrin-bay-spot-heights.csv"), []Options{{}, {Hold: map[string]float64{"TC-0420": 10}}}},
		{"tallis-north-loop.csv", file("tallis-north-loop.csv"), []Options{{}, {Hold: map[string]float64{"TC-0413": 3}}}},
		{"generated loop", booktest.Loop{Setups: 600, MarkEvery: 7, Seed: 3}.Book(), []Options{{}, {Hold: map[string]float64{"TC-1003": 5}}}},
	}
	for _, in := range inputs {
		full, err := levelbook.Parse("t.csv", in.data)
		if err != nil {
			t.Fatalf("%s: %v", in.name, err)
		}
		for _, o := range in.opts {
			want, err := Reduce(full, o)
			if err != nil {
				t.Fatalf("%s %+v: %v", in.name, o, err)
			}
			streamed, err := scanned(t, in.data, o)
			if err != nil {
				t.Fatal(err)
			}
			for _, from := range []*Result{streamed, want} {
				sum, err := levelbook.Summarize("t.csv", in.data)
				if err != nil {
					t.Fatal(err)
				}
				sc, err := sum.Rescan(in.data)
				if err != nil {
					t.Fatal(err)
				}
				var rows []Row
				var setups []Setup
				err = from.ScanRows(sum, func(yield func(*levelbook.Sighting) bool) {
					for sc.Next() && yield(sc.Sighting()) {
					}
				}, func(r Row, s *Setup) bool {
					rows = append(rows, r)
					if (s != nil) != (r.Sight == levelbook.Foresight) {
						t.Errorf("%s %+v: line %d (%v) with setup %v", in.name, o, r.Line, r.Sight, s)
					}
					if s != nil {
						setups = append(setups, *s)
					}
					return true
				})
				if err != nil {
					t.Fatal(err)
				}
				g, _ := json.Marshal(struct {
					R []Row
					S []Setup
				}{rows, setups})
				w, _ := json.Marshal(struct {
					R []Row
					S []Setup
				}{want.Rows, want.Setups})
				if string(g) != string(w) {
					t.Errorf("%s %+v: the rows scanned again differ from Reduce's:\n got %.600s\nwant %.600s", in.name, o, g, w)
				}
			}
			n := 0
			sum, _ := levelbook.Summarize("t.csv", in.data)
			sc, _ := sum.Rescan(in.data)
			if err := want.ScanRows(sum, func(yield func(*levelbook.Sighting) bool) {
				for sc.Next() && yield(sc.Sighting()) {
				}
			}, func(Row, *Setup) bool { n++; return n < 3 }); err != nil || n != 3 {
				t.Errorf("%s: a scan asked to stop after 3 rows saw %d (%v)", in.name, n, err)
			}
		}
	}
}
