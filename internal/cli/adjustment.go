package cli

import (
	"context"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/register"
)

// adjustmentRowJSON is one adjustment in a listing.
type adjustmentRowJSON struct {
	AdjustmentID int64     `json:"adjustment_id"`
	Status       string    `json:"status"`
	Method       string    `json:"method"`
	Datum        string    `json:"datum"`
	RunIDs       []int64   `json:"run_ids"`
	Marks        int       `json:"marks"`
	CreatedBy    string    `json:"created_by"`
	CreatedAt    time.Time `json:"created_at"`
	StatusReason string    `json:"status_reason,omitempty"`
}

// adjustmentListOptions are the inputs of `cairn adjustment list`.
type adjustmentListOptions struct {
	f      *Factory
	ctx    context.Context
	format Format
	status string
}

func newCmdAdjustmentList(f *Factory, runF func(*adjustmentListOptions) error) *cobra.Command {
	opts := &adjustmentListOptions{f: f}
	cmd := &cobra.Command{
		Use:   "list [--status draft|published|discarded]",
		Short: "List adjustments, oldest first",
		Args:  exactArgs(0, "no arguments"),
		RunE:  runE(&opts.ctx, opts, runF, adjustmentListRun),
	}
	addOutputFlag(cmd, &opts.format)
	cmd.Flags().StringVar(&opts.status, "status", "", "only adjustments with this status: draft, published or discarded")
	return cmd
}

// adjustmentListRun lists the adjustments.
func adjustmentListRun(opts *adjustmentListOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	as, err := r.AdjustmentList(opts.ctx, register.AdjustmentListParams{Status: opts.status})
	if err != nil {
		return err
	}
	out := []adjustmentRowJSON{}
	for _, a := range as {
		out = append(out, adjustmentRowJSON{AdjustmentID: a.ID, Status: a.Status, Method: a.Method, Datum: a.DatumCode,
			RunIDs: a.RunIDs, Marks: a.Results, CreatedBy: a.CreatedBy, CreatedAt: a.CreatedAt, StatusReason: a.StatusReason})
	}
	return render(opts.f.IO, opts.format, out, func() Table {
		t := Table{Headers: []string{"ADJUSTMENT", "STATUS", "METHOD", "DATUM", "RUNS", "MARKS", "MADE (UTC)", "BY", "REASON"}}
		for _, a := range out {
			runs := make([]string, len(a.RunIDs))
			for i, id := range a.RunIDs {
				runs[i] = strconv.FormatInt(id, 10)
			}
			t.AddRow(strconv.FormatInt(a.AdjustmentID, 10), a.Status, a.Method, a.Datum, strings.Join(runs, ","),
				strconv.Itoa(a.Marks), timeText(a.CreatedAt), a.CreatedBy, a.StatusReason)
		}
		return t
	})
}

// adjustmentShowOptions are the inputs of `cairn adjustment show`.
type adjustmentShowOptions struct {
	f      *Factory
	ctx    context.Context
	format Format
	id     int64
}

func newCmdAdjustmentShow(f *Factory, runF func(*adjustmentShowOptions) error) *cobra.Command {
	opts := &adjustmentShowOptions{f: f}
	cmd := &cobra.Command{
		Use:   "show ADJUSTMENT",
		Short: "Show an adjustment's report: runs, held versions, results, misclosures",
		Long:  "Show an adjustment's report as it was made, with its status.\n\n" + adjustCautions,
		Args:  exactArgs(1, "an ADJUSTMENT number"),
		RunE: func(cmd *cobra.Command, args []string) error {
			id, err := strconv.ParseInt(strings.TrimSpace(args[0]), 10, 64)
			if err != nil || id <= 0 {
				return badInput("adjustment: %q is not an adjustment number (see cairn adjustment list)", args[0])
			}
			opts.ctx, opts.id = cmd.Context(), id
			return dispatch(opts, runF, adjustmentShowRun)
		},
	}
	addOutputFlag(cmd, &opts.format)
	return cmd
}

// adjustmentShowRun shows the adjustment's report.
func adjustmentShowRun(opts *adjustmentShowOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	v, err := r.Adjustment(opts.ctx, opts.id)
	if err != nil {
		return err
	}
	return renderAdjustment(opts.f.IO, opts.format, v, false)
}
