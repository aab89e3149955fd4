package cli

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"text/tabwriter"

	"cairn/internal/booktest"
	"cairn/internal/levelbook"
	"cairn/internal/reduce"
)

// The reduced notes written a row at a time (writeNotes), from the rows a
// whole reduction holds or from the book reduced again, are byte for byte
// the table text/tabwriter lays out from every row held (padding 2,
// trailing spaces trimmed, as the report's other tables): the standard
// library's layout is the reference.
func TestNotesStreamedAsTabwriter(t *testing.T) {
	t.Parallel()
	type input struct {
		name string
		data []byte
		opts reduce.Options
	}
	var inputs []input
	for _, name := range []string{"mere-river-line.csv", "orrin-bay-spot-heights.csv", "tallis-north-loop.csv", "usm-ukur-aras.csv"} {
		data, err := os.ReadFile(filepath.Join("../../testdata/books", name))
		if err != nil {
			t.Fatal(err)
		}
		inputs = append(inputs, input{name, data, reduce.Options{}})
	}
	inputs = append(inputs,
		input{"mere-river-line.csv, curvature and refraction", inputs[0].data, reduce.Options{CurvatureRefraction: true}},
		input{"generated loop", booktest.Loop{Setups: 3000, MarkEvery: 11, Seed: 9}.Book(), reduce.Options{Hold: map[string]float64{"TC-1003": 123.4567}}},
		// A note wider than any other cell, and names of several widths
		// in runes, not bytes.
		input{"wide cells", bytes.Replace(inputs[0].data, []byte("TC-0423"), []byte("TC-0423-Größe-ärger-ÆØÅ"), -1), reduce.Options{}},
	)
	for _, in := range inputs {
		full, err := levelbook.Parse("t.csv", in.data)
		if err != nil {
			t.Fatalf("%s: %v", in.name, err)
		}
		whole, err := reduce.Reduce(full, in.opts)
		if err != nil {
			t.Fatalf("%s: %v", in.name, err)
		}
		var want bytes.Buffer
		{
			tb := notesTable(whole)
			var buf bytes.Buffer
			tw := tabwriter.NewWriter(&buf, 0, 0, 2, ' ', 0)
			fmt.Fprintln(tw, strings.Join(tb.Headers, "\t"))
			for _, row := range tb.Rows {
				fmt.Fprintln(tw, strings.Join(row, "\t"))
			}
			tw.Flush()
			for _, line := range strings.SplitAfter(buf.String(), "\n") {
				want.WriteString(strings.TrimRight(line, " \n") + strings.Repeat("\n", strings.Count(line, "\n")))
			}
		}
		var got bytes.Buffer
		if err := writeNotes(&got, whole, rowsOf(whole)); err != nil {
			t.Fatal(err)
		}
		if got.String() != want.String() {
			t.Errorf("%s: the notes of the whole reduction:\n%s\nwant\n%s", in.name, got.String(), want.String())
		}
		sum, err := levelbook.Summarize("t.csv", in.data)
		if err != nil {
			t.Fatal(err)
		}
		sc, err := sum.Rescan(in.data)
		if err != nil {
			t.Fatal(err)
		}
		streamed, err := reduce.ReduceScan(sum, func(yield func(*levelbook.Sighting) bool) {
			for sc.Next() && yield(sc.Sighting()) {
			}
		}, in.opts)
		if err != nil {
			t.Fatal(err)
		}
		got.Reset()
		if err := writeNotes(&got, streamed, rowsScanned(streamed, in.data)); err != nil {
			t.Fatal(err)
		}
		if got.String() != want.String() {
			t.Errorf("%s: the notes of the book reduced again:\n%s\nwant\n%s", in.name, got.String(), want.String())
		}
	}
}

// The JSON report with its rows and setups written one at a time
// (writeJSONWithRows) is byte for byte encoding/json's report of the whole
// reduction, rows and setups held.
func TestJSONRowsStreamedAsTheEncoder(t *testing.T) {
	t.Parallel()
	for _, name := range []string{"mere-river-line.csv", "orrin-bay-spot-heights.csv", "tallis-north-loop.csv"} {
		data, err := os.ReadFile(filepath.Join("../../testdata/books", name))
		if err != nil {
			t.Fatal(err)
		}
		full, err := levelbook.Parse("t.csv", data)
		if err != nil {
			t.Fatal(err)
		}
		whole, err := reduce.Reduce(full, reduce.Options{})
		if err != nil {
			t.Fatal(err)
		}
		var want bytes.Buffer
		if err := writeJSON(&want, recordedJSON{Reduction: whole, CreatedMarks: []string{"TC-0421 <&>"}}); err != nil {
			t.Fatal(err)
		}
		sum, err := levelbook.Summarize("t.csv", data)
		if err != nil {
			t.Fatal(err)
		}
		sc, err := sum.Rescan(data)
		if err != nil {
			t.Fatal(err)
		}
		streamed, err := reduce.ReduceScan(sum, func(yield func(*levelbook.Sighting) bool) {
			for sc.Next() && yield(sc.Sighting()) {
			}
		}, reduce.Options{})
		if err != nil {
			t.Fatal(err)
		}
		res := *streamed
		res.Rows, res.Setups = nil, nil
		var got bytes.Buffer
		if err := writeJSONWithRows(&got, recordedJSON{Reduction: &res, CreatedMarks: []string{"TC-0421 <&>"}}, streamed, rowsScanned(streamed, data)); err != nil {
			t.Fatal(err)
		}
		if got.String() != want.String() {
			t.Errorf("%s: the JSON report differs:\n got %.2000s\nwant %.2000s", name, got.String(), want.String())
		}
	}
}
