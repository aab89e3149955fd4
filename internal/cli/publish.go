package cli

import (
	"context"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

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
	// Publish only: acceptance of failed checks, its reason, and the
	// threshold of a large change in metres.
	accept       bool
	acceptReason string
	largeChangeM float64
	// Publish only: the condition report to write on the re-levelled marks
	// in doubt, and its note.
	reportCondition string
	conditionNote   string
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

// parseAcceptance checks publish's own flags.
func (o *publishOptions) parseAcceptance() error {
	o.acceptReason = strings.TrimSpace(o.acceptReason)
	switch {
	case o.accept && o.acceptReason == "":
		return badInput("--accept-failed-checks needs --accept-reason saying why the failed checks are accepted")
	case !o.accept && o.acceptReason != "":
		return badInput("--accept-reason goes with --accept-failed-checks")
	case o.reportCondition != "" && strings.TrimSpace(o.conditionNote) == "":
		return badInput("--report-condition needs --condition-note saying what the crew found at the marks")
	case o.reportCondition == "" && strings.TrimSpace(o.conditionNote) != "":
		return badInput("--condition-note goes with --report-condition")
	case !(o.largeChangeM > 0) || math.IsInf(o.largeChangeM, 0):
		return badInput("--large-change-m: give a positive number of metres, not %v", o.largeChangeM)
	}
	return nil
}

func newCmdPublish(f *Factory, runF func(*publishOptions) error) *cobra.Command {
	opts := &publishOptions{f: f}
	cmd := &cobra.Command{
		Use:   "publish ADJUSTMENT --reason TEXT [--by NAME] [--yes] [--accept-failed-checks --accept-reason TEXT]",
		Short: "Publish a draft adjustment's heights as new versions",
		Long: `Publish a draft adjustment: each mark it adjusted gets a new height version,
with the reason given, citing the adjustment. It happens in one transaction:
either every height is published or none is.

Publishing first checks that every version the adjustment held, and every
version it is to replace, is still current. If anyone has published a height
of those marks since the draft was made, it stops with a conflict naming the
mark (exit status 4) and writes nothing: adjust again against the current
heights.

It then refuses (exit status 2, nothing written) a draft whose checks
failed, listing each:
  - a stretch whose misclosure exceeds the allowable of its class, in the
    standards profile that judged its run (cairn standards show NAME gives
    the profile's source, and which values were read there and which are
    from memory);
  - a failed chi-square test of the variance factor (least squares);
  - each section, or mark held weighted, flagged by data snooping;
  - a held mark whose latest condition report, read now, says disturbed,
    destroyed or not found (a report made after the draft counts).
To publish such a draft on purpose, give --accept-failed-checks with
--accept-reason saying why the failed checks are accepted (--reason says why
the heights are published). The acceptance, its reason, who gave it and the
checks are kept with the publication and shown by trace, history and
adjustment show.

An adjustment already published or discarded cannot be published: exit
status 2.

A new height does not clear the doubt a condition report cast on a mark: a
mark last reported disturbed, destroyed or not found stays in doubt, new
height and all, until a later report says otherwise. When the crew that
levelled such marks found them sound, or set them again, give
--report-condition good (or reset) with --condition-note saying what was
found: the publication then writes that report on each of them, observed on
the date of the last run that levelled it, in the same transaction. A mark
reported in doubt after that run is refused (exit status 2): the run cannot
speak for it.

Before publishing it lists every mark: the height in force (converted
exactly to the unit it will be published in) and the new one, the change,
the unit and the class. A change over --large-change-m metres, and a mark
whose published unit changes (m, ft, usft), are called out. On a terminal it
asks for confirmation; otherwise --yes is required. -o json gives the same
list under "changes".

` + adjustCautions,
		Example: `  cairn publish 3 --reason "north loop of May 2024, reviewed by J. Ames, PLS"
  cairn publish 4 --reason "levee line of June 2024" \
    --accept-failed-checks --accept-reason "misclosure explained: TC-0423 re-set, see field note 17"`,
		Args: exactArgs(1, "an ADJUSTMENT number"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			if err := opts.parse(args); err != nil {
				return err
			}
			if err := opts.parseAcceptance(); err != nil {
				return err
			}
			return dispatch(opts, runF, publishRun)
		},
	}
	addOutputFlag(cmd, &opts.format)
	fl := cmd.Flags()
	fl.StringVar(&opts.reason, "reason", "", "why these heights are published (required; kept with every version)")
	fl.StringVar(&opts.by, "by", osUser(), "who publishes")
	fl.BoolVar(&opts.yes, "yes", false, "publish without asking (required when not on a terminal)")
	fl.BoolVar(&opts.accept, "accept-failed-checks", false, "publish even though checks failed (needs --accept-reason; kept with the publication)")
	fl.StringVar(&opts.acceptReason, "accept-reason", "", "with --accept-failed-checks: why the failed checks are accepted")
	fl.Float64Var(&opts.largeChangeM, "large-change-m", register.DefaultLargeChangeM, "call out a change of a height larger than this, in metres")
	fl.StringVar(&opts.reportCondition, "report-condition", "", "good or reset: report this condition on the re-levelled marks in doubt (needs --condition-note)")
	fl.StringVar(&opts.conditionNote, "condition-note", "", "with --report-condition: what the crew found at the marks")
	return cmd
}

// markChangeJSON is what a publication changes for one mark.
type markChangeJSON struct {
	Mark string `json:"mark"`
	// CurrentVersion, CurrentPublished and CurrentUnit are the version in
	// force before, as published (null for a first height).
	CurrentVersion   *int    `json:"current_version"`
	CurrentPublished *string `json:"current_published"`
	CurrentUnit      *string `json:"current_unit"`
	CurrentClass     *string `json:"current_class"`
	// CurrentValue is the current value converted exactly to Unit.
	CurrentValue *string  `json:"current_value"`
	NewValue     string   `json:"new_value"`
	Unit         string   `json:"unit"`
	Decimals     int      `json:"decimals"`
	Class        string   `json:"class"`
	Change       *string  `json:"change"`
	ChangeM      *float64 `json:"change_m"`
	LargeChange  bool     `json:"large_change"`
	UnitChange   bool     `json:"unit_change"`
}

func toMarkChangeJSON(c register.MarkChange) markChangeJSON {
	j := markChangeJSON{Mark: c.Designation, NewValue: c.Value, Unit: c.Unit, Decimals: c.Decimals, Class: c.Class,
		ChangeM: c.ChangeM, LargeChange: c.Large, UnitChange: c.UnitChanged}
	if cur := c.Current; cur != nil {
		v, class := cur.Version, cur.Class
		j.CurrentVersion, j.CurrentPublished, j.CurrentUnit, j.CurrentClass = &v, cur.Value, cur.Unit, &class
	}
	if c.CurrentValue != "" {
		v := c.CurrentValue
		j.CurrentValue = &v
	}
	if c.Change != "" {
		d := c.Change
		j.Change = &d
	}
	return j
}

// failedCheckJSON is a failed check in machine output.
type failedCheckJSON struct {
	Kind    string `json:"kind"`
	Message string `json:"message"`
	RunID   *int64 `json:"run_id"`
	Mark    string `json:"mark,omitempty"`
}

// acceptanceJSON is a publication's acceptance of failed checks.
type acceptanceJSON struct {
	Reason string            `json:"reason"`
	By     string            `json:"by"`
	At     time.Time         `json:"at"`
	Checks []failedCheckJSON `json:"checks"`
}

func toFailedChecksJSON(cs []register.FailedCheck) []failedCheckJSON {
	out := []failedCheckJSON{}
	for _, c := range cs {
		j := failedCheckJSON{Kind: c.Kind, Message: c.Message, Mark: c.Mark}
		if c.RunID != 0 {
			id := c.RunID
			j.RunID = &id
		}
		out = append(out, j)
	}
	return out
}

// toAcceptanceJSON is nil for no acceptance.
func toAcceptanceJSON(a *register.Acceptance) *acceptanceJSON {
	if a == nil {
		return nil
	}
	return &acceptanceJSON{Reason: a.Reason, By: a.By, At: a.At, Checks: toFailedChecksJSON(a.Checks)}
}

// acceptanceText is the loud statement of an acceptance of failed checks,
// a line for each check after the first, indented by indent.
func acceptanceText(a *acceptanceJSON, indent string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "PUBLISHED WITH FAILED CHECKS ACCEPTED by %s on %s: %s", a.By, timeText(a.At), a.Reason)
	for _, c := range a.Checks {
		fmt.Fprintf(&b, "\n%s  accepted %s: %s", indent, c.Kind, c.Message)
	}
	return b.String()
}

