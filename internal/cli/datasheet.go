package cli

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/register"
	"cairn/internal/sheet"
	"cairn/internal/sheetdata"
	"cairn/internal/units"
)

// datasheetOptions are the inputs of `cairn datasheet`.
type datasheetOptions struct {
	f            *Factory
	ctx          context.Context
	designations []string
	asOf         *time.Time
	unit         units.Unit
	out          string // a folder
	format       string // html or pdf, to stdout
}

func newCmdDatasheet(f *Factory, runF func(*datasheetOptions) error) *cobra.Command {
	opts := &datasheetOptions{f: f}
	var asOf, unit string
	cmd := &cobra.Command{
		Use:   "datasheet DESIGNATION... [--as-of TIME] [--unit m|ft|usft] (--out DIR | -o html|pdf)",
		Short: "Write a printable sheet of each mark: how to find it, its heights, its condition and doubts",
		Long: `Write one sheet per mark for the people who use its height: what the mark is
and how to find it (with a sketch of the marks near it), every height in
force on each datum in the unit asked for (--unit, converted exactly from
the published value and rounded half away from zero), with its class,
version, in-force date and source; its condition reports and when it was
last found in good order; every doubt about it, in a banner; the register
state the sheet was made from (the head of the audit chain, as 'cairn audit
head' states it); and the cautions.

--out DIR writes DESIGNATION.html and DESIGNATION.pdf for each mark (the
folder is made if missing). -o html or -o pdf writes one mark's sheet to
stdout. --as-of gives the heights in force at a past time, and the
condition reports observed by then; the doubts are as the register knows
them now.

` + cautions,
		Example: `  cairn datasheet TC-0412 TC-0413 --unit usft --out sheets/
  cairn datasheet TC-0412 -o pdf > TC-0412.pdf`,
		Args: minArgs(1, "at least one DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.designations = cmd.Context(), args
			var err error
			if opts.asOf, err = parseAsOf(asOf); err != nil {
				return err
			}
			if opts.unit, err = parseSheetUnit(unit); err != nil {
				return err
			}
			switch {
			case opts.out == "" && opts.format == "":
				return badInput("say where the sheets go: --out DIR, or -o html or -o pdf for one mark to stdout")
			case opts.out != "" && opts.format != "":
				return badInput("give --out DIR or -o, not both")
			case opts.format != "" && opts.format != "html" && opts.format != "pdf":
				return badInput("-o %q: want html or pdf", opts.format)
			case opts.format != "" && len(args) != 1:
				return badInput("-o %s writes one mark's sheet to stdout; for %d marks use --out DIR", opts.format, len(args))
			}
			return dispatch(opts, runF, datasheetRun)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&asOf, "as-of", "", asOfUsage("show the heights"))
	fl.StringVar(&unit, "unit", "m", "unit of the heights on the sheet: m, ft (international foot) or usft (US survey foot)")
	fl.StringVarP(&opts.out, "out", "", "", "folder to write DESIGNATION.html and DESIGNATION.pdf in")
	fl.StringVarP(&opts.format, "output", "o", "", "html or pdf: one mark's sheet to stdout")
	return cmd
}

// parseSheetUnit reads --unit.
func parseSheetUnit(s string) (units.Unit, error) {
	u, err := units.Parse(s)
	if err != nil {
		return "", badInput("unit: %v", err)
	}
	return u, nil
}

func datasheetRun(opts *datasheetOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	set, err := r.Datasheets(opts.ctx, register.DatasheetParams{Designations: opts.designations, AsOf: opts.asOf})
	if err != nil {
		return err
	}
	ios := opts.f.IO
	for _, s := range set.Sheets {
		warnDoubts(ios, s.Doubts)
	}
	if opts.format != "" {
		d := sheetData(set.State, set.Sheets[0], opts.asOf, nil, opts.unit)
		if opts.format == "html" {
			return sheet.HTML(ios.Out, d)
		}
		return sheet.PDF(ios.Out, d)
	}
	if err := os.MkdirAll(opts.out, 0o755); err != nil {
		return badInput("out: %v", err)
	}
	for _, s := range set.Sheets {
		d := sheetData(set.State, s, opts.asOf, nil, opts.unit)
		h, p, err := renderSheet(d)
		if err != nil {
			return err
		}
		base := filepath.Join(opts.out, sheetFileName(d.Designation))
		if err := os.WriteFile(base+".html", h, 0o644); err != nil {
			return err
		}
		if err := os.WriteFile(base+".pdf", p, 0o644); err != nil {
			return err
		}
		ios.printf("wrote %s.html and %s.pdf\n", base, base)
	}
	return nil
}

// renderSheet is a sheet's HTML and PDF.
func renderSheet(d sheet.Data) (html, pdf []byte, err error) {
	var h, p bytes.Buffer
	if err := sheet.HTML(&h, d); err != nil {
		return nil, nil, err
	}
	if err := sheet.PDF(&p, d); err != nil {
		return nil, nil, err
	}
	return h.Bytes(), p.Bytes(), nil
}

// sheetFileName is a designation as a file name: letters, digits, '-',
// '_' and '.' kept, anything else (a '/', a space) as '_'.
func sheetFileName(designation string) string {
	s := strings.Map(func(r rune) rune {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '-', r == '_', r == '.':
			return r
		}
		return '_'
	}, designation)
	if strings.Trim(s, ".") == "" {
		s = "mark" + s
	}
	return s
}

// sheetData is a mark's sheet: the register's view formatted, each height
// converted exactly to u (sheetdata.From).
func sheetData(st register.RegisterState, s register.Datasheet, asOf, knownAt *time.Time, u units.Unit) sheet.Data {
	return sheetdata.From(st, s, asOf, knownAt, u)
}
