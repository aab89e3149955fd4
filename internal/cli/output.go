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
	// FormatGeoJSON is an RFC 7946 FeatureCollection (internal/geojson),
	// for the commands that list marks.
	FormatGeoJSON Format = "geojson"
)

// Table is tabular data: headers and rows of already formatted cells.
//
// The convention of headers, on every command (docs/output.md):
// a column holding a length or a height names its unit in parentheses,
// "HEIGHT (m)", "LENGTH (km)"; a column whose unit differs from row to row
// says "(in UNIT)" and is followed by its UNIT column: "HEIGHT (in UNIT)".
// On a terminal the headers are printed as written; piped and in CSV they
// are machineHeader's snake_case with the unit last: "height_m",
// "length_km", "height_in_unit".
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

// addGeoOutputFlag adds -o/--output to a command that lists marks: table,
// json, csv or geojson.
func addGeoOutputFlag(cmd *cobra.Command, f *Format) {
	*f = FormatTable
	cmd.Flags().VarP((*geoFormatValue)(f), "output", "o", "output format: table, json, csv or geojson (RFC 7946)")
	_ = cmd.RegisterFlagCompletionFunc("output", func(*cobra.Command, []string, string) ([]string, cobra.ShellCompDirective) {
		return []string{"table", "json", "csv", "geojson"}, cobra.ShellCompDirectiveNoFileComp
	})
}

type geoFormatValue Format

func (v *geoFormatValue) String() string { return string(*v) }
func (v *geoFormatValue) Type() string   { return "format" }
func (v *geoFormatValue) Set(s string) error {
	if Format(strings.ToLower(s)) == FormatGeoJSON {
		*v = geoFormatValue(FormatGeoJSON)
		return nil
	}
	if err := (*formatValue)(v).Set(s); err != nil {
		return fmt.Errorf("unknown output format %q (want table, json, csv or geojson)", s)
	}
	return nil
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

// perRowUnit ends the header of a column whose unit is given, row by row,
// in the table's UNIT column.
const perRowUnit = " (in UNIT)"

// machineHeader turns a display header into a snake_case header with its
// unit last, for piped tables and CSV: "HEIGHT (m)" becomes "height_m",
// "HEIGHT (in UNIT)" "height_in_unit", "C&R (usft)" "c_and_r_usft".
func machineHeader(h string) string {
	h = strings.ToLower(strings.TrimSpace(h))
	return strings.NewReplacer("&", "_and_", " (", "_", "(", "", ")", "", " ", "_").Replace(h)
}

func machineHeaders(hs []string) []string {
	out := make([]string, len(hs))
	for i, h := range hs {
		out[i] = machineHeader(h)
	}
	return out
}

// tsvCell keeps a cell on its line and in its column when piped: a tab, a
// line end and a backslash are written as \t, \n, \r and \\ (the
// escapes of PostgreSQL's text COPY format).
var tsvCell = strings.NewReplacer("\\", "\\\\", "\t", "\\t", "\n", "\\n", "\r", "\\r")

// writeTable writes t: aligned under its headers on a terminal; piped, one
// line of machine headers and then one tab-separated line per row; or CSV
// with a header row of machine headers.
func writeTable(ios *IOStreams, format Format, t Table) error {
	switch format {
	case FormatCSV:
		w := csv.NewWriter(ios.Out)
		if err := w.Write(machineHeaders(t.Headers)); err != nil {
			return err
		}
		if err := w.WriteAll(t.Rows); err != nil {
			return err
		}
		return w.Error()
	case FormatJSON, FormatGeoJSON:
		return fmt.Errorf("cli: writeTable called with %s", format)
	}
	// A cell is one line of plain text, whatever the register holds: piped,
	// its tabs, line ends and backslashes escaped as COPY does, then the
	// other hidden characters made visible (visible.go); on a terminal, all
	// of them made visible.
	for _, r := range t.Rows {
		for i, c := range r {
			if !ios.IsTerminal {
				c = tsvCell.Replace(c)
			}
			r[i] = visible(c)
		}
	}
	if !ios.IsTerminal {
		if _, err := fmt.Fprintln(ios.Out, strings.Join(machineHeaders(t.Headers), "\t")); err != nil {
			return err
		}
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