// publishJSON is `publish -o json`: the adjustment's status, its reason,
// who published it and when under the keys of adjustment show.
type publishJSON struct {
	AdjustmentID int64            `json:"adjustment_id"`
	Datum        string           `json:"datum"`
	Status       string           `json:"status"`
	StatusReason string           `json:"status_reason"`
	StatusBy     string           `json:"status_by"`
	StatusAt     *time.Time       `json:"status_at"`
	LargeChangeM float64          `json:"large_change_m"`
	Changes      []markChangeJSON `json:"changes"`
	Versions     []heightJSON     `json:"versions"`
	// AcceptedFailedChecks is null when every check passed.
	AcceptedFailedChecks *acceptanceJSON `json:"accepted_failed_checks"`
	// ConditionsReported are the condition reports written with the
	// publication (--report-condition); StillInDoubt the re-levelled marks
	// whose latest report still casts doubt on their new heights.
	ConditionsReported []reportedJSON    `json:"conditions_reported"`
	StillInDoubt       []markInDoubtJSON `json:"still_in_doubt"`
	Cautions           string            `json:"cautions"`
}

// reportedJSON is a condition report a publication wrote.
type reportedJSON struct {
	Mark string `json:"mark"`
	conditionJSON
}

// changesTable is the list of what a publication changes, mark by mark,
// with the new versions' numbers when they are known (versions, by
// designation; nil before publishing).
func changesTable(changes []register.MarkChange, versions map[string]int) Table {
	t := Table{Headers: []string{"MARK", "CURRENT" + perRowUnit, "NEW" + perRowUnit, "CHANGE" + perRowUnit, "UNIT", "CLASS", "NOTE"}}
	if versions != nil {
		t.Headers = append([]string{"MARK", "VERSION"}, t.Headers[1:]...)
	}
	for _, c := range changes {
		cur, class := "(first)", c.Class
		if c.Current != nil {
			cur = c.CurrentValue
			if c.Current.Value == nil {
				cur = "(withdrawn)"
			}
			if c.Current.Class != c.Class {
				class = orNone(c.Current.Class) + " -> " + orNone(c.Class)
			}
		}
		row := []string{c.Designation, cur, c.Value, c.Change, c.Unit, class, strings.Join(changeNotes(c), "; ")}
		if versions != nil {
			row = append([]string{c.Designation, strconv.Itoa(versions[c.Designation])}, row[1:]...)
		}
		t.AddRow(row...)
	}
	return t
}

