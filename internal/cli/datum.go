package cli

import (
	"github.com/spf13/cobra"

	"cairn/internal/register"
)

func newCmdDatum(f *Factory) *cobra.Command {
	cmd := &cobra.Command{
		Use:   "datum",
		Short: "Vertical datums heights refer to",
	}
	cmd.AddCommand(newCmdDatumAdd(f, nil), newCmdDatumList(f))
	return cmd
}

type datumAddOptions struct {
	f      *Factory
	params register.DatumAddParams
}

func newCmdDatumAdd(f *Factory, runF func(*datumAddOptions) error) *cobra.Command {
	opts := &datumAddOptions{f: f}
	cmd := &cobra.Command{
		Use:   "add CODE --name NAME",
		Short: "Add a vertical datum",
		Long: `Add a vertical datum to the register. CODE is the short name used on the
command line (for example NAVD88); --name is its full or official name.`,
		Example: `  cairn datum add NAVD88 --name "North American Vertical Datum of 1988"`,
		Args:    exactArgs(1, "a datum CODE"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.params.Code = args[0]
			if runF != nil {
				return runF(opts)
			}
			return datumAddRun(cmd, opts)
		},
	}
	cmd.Flags().StringVar(&opts.params.Name, "name", "", "full or official name of the datum (required)")
	cmd.Flags().StringVar(&opts.params.Note, "note", "", "notes: realisation, epoch, where it is used")
	cmd.Flags().StringVar(&opts.params.By, "by", osUser(), "who adds it")
	return cmd
}

func datumAddRun(cmd *cobra.Command, opts *datumAddOptions) error {
	r, err := openRegister(cmd.Context(), opts.f)
	if err != nil {
		return err
	}
	d, err := r.DatumAdd(cmd.Context(), opts.params)
	if err != nil {
		return err
	}
	opts.f.IO.printf("added datum %s (%s)\n", d.Code, d.Name)
	return nil
}

type datumJSON struct {
	Code string `json:"code"`
	Name string `json:"name"`
	Note string `json:"note"`
	By   string `json:"created_by"`
}

func newCmdDatumList(f *Factory) *cobra.Command {
	var format Format
	cmd := &cobra.Command{
		Use:   "list",
		Short: "List the datums",
		Args:  exactArgs(0, "no arguments"),
		RunE: func(cmd *cobra.Command, args []string) error {
			r, err := openRegister(cmd.Context(), f)
			if err != nil {
				return err
			}
			ds, err := r.DatumList(cmd.Context())
			if err != nil {
				return err
			}
			out := []datumJSON{}
			for _, d := range ds {
				out = append(out, datumJSON{d.Code, d.Name, d.Note, d.CreatedBy})
			}
			return render(f.IO, format, out, func() Table {
				t := Table{Headers: []string{"CODE", "NAME", "NOTE"}}
				for _, d := range out {
					t.AddRow(d.Code, d.Name, d.Note)
				}
				return t
			})
		},
	}
	addOutputFlag(cmd, &format)
	return cmd
}
