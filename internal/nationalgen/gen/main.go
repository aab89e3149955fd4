// Command gen writes an invented national-scale register in the import
// layout (package nationalgen), for `cairn import` and the benchmarks:
//
//	go run ./internal/nationalgen/gen -marks 1000000 -out national
//	cairn datum add NAVD88 --name "North American Vertical Datum of 1988"
//	cairn import national
//
// Every name, position and height it writes is invented.
package main

import (
	"flag"
	"fmt"
	"os"

	"cairn/internal/nationalgen"
)

func main() {
	marks := flag.Int("marks", 100000, "how many marks")
	out := flag.String("out", "", "the folder to write (must not hold the files)")
	seed := flag.Uint64("seed", 1, "the seed of the positions and heights")
	flag.Parse()
	if *out == "" {
		fmt.Fprintln(os.Stderr, "gen: -out: name the folder to write")
		os.Exit(2)
	}
	lay, err := nationalgen.Write(*out, *marks, *seed)
	if err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
	fmt.Printf("wrote %s: %d marks, %d condition reports, %d height versions (invented)\n", *out, lay.Marks, lay.Conditions, lay.Heights)
}