func orNone(s string) string {
	if s == "" {
		return "(none)"
	}
	return s
}

// changeNotes call out a large change and a change of unit.
func changeNotes(c register.MarkChange) []string {
	var notes []string
	if c.Large {
		notes = append(notes, "LARGE CHANGE")
	}
	if c.UnitChanged {
		notes = append(notes, fmt.Sprintf("UNIT CHANGES: was %s %s", *c.Current.Value, *c.Current.Unit))
	}
	return notes
}

// callOutChanges warns loudly, with warn, of each large change and each
// change of unit.
func callOutChanges(ios *IOStreams, warn func(*IOStreams, string), changes []register.MarkChange, largeM float64) {
	var lines []string
	for _, c := range changes {
		if c.Large {
			inM := ""
			if c.Unit != "m" {
				inM = fmt.Sprintf(" (%+.4f m)", *c.ChangeM)
			}
			lines = append(lines, fmt.Sprintf("LARGE CHANGE: %s changes by %s %s%s, more than %g m: from %s %s to %s %s",
				c.Designation, c.Change, c.Unit, inM, largeM, c.CurrentValue, c.Unit, c.Value, c.Unit))
		}
		if c.UnitChanged {
			lines = append(lines, fmt.Sprintf("UNIT CHANGES: %s was published in %s (%s %s, exactly %s %s) and will be published in %s",
				c.Designation, *c.Current.Unit, *c.Current.Value, *c.Current.Unit, c.CurrentValue, c.Unit, c.Unit))
		}
	}
	if len(lines) > 0 {
		warn(ios, strings.Join(lines, "\n"))
	}
}

