package cli

import (
	"context"
	"errors"
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"cairn/internal/register"
	"cairn/internal/units"
)

// importOptions are the inputs of `cairn import`.
type importOptions struct {
	f      *Factory
	ctx    context.Context
	params register.ImportParams
}

func newCmdImport(f *Factory, runF func(*importOptions) error) *cobra.Command {
	opts := &importOptions{f: f}
	cmd := &cobra.Command{
		Use:   "import DIR [--check]",
		Short: "Import an existing register from CSV files",
		Long: `Import an office's existing register from a folder of CSV files in cairn's
layout (docs/import.md), any of them, each with its header row:
  marks.csv         marks, aliases, positions, retirements
  descriptions.csv  later versions of the marks' descriptions, in order
  aliases.csv       other names of marks, with agency, note and who
  conditions.csv    condition reports (ref names a report for photos.csv)
  photos.csv        photographs of the reports, files in the folder photos
  heights.csv       height versions with their in-force dates
The marks may come instead as marks.geojson, an RFC 7946 FeatureCollection
of Point features whose properties are marks.csv's columns ([longitude,
latitude]; no altitude).

The import is one transaction: every problem of every file is reported, with
its file, line and field, and then nothing is written. --check reads and
checks everything and writes nothing in any case. Dates are written
YYYY-MM-DD; a bare "ft" is refused (write intl-ft or usft). The same files
are never imported twice. The import is recorded, with the SHA-256 of each
file, and trace names it for an imported height.

Heights from an office's old books are what those books say: review them
(a licensed surveyor), check into two marks and verify a mark's condition
before use; local codes govern.`,
		Example: `  cairn import old-register --check
  cairn import old-register`,
		Args: exactArgs(1, "the folder DIR to import"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.params.Dir = cmd.Context(), args[0]
			return dispatch(opts, runF, importRun)
		},
	}
	cmd.Flags().BoolVar(&opts.params.Check, "check", false, "check the files and report every problem, writing nothing")
	cmd.Flags().StringVar(&opts.params.RecordedBy, "by", osUser(), "who imports (and the by of a row that gives none)")
	return cmd
}

