package cli

import "fmt"

// cautions go with every height cairn gives out: in `height set --help`,
// the demo's output and reports.
const cautions = `Cautions: heights from this register need review by a licensed surveyor
before use. Check into two marks. Verify a mark's condition in the field
before relying on it. Local codes and regulations govern.`

// reportCautions ends a report read at a terminal with the cautions.
func reportCautions(ios *IOStreams, format Format) {
	if format == FormatTable && ios.IsTerminal {
		fmt.Fprintln(ios.ErrOut, "\n"+cautions)
	}
}
