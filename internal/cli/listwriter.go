package cli

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"strings"
	"text/tabwriter"

	"cairn/internal/geojson"
)

// listWriter writes a listing a page at a time, so that a listing of the
// whole register never holds more than a page: JSON as one array (the
// bytes writeJSON writes for the whole slice), CSV and piped tables row by
// row, a terminal's table aligned a page at a time, GeoJSON feature by
// feature (through feature).
type listWriter struct {
	ios     *IOStreams
	format  Format
	headers []string
	// feature writes one page's GeoJSON features (FormatGeoJSON only).
	feature func(w *geojson.Writer, i int) error

	started bool
	items   int
	csv     *csv.Writer
	geo     *geojson.Writer
}

// page writes one page: its values for JSON, and its table rows (or, for
// GeoJSON, n features through feature).
func (w *listWriter) page(values []any, rows [][]string) error {
	if !w.started {
		if err := w.start(); err != nil {
			return err
		}
	}
	switch w.format {
	case FormatJSON:
		for _, v := range values {
			b, err := json.MarshalIndent(v, "  ", "  ")
			if err != nil {
				return err
			}
			sep := ",\n  "
			if w.items == 0 {
				sep = "[\n  "
			}
			w.items++
			if _, err := fmt.Fprintf(w.ios.Out, "%s%s", sep, b); err != nil {
				return err
			}
		}
		return nil
	case FormatGeoJSON:
		for i := range values {
			if err := w.feature(w.geo, i); err != nil {
				return err
			}
		}
		return nil
	case FormatCSV:
		if err := w.csv.WriteAll(rows); err != nil {
			return err
		}
		return w.csv.Error()
	}
	for _, r := range rows {
		for i, c := range r {
			if !w.ios.IsTerminal {
				c = tsvCell.Replace(c)
			}
			r[i] = visible(c)
		}
	}
	if !w.ios.IsTerminal {
		for _, r := range rows {
			if _, err := fmt.Fprintln(w.ios.Out, strings.Join(r, "\t")); err != nil {
				return err
			}
		}
		return nil
	}
	if len(rows) == 0 {
		return nil
	}
	// A terminal's table: the columns of each page aligned, the headers
	// over the first.
	tw := tabwriter.NewWriter(w.ios.Out, 0, 0, 2, ' ', 0)
	if w.items == 0 {
		fmt.Fprintln(tw, strings.Join(w.headers, "\t"))
	}
	w.items += len(rows)
	for _, r := range rows {
		fmt.Fprintln(tw, strings.Join(r, "\t"))
	}
	return tw.Flush()
}

func (w *listWriter) start() error {
	w.started = true
	switch w.format {
	case FormatCSV:
		w.csv = csv.NewWriter(w.ios.Out)
		if err := w.csv.Write(machineHeaders(w.headers)); err != nil {
			return err
		}
	case FormatGeoJSON:
		w.geo = geojson.NewWriter(w.ios.Out, "")
	case FormatJSON:
	default:
		if !w.ios.IsTerminal {
			_, err := fmt.Fprintln(w.ios.Out, strings.Join(machineHeaders(w.headers), "\t"))
			return err
		}
	}
	return nil
}

// close ends the listing (an empty one written whole).
func (w *listWriter) close() error {
	if !w.started {
		if err := w.start(); err != nil {
			return err
		}
	}
	switch w.format {
	case FormatJSON:
		end := "\n]\n"
		if w.items == 0 {
			end = "[]\n"
		}
		_, err := fmt.Fprint(w.ios.Out, end)
		return err
	case FormatGeoJSON:
		return w.geo.Close()
	case FormatCSV:
		w.csv.Flush()
		return w.csv.Error()
	}
	if w.ios.IsTerminal && w.items == 0 {
		tw := tabwriter.NewWriter(w.ios.Out, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, strings.Join(w.headers, "\t"))
		return tw.Flush()
	}
	return nil
}
