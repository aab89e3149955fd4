package cli

import (
	"context"
	"fmt"
	"strconv"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/register"
)

// runListOptions are the inputs of `cairn run list`.
type runListOptions struct {
	f      *Factory
	ctx    context.Context
	Mark   string
	Since  *time.Time
	Format Format
}

// newCmdRunList builds `cairn run list`. runF replaces runListRun in tests.
func newCmdRunList(f *Factory, runF func(*runListOptions) error) *cobra.Command {
	opts := &runListOptions{f: f}
	var since string
	cmd := &cobra.Command{
		Use:   "list",
		Short: "List recorded runs",
		Long: `List the recorded runs, oldest first: by the date in their book (or the day
they were recorded, for a book without one). --mark keeps the runs that
touched a mark; --since keeps those observed on or after a date. A check
run (recorded with --check-only) says so beside its checks; it adjusts
nothing. A voided run is listed with its void (when, by whom, why) in the
last column.`,
		Example: `  cairn run list
  cairn run list --mark TC-0412 --since 2024-01-01
  cairn run list -o csv`,
		Args: exactArgs(0, "no arguments"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			if since != "" {
				d, err := time.Parse("2006-01-02", since)
				if err != nil {
					return badInput("--since %q: want a date, YYYY-MM-DD", since)
				}
				opts.Since = &d
			}
			return dispatch(opts, runF, runListRun)
		},
	}
	cmd.Flags().StringVar(&opts.Mark, "mark", "", "only runs that touched this mark")
	cmd.Flags().StringVar(&since, "since", "", "only runs observed on or after this date (YYYY-MM-DD)")
	addOutputFlag(cmd, &opts.Format)
	return cmd
}

// runListRun lists the recorded runs.
func runListRun(opts *runListOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	runs, err := r.RunList(opts.ctx, register.RunListParams{Mark: opts.Mark, Since: opts.Since})
	if err != nil {
		return err
	}
	js := []runJSON{}
	for _, run := range runs {
		js = append(js, toRunJSON(run))
	}
	return render(opts.f.IO, opts.Format, js, func() Table {
		t := Table{Headers: []string{"RUN", "OBSERVED", "NAME", "FILE", "UNIT", "CLASS", "SECTIONS", "LENGTH (km)", "CHECKS", "RECORDED", "BY", "VOIDED"}}
		for _, j := range js {
			checks := "passed"
			if j.ChecksFailed > 0 {
				checks = fmt.Sprintf("%d failed, accepted", j.ChecksFailed)
			}
			if j.CheckOnly {
				checks += "; a check run, adjusts nothing"
			}
			voided := "no"
			if j.Voided != nil {
				voided = fmt.Sprintf("voided %s by %s: %s", timeText(j.Voided.VoidedAt), j.Voided.VoidedBy, j.Voided.Reason)
			}
			t.AddRow(strconv.FormatInt(j.ID, 10), j.ObservedOn, j.Name, j.FileName, j.Unit, j.Class, strconv.Itoa(j.SectionCount),
				strconv.FormatFloat(j.LengthM/1000, 'f', 3, 64), checks, timeText(j.RecordedAt), j.RecordedBy, voided)
		}
		return t
	})
}
