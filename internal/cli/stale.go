package cli

import (
	"context"
	"strconv"

	"github.com/spf13/cobra"
)

// staleJSON is a stale height in machine output.
type staleJSON struct {
	heightJSON
	AdjustmentID int64             `json:"adjustment_id"`
	Reasons      []staleReasonJSON `json:"reasons"`
}

type staleReasonJSON struct {
	Kind string `json:"kind"`
	Mark string `json:"mark"`
	// Run is the voided run of a voided-run reason, else 0.
	Run  int64  `json:"run_id,omitempty"`
	Text string `json:"text"`
}

// staleOptions are the inputs of `cairn stale`.
type staleOptions struct {
	f      *Factory
	ctx    context.Context
	format Format
}

func newCmdStale(f *Factory, runF func(*staleOptions) error) *cobra.Command {
	opts := &staleOptions{f: f}
	cmd := &cobra.Command{
		Use:   "stale",
		Short: "List current heights that no longer stand on current control",
		Long: `List every current height from an adjustment that no longer stands on current
control, with each reason:

  held-superseded  the adjustment held a version that has since been superseded
  mark-condition   a run of the adjustment touched a mark reported disturbed or
                   destroyed after the run (recorded after it, observed on or
                   after the day it was run)
  voided-run       a run of the adjustment has been voided (cairn run void)
  held-stale       the adjustment held a height that is itself stale

These are the heights to adjust again; publishing a new adjustment of them
clears them.`,
		Args: exactArgs(0, "no arguments"),
		RunE: runE(&opts.ctx, opts, runF, staleRun),
	}
	addOutputFlag(cmd, &opts.format)
	return cmd
}

// staleRun lists the stale heights with their reasons.
func staleRun(opts *staleOptions) error {
	ios := opts.f.IO
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	hs, err := r.Stale(opts.ctx)
	if err != nil {
		return err
	}
	out := []staleJSON{}
	for _, h := range hs {
		j := staleJSON{heightJSON: toHeightJSON(h.Height, ""), AdjustmentID: deref(h.AdjustmentID), Reasons: []staleReasonJSON{}}
		for _, r := range h.Reasons {
			j.Reasons = append(j.Reasons, staleReasonJSON{r.Kind, r.Mark, r.Run, r.Text})
		}
		out = append(out, j)
	}
	if opts.format == FormatTable && ios.IsTerminal && len(out) == 0 {
		ios.printf("No stale heights: every height from an adjustment stands on current control.\n")
		return nil
	}
	return render(ios, opts.format, out, func() Table {
		t := Table{Headers: []string{"MARK", "DATUM", "VERSION", "HEIGHT" + perRowUnit, "UNIT", "ADJUSTMENT", "KIND", "REASON"}}
		for _, h := range out {
			for _, r := range h.Reasons {
				t.AddRow(h.Mark, h.Datum, strconv.Itoa(h.Version), deref(h.Value), deref(h.Unit),
					strconv.FormatInt(h.AdjustmentID, 10), r.Kind, r.Text)
			}
		}
		return t
	})
}
