// Command cairn keeps a register of survey benchmarks, the level circuits run
// over them, and every height ever published for them.
package main

import (
	"os"

	"cairn/internal/cli"
)

func main() {
	os.Exit(cli.Main(os.Args[1:]))
}