// importRun imports the folder.
func importRun(opts *importOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	res, err := r.Import(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	c := res.Counts
	if opts.params.Check {
		opts.f.IO.printf("checked %s: no problems; %d marks, %d condition reports, %d height versions would be imported (nothing written)\n",
			opts.params.Dir, c.Marks, c.Conditions, c.Heights)
		return nil
	}
	opts.f.IO.printf("import %d: %d marks (%d description versions, %d retired), %d aliases, %d condition reports, %d photographs, %d height versions\n",
		res.EventID, c.Marks, c.Versions, c.Retirements, c.Aliases, c.Conditions, c.Photos, c.Heights)
	for _, f := range res.Files {
		if strings.HasPrefix(f.Name, register.PhotosDir+"/") {
			opts.f.IO.printf("  %s  sha256 %s\n", f.Name, f.SHA256)
			continue
		}
		opts.f.IO.printf("  %s  %d rows  sha256 %s\n", f.Name, f.Rows, f.SHA256)
	}
	return nil
}

// exportOptions are the inputs of `cairn export`.
type exportOptions struct {
	f   *Factory
	ctx context.Context
	out string
	// format, when set (geojson or csv), asks for one file for a GIS or
	// a spreadsheet instead of the import layout.
	format string
	area   string
	within string
	unit   units.Unit
}

func newCmdExport(f *Factory, runF func(*exportOptions) error) *cobra.Command {
	opts := &exportOptions{f: f}
	var unit string
	cmd := &cobra.Command{
		Use:   "export --out DIR | export --format geojson|csv [--area LAT,LON --within R] [--unit m|ft|usft] --out FILE|-",
		Short: "Export the register: CSV files in the import layout, or one GeoJSON or CSV file of the marks and heights",
		Long: `Write the register to the folder DIR in the layout cairn import reads
(docs/import.md): marks.csv with each mark as first recorded and its
retirement, descriptions.csv with every later version of a description,
aliases.csv, conditions.csv with every condition report, photos.csv and the
folder photos with every photograph (each file named by its SHA-256),
heights.csv with every height version in recorded order and its in-force
date. An export imported into an empty register (with the same datums) gives
the same register, row for row. Runs and adjustments are not in the layout
(backup keeps the whole record); heights of kind adjustment are written but
an import refuses them (a warning says how many). DIR is made if needed;
files already there are never overwritten.

With --format, write instead one file for a GIS or a spreadsheet: every mark
(or, with --area LAT,LON, those within --within of the point) with its
current height on each datum, one row (one feature) per mark and datum, a
mark with no height once. The columns are those of a job pack's marks.csv
(docs/output.md): the height in --unit (its header or property names the
unit: height_m, height_ft, height_usft), the height exactly as published
with its unit, class, in-force time, source, the mark's condition, last
found in good order, and its doubts. --format geojson writes an RFC 7946
FeatureCollection, one Point feature a line at [longitude, latitude] (a null
geometry for a mark with no position); --format csv writes RFC 4180 CSV.
The marks are by designation, read in one snapshot a batch at a time, so
memory does not grow with the register (docs/performance.md). --out -
writes to standard output; a file already there is never overwritten, and
a failed export leaves no file.

` + cautions,
		Example: `  cairn export --out register-2026
  cairn export --format geojson --unit usft --out tallis-marks.geojson
  cairn export --format csv --area 41.62,-97.95 --within 10km --out - > mere.csv`,
		Args: exactArgs(0, "no arguments (the folder or file is --out)"),
		RunE: func(cmd *cobra.Command, _ []string) error {
			opts.ctx = cmd.Context()
			var err error
			if opts.unit, err = parseSheetUnit(unit); err != nil {
				return err
			}
			if opts.format == "" && cmd.Flags().Changed("unit") {
				return flagError{errors.New("--unit gives the heights of --format geojson|csv: the import layout keeps each height as published")}
			}
			return dispatch(opts, runF, exportRun)
		},
	}
	cmd.Flags().StringVar(&opts.out, "out", "", "the folder to write (the import layout), or with --format the file to write (- for standard output) (required)")
	cmd.Flags().StringVar(&opts.format, "format", "", "write one file instead of the import layout: geojson (RFC 7946) or csv")
	cmd.Flags().StringVar(&opts.area, "area", "", "with --format: only the marks within --within of LAT,LON (decimal degrees)")
	cmd.Flags().StringVar(&opts.within, "within", "", "with --area: the radius, in m, km, ft, usft or mi (e.g. 10km)")
	cmd.Flags().StringVar(&unit, "unit", "m", "with --format: unit of the heights, m, ft (international foot) or usft (US survey foot)")
	return cmd
}

// exportRun writes the files.
func exportRun(opts *exportOptions) error {
	if opts.format != "" {
		return exportTableRun(opts)
	}
	if opts.area != "" || opts.within != "" {
		return flagError{errors.New("--area and --within choose the marks of --format geojson|csv: the import layout holds the whole register")}
	}
	if opts.out == "" {
		return flagError{errors.New("--out: name the folder to write")}
	}
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	res, err := r.Export(opts.ctx, opts.out)
	if err != nil {
		return err
	}
	for _, n := range []string{register.MarksFile, register.DescriptionsFile, register.AliasesFile, register.ConditionsFile, register.PhotosFile, register.HeightsFile} {
		opts.f.IO.printf("%s  %d rows\n", n, res.Files[n])
	}
	if res.Adjustments > 0 {
		fmt.Fprintf(opts.f.IO.ErrOut, "warning: heights.csv holds %d height version(s) of kind adjustment, from this register's own adjustments: "+
			"cairn import refuses them (an adjustment is reproduced from its runs, not copied); to import this export, "+
			"write each as kind authority citing the publication that gave it, or adjust the runs again in the new register\n", res.Adjustments)
	}
	return nil
}
