package levelbook_test

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"testing"

	"cairn/internal/levelbook"
	"cairn/internal/reduce"
)

// FuzzParse feeds arbitrary bytes to the parser: it must never panic, must
// fail only with a *levelbook.Error, and a book it accepts must be a valid
// sequence of setups that reduces without error to finite numbers.
func FuzzParse(f *testing.F) {
	for _, dir := range []string{"../../testdata/books", "../../testdata/books/bad"} {
		files, _ := filepath.Glob(filepath.Join(dir, "*.csv"))
		for _, file := range files {
			data, err := os.ReadFile(file)
			if err != nil {
				f.Fatal(err)
			}
			f.Add(data)
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		b, err := levelbook.Parse("fuzz.csv", data)
		if err != nil {
			var pe *levelbook.Error
			if !errors.As(err, &pe) {
				t.Fatalf("error %v is not a *levelbook.Error", err)
			}
			return
		}
		ss := b.Sightings
		if len(ss) < 2 || ss[0].Sight != levelbook.Backsight || ss[len(ss)-1].Sight != levelbook.Foresight {
			t.Fatalf("accepted a book that is not a run of setups: %+v", ss)
		}
		for i := 1; i < len(ss); i++ {
			if ss[i].Line <= ss[i-1].Line {
				t.Fatalf("line numbers not increasing: %d then %d", ss[i-1].Line, ss[i].Line)
			}
		}
		r, err := reduce.Reduce(b, reduce.Options{})
		if err != nil {
			t.Fatalf("a parsed book failed to reduce: %v", err)
		}
		for _, row := range r.Rows {
			if math.IsNaN(row.HeightM) {
				t.Fatalf("NaN height on line %d", row.Line)
			}
		}
		if len(r.Sections) == 0 || r.Sections[len(r.Sections)-1].To == "" {
			t.Fatalf("sections do not end on a mark: %+v", r.Sections)
		}
	})
}
