package levelbook

import (
	"bytes"
	"crypto/sha256"
	"os"
	"path/filepath"
	"reflect"
	"testing"
)

// Summarize reads a book as Parse does and keeps no sighting: the same
// count, the points in the order the sightings first name them, and the
// fingerprint that crypto/sha256 gives over the canonical text
// (Observations); Rescan gives the same sightings again.
func TestSummarizeIsParseWithoutSightings(t *testing.T) {
	t.Parallel()
	var inputs [][]byte
	files, err := filepath.Glob(filepath.Join(books, "*.csv"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no books (%v)", err)
	}
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		inputs = append(inputs, data, append([]byte("\ufeff"), bytes.ReplaceAll(data, []byte("\n"), []byte("\r\n"))...))
	}
	// Every sighting of a kind, a point escaped, no three wires at all
	// (the canonical text then says "reading=-").
	inputs = append(inputs,
		[]byte("# units: m\npoint,sight,middle,distance\nTC-1,BS,1.2,30\n\"TP\t1\",FS,1.3,30\n\"TP\t1\",BS,1.1,\nS%1,IS,0.9,\nTC-1,FS,1.0,\n"),
		[]byte("# units: ft\n# reading: middle\npoint,kind,sight,upper,middle,lower,note\nA,,BS,1.3,1.2,1.1,x\nB,spot,IS,,2,,floor\nC,,FS,1.45,1.4,1.35,\nC,,BS,,1.1,,\nA,,FS,,1.0,,\n"))
	for k, data := range inputs {
		full, err := Parse("b.csv", data)
		if err != nil {
			t.Fatalf("input %d: %v", k, err)
		}
		sum, err := Summarize("b.csv", data)
		if err != nil {
			t.Fatalf("input %d: %v", k, err)
		}
		if sum.Sightings != nil || sum.Count != len(full.Sightings) || full.Count != len(full.Sightings) {
			t.Errorf("input %d: summary keeps %d sightings, counts %d; the book has %d", k, len(sum.Sightings), sum.Count, len(full.Sightings))
		}
		if want := sha256.Sum256(full.Observations()); sum.ObservationsSHA256() != want || full.ObservationsSHA256() != want {
			t.Errorf("input %d: fingerprint %x, parsed %x, want %x", k, sum.ObservationsSHA256(), full.ObservationsSHA256(), want)
		}
		// The points, worked out from the sightings another way.
		var want []Point
		at := map[string]int{}
		for _, s := range full.Sightings {
			i, ok := at[s.Point]
			if !ok {
				i = len(want)
				at[s.Point] = i
				want = append(want, Point{Name: s.Point, Line: s.Line, TurningPoint: s.TurningPoint, Spot: s.Spot})
			}
			want[i].Carries = want[i].Carries || s.Sight != Intermediate
		}
		if !reflect.DeepEqual(sum.Points, want) || !reflect.DeepEqual(full.Points, want) {
			t.Errorf("input %d: points %+v, want %+v", k, sum.Points, want)
		}
		sc, err := sum.Rescan(data)
		if err != nil {
			t.Fatal(err)
		}
		n := 0
		for sc.Next() {
			if n >= len(full.Sightings) || !reflect.DeepEqual(*sc.Sighting(), full.Sightings[n]) {
				t.Fatalf("input %d: rescanned sighting %d differs: %+v", k, n+1, *sc.Sighting())
			}
			n++
		}
		if sc.Err() != nil || n != len(full.Sightings) {
			t.Errorf("input %d: rescan gave %d sightings, %v", k, n, sc.Err())
		}
	}
	if _, err := (&Book{Name: "b.csv"}).Rescan([]byte("x")); err == nil {
		t.Error("a book never read rescans")
	}
}

// Summarize refuses what Parse refuses, with the same error; a fault in a
// row is reported before a fault of shape on an earlier row, as when the
// shape was checked after every row had been read.
func TestSummarizeRefusesAsParse(t *testing.T) {
	t.Parallel()
	const h = "# units: m\npoint,sight,middle\n"
	inputs := map[string]string{
		"shape then row":   h + "TP1,BS,1\nTC-1,FS,1\nTC-1,BS,1x\n",
		"shape at the end": h + "TC-1,BS,1\nTC-2,FS,1\nTC-2,BS,1\n",
		"two shape faults": h + "TC-1,FS,1\nTC-1,IS,1\n",
		"spot then mark":   "# units: m\npoint,kind,sight,middle\nA,,BS,1\nB,spot,IS,1\nB,,FS,1\n",
		"empty":            "",
		"header only":      h,
		"bad meta":         "# units: yd\n",
	}
	files, _ := filepath.Glob(filepath.Join(books, "bad", "*.csv"))
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		inputs[filepath.Base(f)] = string(data)
	}
	for name, data := range inputs {
		_, perr := Parse("b.csv", []byte(data))
		_, serr := Summarize("b.csv", []byte(data))
		if perr == nil || serr == nil || perr.Error() != serr.Error() {
			t.Errorf("%s: Summarize %v, Parse %v", name, serr, perr)
		}
	}
	_, err := Summarize("b.csv", []byte(inputs["shape then row"]))
	if want := `b.csv:5: field "middle": not a number "1x"`; err == nil || err.Error() != want {
		t.Errorf("row fault after a fault of shape: %v, want %s", err, want)
	}
	_, err = Summarize("b.csv", []byte(inputs["two shape faults"]))
	if want := `b.csv:3: field "sight": the run must begin with a backsight, not FS`; err == nil || err.Error() != want {
		t.Errorf("first of two faults of shape: %v, want %s", err, want)
	}
}
