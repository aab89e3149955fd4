package demo

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"
)

// The embedded books are the ones under testdata/books, byte for byte.
func TestBooksMatchTestdata(t *testing.T) {
	for _, b := range demoBooks {
		want, err := os.ReadFile(filepath.Join("..", "..", "testdata", "books", b.file))
		if err != nil {
			t.Fatal(err)
		}
		got, err := Books.ReadFile("books/" + b.file)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got, want) {
			t.Errorf("books/%s differs from testdata/books/%s", b.file, b.file)
		}
	}
}
