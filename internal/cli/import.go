package cli

import (
	"context"
	"errors"
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"cairn/internal/register"
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
}

func newCmdExport(f *Factory, runF func(*exportOptions) error) *cobra.Command {
	opts := &exportOptions{f: f}
	cmd := &cobra.Command{
		Use:   "export --out DIR",
		Short: "Export the register as CSV files in the import layout",
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
files already there are never overwritten.`,
		Example: `  cairn export --out register-2026`,
		Args:    exactArgs(0, "no arguments (the folder is --out)"),
		RunE:    runE(&opts.ctx, opts, runF, exportRun),
	}
	cmd.Flags().StringVar(&opts.out, "out", "", "the folder to write (required)")
	return cmd
}

// exportRun writes the files.
func exportRun(opts *exportOptions) error {
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
