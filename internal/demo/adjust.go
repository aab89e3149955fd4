package demo

import (
	"context"
	"fmt"

	"cairn/internal/register"
)

// demoAdjustments say, by the run's name in its book, which marks each demo
// run is adjusted against and why it is published.
var demoAdjustments = []struct {
	run    string
	hold   []string
	reason string
}{
	{"Orrin Bay north loop", []string{"TC-0412"},
		"north loop of 14 May 2024 adjusted on TC-0412, reviewed by the county surveyor (invented)"},
	{"Mere River levee line", []string{"TC-0420", "TC-0427"},
		"levee line of 3 June 2024 adjusted between TC-0420 and TC-0427, reviewed by the county surveyor (invented)"},
}

// TraceMark is a mark whose height the demo publishes from an adjustment,
// so that its trace leads through a run's book to an outside citation.
const TraceMark = "TC-0415"

// adjustRuns adjusts each recorded demo run against its held marks and
// publishes the result. A demo run not recorded is passed over.
func adjustRuns(ctx context.Context, r *register.Register) error {
	runs, err := r.RunList(ctx, register.RunListParams{})
	if err != nil {
		return err
	}
	for _, a := range demoAdjustments {
		for _, run := range runs {
			if run.Name != a.run {
				continue
			}
			v, err := r.Adjust(ctx, register.AdjustParams{RunIDs: []int64{run.ID}, Hold: register.HoldFixed(a.hold...), By: Clerk})
			if err != nil {
				return fmt.Errorf("%s: %w", a.run, err)
			}
			if _, err := r.Publish(ctx, register.PublishParams{AdjustmentID: v.Adjustment.ID, Reason: a.reason, By: Clerk}); err != nil {
				return fmt.Errorf("%s: %w", a.run, err)
			}
		}
	}
	return nil
}
