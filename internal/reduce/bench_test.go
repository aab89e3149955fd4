package reduce

import (
	"fmt"
	"strings"
	"testing"

	"cairn/internal/levelbook"
)

// bigBook writes an invented line of n setups, a mark every 10 setups.
func bigBook(n int) []byte {
	var sb strings.Builder
	sb.WriteString("# units: m\n# class: second-II\npoint,sight,upper,middle,lower\n")
	name := func(i int) string {
		if i%10 == 0 {
			return fmt.Sprintf("TC-%04d", i/10)
		}
		return fmt.Sprintf("TP%d", i)
	}
	for i := 0; i < n; i++ {
		fmt.Fprintf(&sb, "%s,BS,1.750,1.500,1.250\n%s,FS,1.640,1.400,1.160\n", name(i), name(i+1))
	}
	return []byte(sb.String())
}

// BenchmarkParseReduce10k parses and reduces a book of 10 000 setups
// (20 000 sightings, about 1000 sections).
func BenchmarkParseReduce10k(b *testing.B) {
	data := bigBook(10000)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		book, err := levelbook.Parse("big.csv", data)
		if err != nil {
			b.Fatal(err)
		}
		if _, err := Reduce(book, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}
