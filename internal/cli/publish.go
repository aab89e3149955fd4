package cli

import (
	"context"
	"fmt"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"cairn/internal/register"
)

// publishOptions are the options of `cairn publish` and `cairn discard`.
type publishOptions struct {
	f      *Factory
	ctx    context.Context
	format Format
	id     int64
	reason string
	by     string
	yes    bool
}

func (o *publishOptions) parse(args []string) error {
	id, err := strconv.ParseInt(strings.TrimSpace(args[0]), 10, 64)
	if err != nil || id <= 0 {
		return badInput("adjustment: %q is not an adjustment number (see cairn adjustment list)", args[0])
	}
	o.id = id
	if strings.TrimSpace(o.reason) == "" {
		return badInput("reason: say why with --reason")
	}
	return nil
}

func newCmdPublish(f *Factory, runF func(*publishOptions) error) *cobra.Command {
	opts := &publishOptions{f: f}
	cmd := &cobra.Command{
		Use:   "publish ADJUSTMENT --reason TEXT [--by NAME] [--yes]",
		Short: "Publish a draft adjustment's heights as new versions",
		Long: `Publish a draft adjustment: each mark it adjusted gets a new height version,
with the reason given, citing the adjustment. It happens in one transaction:
either every height is published or none is.

Publishing first checks that every version the adjustment held, and every
version it is to replace, is still current. If anyone has published a height
of those marks since the draft was made, it stops with a conflict naming the
mark (exit status 4) and writes nothing: adjust again against the current
heights.

On a terminal it asks for confirmation; otherwise --yes is required.

` + adjustCautions,
		Example: `  cairn publish 3 --reason "north loop of May 2024, reviewed by J. Ames, PLS"`,
		Args:    exactArgs(1, "an ADJUSTMENT number"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			if err := opts.parse(args); err != nil {
				return err
			}
			return dispatch(opts, runF, publishRun)
		},
	}
	addOutputFlag(cmd, &opts.format)
	cmd.Flags().StringVar(&opts.reason, "reason", "", "why these heights are published (required; kept with every version)")
	cmd.Flags().StringVar(&opts.by, "by", osUser(), "who publishes")
	cmd.Flags().BoolVar(&opts.yes, "yes", false, "publish without asking (required when not on a terminal)")
	return cmd
}

// publishRun publishes the draft once confirmed.
func publishRun(opts *publishOptions) error {
	ctx := opts.ctx
	r, err := openRegister(ctx, opts.f)
	if err != nil {
		return err
	}
	v, err := r.Adjustment(ctx, opts.id)
	if err != nil {
		return err
	}
	if !opts.yes {
		n := 0
		for _, res := range v.Results {
			if !res.Held {
				n++
			}
		}
		if err := confirm(opts.f.IO, fmt.Sprintf("Publish %d new height(s) on %s from adjustment %d?", n, v.Adjustment.DatumCode, opts.id)); err != nil {
			return err
		}
	}
	pub, err := r.Publish(ctx, register.PublishParams{AdjustmentID: opts.id, Reason: opts.reason, By: opts.by})
	if err != nil {
		return err
	}
	out := []heightJSON{}
	for _, h := range pub.Versions {
		out = append(out, toHeightJSON(h, ""))
	}
	if opts.format != FormatJSON {
		opts.f.IO.printf("Published adjustment %d: %d new height version(s).\n", opts.id, len(out))
	}
	err = render(opts.f.IO, opts.format, out, func() Table {
		t := Table{Headers: []string{"MARK", "DATUM", "VERSION", "HEIGHT", "UNIT", "CLASS"}}
		for _, h := range out {
			t.AddRow(h.Mark, h.Datum, strconv.Itoa(h.Version), deref(h.Value), deref(h.Unit), h.Class)
		}
		return t
	})
	if err != nil {
		return err
	}
	if opts.format != FormatJSON {
		opts.f.IO.printf("\n%s\n", adjustCautions)
	}
	return nil
}

func newCmdDiscard(f *Factory, runF func(*publishOptions) error) *cobra.Command {
	opts := &publishOptions{f: f}
	cmd := &cobra.Command{
		Use:   "discard ADJUSTMENT --reason TEXT [--by NAME] [--yes]",
		Short: "Set a draft adjustment aside for good",
		Long: `Set a draft adjustment aside: it stays in the register, with the reason,
but can no longer be published.

On a terminal it asks for confirmation; otherwise --yes is required.`,
		Args: exactArgs(1, "an ADJUSTMENT number"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			if err := opts.parse(args); err != nil {
				return err
			}
			return dispatch(opts, runF, discardRun)
		},
	}
	cmd.Flags().StringVar(&opts.reason, "reason", "", "why it is discarded (required)")
	cmd.Flags().StringVar(&opts.by, "by", osUser(), "who discards it")
	cmd.Flags().BoolVar(&opts.yes, "yes", false, "discard without asking (required when not on a terminal)")
	return cmd
}

// discardRun sets the draft aside once confirmed.
func discardRun(opts *publishOptions) error {
	f := opts.f
	if !opts.yes {
		if err := confirm(f.IO, fmt.Sprintf("Discard adjustment %d for good?", opts.id)); err != nil {
			return err
		}
	}
	r, err := openRegister(opts.ctx, f)
	if err != nil {
		return err
	}
	a, err := r.Discard(opts.ctx, register.DiscardParams{AdjustmentID: opts.id, Reason: opts.reason, By: opts.by})
	if err != nil {
		return err
	}
	f.IO.printf("Adjustment %d discarded by %s: %s\n", a.ID, a.StatusBy, a.StatusReason)
	return nil
}

// confirm asks a yes/no question when the streams can prompt. When they
// cannot, it refuses: the caller must say --yes.
func confirm(ios *IOStreams, question string) error {
	if !ios.CanPrompt() {
		return badInput("yes: not on a terminal, so nothing was asked and nothing was done; give --yes to go ahead")
	}
	if !ios.Confirm(question) {
		return badInput("yes: not confirmed; nothing was done")
	}
	return nil
}
