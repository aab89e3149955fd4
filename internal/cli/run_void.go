package cli

import (
	"context"
	"fmt"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/register"
	"cairn/internal/store"
)

// voidJSON is a run's void in machine output; null while the run stands.
type voidJSON struct {
	VoidedAt time.Time `json:"voided_at"`
	VoidedBy string    `json:"voided_by"`
	Reason   string    `json:"reason"`
}

func toVoidJSON(v *store.RunVoid) *voidJSON {
	if v == nil {
		return nil
	}
	return &voidJSON{VoidedAt: v.RecordedAt, VoidedBy: v.RecordedBy, Reason: v.Reason}
}

// voidText words a void for reading: "2026-12-02 08:10:00Z by P. Senior: wrong rod".
func voidText(v *store.RunVoid) string {
	return fmt.Sprintf("%s by %s: %s", timeText(v.RecordedAt), v.RecordedBy, v.Reason)
}

// runVoidOptions are the inputs of `cairn run void`.
type runVoidOptions struct {
	f      *Factory
	ctx    context.Context
	params register.VoidRunParams
	yes    bool
}

// newCmdRunVoid builds `cairn run void`. runF replaces runVoidRun in tests.
func newCmdRunVoid(f *Factory, runF func(*runVoidOptions) error) *cobra.Command {
	opts := &runVoidOptions{f: f}
	cmd := &cobra.Command{
		Use:   "void RUN --reason TEXT [--by NAME] [--yes]",
		Short: "Void a recorded run: leave it out of adjustments from now on",
		Long: `Void a recorded run that is not to be used: a wrong book, a run recorded
twice, work found faulty. Nothing is changed or removed: the run, its book
and its sightings stay as recorded, and the void is kept beside them with
who decided it, when and why. A run is voided once, for good.

From then on:
  - cairn adjust refuses the run when it is named, and leaves it out, with a
    warning, when --marks or --area choose it;
  - every current height published from an adjustment that used it is
    listed by cairn stale (reason voided-run): adjust those marks again;
  - cairn run list, run show and trace show the void.

Voiding evidence is a publisher's decision: it needs the cairn_publisher
role. On a terminal it asks for confirmation; otherwise --yes is required.

A height is only as good as the runs behind it: have a licensed surveyor
review what to adjust again, check into two marks, verify each mark's
condition before use, and follow the codes and regulations that govern your
work.`,
		Example: `  cairn run void 12 --reason "recorded twice: same work as run 11" --by "P. Senior"
  cairn run void 12 --reason "wrong rod constant in the book" --yes`,
		Args: exactArgs(1, "a RUN number"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			var err error
			if opts.params.RunID, err = parseRunID(args[0]); err != nil {
				return err
			}
			opts.params.Reason, opts.params.By = strings.TrimSpace(opts.params.Reason), strings.TrimSpace(opts.params.By)
			if opts.params.Reason == "" {
				return badInput("--reason: say why the run is voided")
			}
			if opts.params.By == "" {
				return badInput("--by: say who voids the run")
			}
			return dispatch(opts, runF, runVoidRun)
		},
	}
	cmd.Flags().StringVar(&opts.params.Reason, "reason", "", "why the run is not to be used (required)")
	cmd.Flags().StringVar(&opts.params.By, "by", osUser(), "who voids the run")
	cmd.Flags().BoolVar(&opts.yes, "yes", false, "void without asking (required when not on a terminal)")
	return cmd
}

// runVoidRun voids the run once confirmed.
func runVoidRun(opts *runVoidOptions) error {
	f := opts.f
	if !opts.yes {
		if err := confirm(f.IO, fmt.Sprintf("Void run %d for good?", opts.params.RunID)); err != nil {
			return err
		}
	}
	r, err := openRegister(opts.ctx, f)
	if err != nil {
		return err
	}
	run, err := r.VoidRun(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	f.IO.printf("Run %d (%s) voided %s\nIt is left out of adjustments from now on; cairn stale lists the heights published from it.\n",
		run.ID, run.FileName, voidText(run.Voided))
	return nil
}
