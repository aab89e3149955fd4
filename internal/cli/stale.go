package cli

import (
	"context"
	"strconv"

	"github.com/spf13/cobra"

	"cairn/internal/register"
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
	datum  string
	area   string
	within string
	limit  int
}

func newCmdStale(f *Factory, runF func(*staleOptions) error) *cobra.Command {
	opts := &staleOptions{f: f}
	cmd := &cobra.Command{
		Use:   "stale [--datum CODE] [--area LAT,LON --within 5km] [--limit N]",
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
clears them.

--datum keeps the heights on one datum; --area keeps those of the marks
whose current position is within --within of the point (great-circle
distance), read by the position indexes rather than the whole register. A
height in the area that held a stale height outside it is stale too: what
it held is followed wherever it is. --limit lists at most N heights (by
mark and datum) and says on the error stream when there are more.`,
		Args: exactArgs(0, "no arguments"),
		RunE: runE(&opts.ctx, opts, runF, staleRun),
	}
	addOutputFlag(cmd, &opts.format)
	cmd.Flags().StringVar(&opts.datum, "datum", "", "keep the heights on this datum")
	cmd.Flags().StringVar(&opts.area, "area", "", "LAT,LON in decimal degrees: keep the heights of marks within --within of this point")
	cmd.Flags().StringVar(&opts.within, "within", "5km", "radius of --area, in m, km, ft, usft or mi (e.g. 5km, 2mi)")
	cmd.Flags().IntVar(&opts.limit, "limit", 0, "list at most this many stale heights (0 for all)")
	return cmd
}

// staleRun lists the stale heights with their reasons.
func staleRun(opts *staleOptions) error {
	ios := opts.f.IO
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	if opts.limit < 0 {
		return badInput("limit: %d is not a number of heights (0 for all)", opts.limit)
	}
	p := register.StaleParams{Datum: opts.datum, Limit: opts.limit}
	if opts.area != "" {
		ll, err := parseLatLon(opts.area)
		if err != nil {
			return badInput("area: %q is not LAT,LON in decimal degrees (e.g. 41.62,-97.95)", opts.area)
		}
		if p.RadiusM, err = parseDistance(opts.within); err != nil {
			return err
		}
		p.Near = &ll
	}
	list, err := r.Stale(opts.ctx, p)
	if err != nil {
		return err
	}
	hs := list.Heights
	if list.More {
		defer ios.printf("more heights are stale than the %d listed (--limit 0 lists all)\n", opts.limit)
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
