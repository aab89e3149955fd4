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
