package cli

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"
)

// Format is an output format of a command that prints data.
type Format string

// The output formats.
const (
	FormatTable Format = "table"
	FormatJSON  Format = "json"
	FormatCSV   Format = "csv"
)

// Table is tabular data: headers (with units, e.g. "HEIGHT (m)") and rows of
// already formatted cells.
type Table struct {
	Headers []string
	Rows    [][]string
}

// AddRow appends one row of cells.
func (t *Table) AddRow(cells ...string) { t.Rows = append(t.Rows, cells) }

// addOutputFlag adds -o/--output to a command that prints data.
func addOutputFlag(cmd *cobra.Command, f *Format) {
	*f = FormatTable
	cmd.Flags().VarP((*formatValue)(f), "output", "o", "output format: table, json or csv")
	_ = cmd.RegisterFlagCompletionFunc("output", func(*cobra.Command, []string, string) ([]string, cobra.ShellCompDirective) {
		return []string{"table", "json", "csv"}, cobra.ShellCompDirectiveNoFileComp
	})
}

type formatValue Format

func (v *formatValue) String() string { return string(*v) }
func (v *formatValue) Type() string   { return "format" }
func (v *formatValue) Set(s string) error {
	switch Format(strings.ToLower(s)) {
	case FormatTable, FormatJSON, FormatCSV:
		*v = formatValue(strings.ToLower(s))
		return nil
	}
	return fmt.Errorf("unknown output format %q (want table, json or csv)", s)
}

// writeTable writes t: aligned with headers on a terminal, tab-separated
// rows without headers when piped, or CSV with a header row.
func writeTable(ios *IOStreams, format Format, t Table) error {
	switch format {
	case FormatCSV:
		w := csv.NewWriter(ios.Out)
		if err := w.Write(t.Headers); err != nil {
			return err
		}
		if err := w.WriteAll(t.Rows); err != nil {
			return err
		}
		return w.Error()
	case FormatJSON:
		return fmt.Errorf("cli: writeTable called with json")
	}
	// A cell is one line of plain text, whatever the register holds
	// (visible.go).
	for _, r := range t.Rows {
		for i, c := range r {
			r[i] = visible(c)
		}
	}
	if !ios.IsTerminal {
		for _, r := range t.Rows {
			if _, err := fmt.Fprintln(ios.Out, strings.Join(r, "\t")); err != nil {
				return err
			}
		}
		return nil
	}
	tw := tabwriter.NewWriter(ios.Out, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, strings.Join(t.Headers, "\t"))
	for _, r := range t.Rows {
		fmt.Fprintln(tw, strings.Join(r, "\t"))
	}
	return tw.Flush()
}

// writeJSON writes v as indented JSON with a final newline. Values passed here
// must have stable snake_case JSON keys.
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// render prints data in the chosen format: v as JSON, or the table built by
// table for table and csv output.
func render(ios *IOStreams, format Format, v any, table func() Table) error {
	if format == FormatJSON {
		return writeJSON(ios.Out, v)
	}
	return writeTable(ios, format, table())
}

// deref is *p, or the zero value for nil: a cell of an optional value.
func deref[T any](p *T) T {
	var zero T
	if p == nil {
		return zero
	}
	return *p
}
