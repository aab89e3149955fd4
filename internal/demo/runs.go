package demo

import (
	"context"
	"embed"
	"path"

	"cairn/internal/register"
)

// Books holds the demo's two field books, copies of testdata/books (a test
// keeps them identical).
//
//go:embed books/*.csv
var Books embed.FS

// demoBooks are the books the demo records, with the held heights each
// book's comments give (in its unit). The marks they name that the
// register lacks are created, unverified.
var demoBooks = []struct {
	file string
	hold map[string]float64
}{
	{"tallis-north-loop.csv", nil},
	{"mere-river-line.csv", map[string]float64{"TC-0420": 3.5120, "TC-0427": 5.1040}},
}

func recordBooks(ctx context.Context, r *register.Register) error {
	for _, b := range demoBooks {
		data, err := Books.ReadFile(path.Join("books", b.file))
		if err != nil {
			return err
		}
		if _, err := r.Record(ctx, register.RecordParams{Path: b.file, Book: data, By: Clerk, Hold: b.hold, NewMarks: true}); err != nil {
			return err
		}
	}
	return nil
}
