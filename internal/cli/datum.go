package cli

import (
	"context"

	"github.com/spf13/cobra"

	"cairn/internal/register"
)

// datumAddOptions are the inputs of `cairn datum add`.
type datumAddOptions struct {
	f      *Factory
	ctx    context.Context
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
			opts.ctx, opts.params.Code = cmd.Context(), args[0]
			return dispatch(opts, runF, datumAddRun)
		},
	}
	cmd.Flags().StringVar(&opts.params.Name, "name", "", "full or official name of the datum (required)")
	cmd.Flags().StringVar(&opts.params.Note, "note", "", "notes: realisation, epoch, where it is used")
	cmd.Flags().StringVar(&opts.params.By, "by", osUser(), "who adds it")
	return cmd
}

// datumAddRun adds the datum.
func datumAddRun(opts *datumAddOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	d, err := r.DatumAdd(opts.ctx, opts.params)
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

// datumListOptions are the inputs of `cairn datum list`.
type datumListOptions struct {
	f      *Factory
	ctx    context.Context
	format Format
}

func newCmdDatumList(f *Factory, runF func(*datumListOptions) error) *cobra.Command {
	opts := &datumListOptions{f: f}
	cmd := &cobra.Command{
		Use:   "list",
		Short: "List the datums",
		Args:  exactArgs(0, "no arguments"),
		RunE:  runE(&opts.ctx, opts, runF, datumListRun),
	}
	addOutputFlag(cmd, &opts.format)
	return cmd
}

// datumListRun lists the datums.
func datumListRun(opts *datumListOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	ds, err := r.DatumList(opts.ctx)
	if err != nil {
		return err
	}
	out := []datumJSON{}
	for _, d := range ds {
		out = append(out, datumJSON{d.Code, d.Name, d.Note, d.CreatedBy})
	}
	return render(opts.f.IO, opts.format, out, func() Table {
		t := Table{Headers: []string{"CODE", "NAME", "NOTE"}}
		for _, d := range out {
			t.AddRow(d.Code, d.Name, d.Note)
		}
		return t
	})
}
