package cli

import (
	"fmt"

	"cairn/internal/sheetdata"
)

// cautions go with every height cairn gives out: in `height set --help`,
// the demo's output and reports.
const cautions = sheetdata.Cautions

// reportCautions ends a report read at a terminal with the cautions.
func reportCautions(ios *IOStreams, format Format) {
	if format == FormatTable && ios.IsTerminal {
		fmt.Fprintln(ios.ErrOut, "\n"+cautions)
	}
}