// publishRun shows what the publication changes, refuses failed checks
// not accepted, and publishes once confirmed.
func publishRun(opts *publishOptions) error {
	ctx, ios := opts.ctx, opts.f.IO
	r, err := openRegister(ctx, opts.f)
	if err != nil {
		return err
	}
	pv, err := r.PublishPreview(ctx, opts.id, opts.largeChangeM)
	if err != nil {
		return err
	}
	if !opts.accept {
		if err := pv.Refusal(); err != nil {
			return err
		}
	} else if len(pv.Failed) == 0 {
		ios.printf("--accept-failed-checks: every check of adjustment %d passed; there is nothing to accept, and no acceptance is recorded\n", opts.id)
	}
	if !opts.yes {
		ios.printf("Adjustment %d would publish %d new height(s) on %s:\n", opts.id, len(pv.Changes), pv.View.Adjustment.DatumCode)
		if err := writeTable(&IOStreams{Out: ios.ErrOut, IsTerminal: true}, FormatTable, changesTable(pv.Changes, nil)); err != nil {
			return err
		}
		callOutChanges(ios, warnLoudly, pv.Changes, pv.LargeChangeM)
		for _, d := range pv.View.InDoubt {
			if opts.reportCondition != "" {
				ios.printf("It will report %s %s (last reported %s on %s).\n", d.Designation, strings.ToLower(opts.reportCondition),
					d.Condition.Condition, d.Condition.ObservedOn.Format("2006-01-02"))
			} else {
				ios.printf("%s stays in doubt (reported %s on %s) until a condition report says otherwise.\n", d.Designation,
					strings.ToUpper(d.Condition.Condition), d.Condition.ObservedOn.Format("2006-01-02"))
			}
		}
		if opts.accept && len(pv.Failed) > 0 {
			warnLoudly(ios, fmt.Sprintf("PUBLISHING WITH FAILED CHECKS ACCEPTED by %s: %s%s", opts.by, opts.acceptReason,
				checkLines(pv.Failed)))
		}
		if err := confirm(ios, fmt.Sprintf("Publish %d new height(s) on %s from adjustment %d?", len(pv.Changes), pv.View.Adjustment.DatumCode, opts.id)); err != nil {
			return err
		}
	}
	pub, err := r.Publish(ctx, register.PublishParams{AdjustmentID: opts.id, Reason: opts.reason, By: opts.by,
		AcceptFailedChecks: opts.accept, AcceptReason: opts.acceptReason, LargeChangeM: opts.largeChangeM,
		ReportCondition: opts.reportCondition, ConditionNote: opts.conditionNote})
	if err != nil {
		return err
	}
	a := pub.Adjustment
	out := publishJSON{AdjustmentID: a.ID, Datum: a.DatumCode, Status: a.Status, StatusReason: a.StatusReason, StatusBy: a.StatusBy, StatusAt: a.StatusAt,
		LargeChangeM: pub.LargeChangeM, Changes: []markChangeJSON{}, Versions: []heightJSON{},
		AcceptedFailedChecks: toAcceptanceJSON(pub.Accepted), Cautions: adjustCautions,
		ConditionsReported: []reportedJSON{}, StillInDoubt: []markInDoubtJSON{}}
	for _, c := range pub.Reported {
		out.ConditionsReported = append(out.ConditionsReported, reportedJSON{Mark: c.Designation, conditionJSON: toConditionJSON(c.Condition)})
	}
	for _, d := range pub.StillInDoubt {
		out.StillInDoubt = append(out.StillInDoubt, toMarkInDoubtJSON(d))
	}
	for _, c := range pub.Changes {
		out.Changes = append(out.Changes, toMarkChangeJSON(c))
	}
	for _, h := range pub.Versions {
		out.Versions = append(out.Versions, toHeightJSON(h, ""))
	}
	if opts.format == FormatJSON {
		return writeJSON(ios.Out, out)
	}
	versions := map[string]int{}
	for _, h := range pub.Versions {
		versions[h.Designation] = h.Version
	}
	// CSV is the table alone, the rest on ErrOut; otherwise the whole
	// report goes to Out, terminal or not (docs/output.md).
	say, warn := ios.printf, warnLoudly
	write := func(t Table) error { return writeTable(ios, opts.format, t) }
	if opts.format == FormatTable {
		say, warn = func(f string, a ...any) { fmt.Fprintf(ios.Out, f, a...) }, warnInReport
		write = func(t Table) error { return writeAligned(ios.Out, t) }
	}
	say("Published adjustment %d: %d new height version(s) on %s, by %s: %s\n", opts.id, len(out.Versions), a.DatumCode, a.StatusBy, a.StatusReason)
	if err := write(changesTable(pub.Changes, versions)); err != nil {
		return err
	}
	callOutChanges(ios, warn, pub.Changes, pub.LargeChangeM)
	if out.AcceptedFailedChecks != nil {
		warn(ios, acceptanceText(out.AcceptedFailedChecks, ""))
	}
	for _, c := range out.ConditionsReported {
		say("Reported %s %s, observed %s: %s\n", c.Mark, c.Condition, c.ObservedOn, c.Note)
	}
	var still []string
	for _, d := range out.StillInDoubt {
		still = append(still, fmt.Sprintf("WARNING: %s is still reported %s (%s, %s): its new height stays in doubt until a condition report says otherwise (cairn mark condition, or publish --report-condition)",
			d.Mark, strings.ToUpper(d.Condition), d.ObservedOn, d.Note))
	}
	if len(still) > 0 {
		warn(ios, strings.Join(still, "\n"))
	}
	say("\n%s\n", adjustCautions)
	return nil
}

// checkLines are the failed checks, a line each.
func checkLines(cs []register.FailedCheck) string {
	var b strings.Builder
	for _, c := range cs {
		fmt.Fprintf(&b, "\n  %s: %s", c.Kind, c.Message)
	}
	return b.String()
}

func newCmdDiscard(f *Factory, runF func(*publishOptions) error) *cobra.Command {
	opts := &publishOptions{f: f}
	cmd := &cobra.Command{
		Use:   "discard ADJUSTMENT --reason TEXT [--by NAME] [--yes]",
		Short: "Set a draft adjustment aside for good",
		Long: `Set a draft adjustment aside: it stays in the register, with the reason,
but can no longer be published. An adjustment already published or
discarded cannot be discarded: exit status 2.

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
