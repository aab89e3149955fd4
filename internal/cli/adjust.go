package cli

import (
	"github.com/spf13/cobra"
)

// adjustCautions go with every adjustment report and publication.
const adjustCautions = `Cautions: an adjustment is a computation, not a survey. Its results need
review by a licensed surveyor before they are published or used. Check into
two marks. Verify a mark's condition in the field before relying on it.
Local codes and regulations govern.`

func newCmdAdjust(f *Factory, runF func(*adjustRegisterOptions) error) *cobra.Command {
	opts := &adjustRegisterOptions{f: f}
	cmd := &cobra.Command{
		Use:   "adjust RUN... --hold DESIGNATION... [--by distance|setups] [--dry-run]",
		Short: "Adjust recorded runs against held control, as a draft for review",
		Long: `Adjust recorded level runs against held control marks and keep the result
as a draft adjustment, to be reviewed and then published with 'cairn
publish' or set aside with 'cairn discard'. Nothing is published here.

The held marks are held at their current heights on the datum (--datum, or
the one datum on which all of them have a height); the draft keeps the exact
versions held, so publishing later fails if any of them has changed.

--method proportional (the default) spreads each run's misclosure over its
marks in proportion to the distance levelled (--by distance) or to the
number of setups (--by setups). A loop closes on its starting mark; a line
runs between two or more held marks, and each stretch between consecutive
held marks is adjusted on its own.

The report shows, per mark, the computed height, the correction, the
adjusted height and the height to be published (rounded to the precision the
runs' accuracy class supports in the unit, unless --unit and --decimals say
otherwise), and each stretch's misclosure against the class's allowable. A
misclosure over the allowable gives exit status 3; the draft is still kept.

A held mark whose latest condition report says disturbed, destroyed or not
found is refused, unless --allow-condition is given with --reason.

` + adjustCautions,
		Example: `  cairn adjust 1 --hold TC-0412
  cairn adjust 2 --hold TC-0420 --hold TC-0427 --by setups --dry-run`,
		Args: minArgs(1, "at least one RUN"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := opts.parse(cmd, args); err != nil {
				return err
			}
			if runF != nil {
				return runF(opts)
			}
			return adjustRegisterRun(cmd.Context(), opts)
		},
	}
	opts.flags(cmd)
	return cmd
}
