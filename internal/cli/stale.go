package cli

import (
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
	Text string `json:"text"`
}

func newCmdStale(f *Factory) *cobra.Command {
	var format Format
	cmd := &cobra.Command{
		Use:   "stale",
		Short: "List current heights that no longer stand on current control",
		Long: `List every current height from an adjustment that no longer stands on current
control, with each reason:

  held-superseded  the adjustment held a version that has since been superseded
  mark-condition   a run of the adjustment touched a mark reported disturbed or
                   destroyed after the run (recorded after it, observed on or
                   after the day it was run)
  held-stale       the adjustment held a height that is itself stale

These are the heights to adjust again; publishing a new adjustment of them
clears them.`,
		Args: exactArgs(0, "no arguments"),
		RunE: func(cmd *cobra.Command, args []string) error {
			r, err := openRegister(cmd.Context(), f)
			if err != nil {
				return err
			}
			hs, err := r.Stale(cmd.Context())
			if err != nil {
				return err
			}
			out := []staleJSON{}
			for _, h := range hs {
				j := staleJSON{heightJSON: toHeightJSON(h.Height, ""), AdjustmentID: deref(h.AdjustmentID), Reasons: []staleReasonJSON{}}
				for _, r := range h.Reasons {
					j.Reasons = append(j.Reasons, staleReasonJSON{r.Kind, r.Mark, r.Text})
				}
				out = append(out, j)
			}
			if format == FormatTable && f.IO.IsTerminal && len(out) == 0 {
				f.IO.printf("No stale heights: every height from an adjustment stands on current control.\n")
				return nil
			}
			return render(f.IO, format, out, func() Table {
				t := Table{Headers: []string{"MARK", "DATUM", "VERSION", "HEIGHT", "UNIT", "ADJUSTMENT", "KIND", "REASON"}}
				for _, h := range out {
					for _, r := range h.Reasons {
						t.AddRow(h.Mark, h.Datum, strconv.Itoa(h.Version), deref(h.Value), deref(h.Unit),
							strconv.FormatInt(h.AdjustmentID, 10), r.Kind, r.Text)
					}
				}
				return t
			})
		},
	}
	addOutputFlag(cmd, &format)
	return cmd
}
