package cli

import (
	"bufio"
	"context"
	"encoding/hex"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"github.com/spf13/cobra"

	"cairn/internal/adjust"
	"cairn/internal/register"
	"cairn/internal/store"
	"cairn/internal/units"
)

// adjustRegisterOptions are the options of `cairn adjust RUN... --hold`:
// the flags as given, and the parameters parsed from them.
type adjustRegisterOptions struct {
	f        *Factory
	format   Format
	params   register.AdjustParams
	hold     []string // --hold MARK (or, deprecated, MARK:SD_MM)
	weighted []string // --hold-weighted MARK=SD_MM
	// marksFile is --marks-file; marksFrom says where each of
	// params.Marks was read ("" for --marks).
	marksFile string
	marksFrom []string
	// runsFile is --runs-file, its runs added to those named as
	// arguments (params.RunsFrom says where each was read).
	runsFile string
	method   string
	by       string // who; once the distribution (deprecated)
	madeBy   string // deprecated spelling of --by
	distrib  string
	// distribFlag is the flag that gave the distribution: "distribute",
	// "by" (deprecated), or "" for none.
	distribFlag string
	decimals    int
	weight      string
	area        string
	within      string
}

// adjustCautions go with every adjustment report and publication.
const adjustCautions = `Cautions: an adjustment is a computation, not a survey. Its results need
review by a licensed surveyor before they are published or used. Check into
two marks. Verify a mark's condition in the field before relying on it.
Local codes and regulations govern.`

// adjustRegisterLong describes the register form of adjust.
const adjustRegisterLong = `Adjust recorded level runs against held control marks and keep the result
as a draft adjustment, to be reviewed and then published with 'cairn
publish' or set aside with 'cairn discard'. Nothing is published here.

The held marks are held at their current heights on the datum (--datum, or
the one datum on which all of them have a height); the draft keeps the exact
versions held, so publishing later fails if any of them has changed.

--method proportional (the default) spreads each run's misclosure over its
marks in proportion to the distance levelled (--distribute distance) or to
the number of setups (--distribute setups). A loop closes on its starting mark; a line
runs between two or more held marks, and each stretch between consecutive
held marks is adjusted on its own.

The report shows, per mark, the computed height, the correction, the
adjusted height and the height to be published (rounded to the precision the
runs' accuracy class supports in the unit, unless --unit and --decimals say
otherwise), and each stretch's misclosure against the class's allowable. A
misclosure over the allowable gives exit status 3; the draft is still kept.
Each run is judged by the standards profile that judged it when it was
recorded (run show and trace name it, with its source and which of its
values were read in that source and which are from memory: cairn standards
show NAME); a run recorded before profiles were kept is judged by today's
fgcc-1984. Sections levelled back in another run of the adjustment are
compared as double-run sections, and held marks as check connections.

--method least-squares adjusts the sections of all the runs together as
one network by weighted least squares: a mark reached by several runs is
one unknown, so the order of the runs does not matter. Sections weigh
1/length (--weight length) or 1/setups (--weight setups); the a-priori
standard deviation --sigma-mm-per-sqrt-km is then per square root of a
kilometre, or of a setup. --hold MARK holds a mark fixed; --hold-weighted
MARK=SD_MM holds it weighted, its current height taken as an observation
with that standard deviation in millimetres. --minimal holds only the first held mark
and adjusts the others as check marks, never published, to judge the runs
apart from the control. --marks and --area (with --within) add every run
with a section from or to the marks named or the marks in the area;
--marks-file FILE names marks one a line and --runs-file FILE numbers runs
one a line (blank lines and # comments skipped), for more than a command
line holds.

The least-squares report gives each mark's adjusted height and standard
deviation, the redundancy, the variance factor with its chi-square test at
--alpha, and the sections flagged by data snooping (|w| over
--snoop-critical), with their runs and book lines, and how many sections
chance alone would flag with no blunder. --snooping per-observation (the
default) tests each section at the level of --snoop-critical (3.29: 0.001),
so a clean network of 100,000 sections has about a hundred flagged;
--snooping family tests the network as a whole at that level (Šidák: each
of its n tests at 1 - (1 - 0.001)^(1/n)). A failed test or a section
flagged under the --snooping asked for gives exit status 3; the draft is
still kept. Marks with no path to a held mark are an error naming them.

A held mark whose latest condition report says disturbed, destroyed or not
found is refused, unless --allow-condition is given with --reason.

--by names who makes the adjustment, as on every command that writes.
Deprecated spellings, kept for this release: --hold MARK:SD_MM (now
--hold-weighted MARK=SD_MM), --by distance|setups (now --distribute) and
--made-by (now --by).`

// holds reports whether any mark is held with --hold or --hold-weighted.
func (o *adjustRegisterOptions) holds() bool { return len(o.hold)+len(o.weighted) > 0 }

// flags adds the register form's flags (-o is the command's own).
func (o *adjustRegisterOptions) flags(cmd *cobra.Command) {
	fl := cmd.Flags()
	fl.StringSliceVar(&o.hold, "hold", nil, "marks to hold fixed at their current heights; repeat, or separate with commas (MARK:SD_MM is deprecated: use --hold-weighted)")
	fl.StringSliceVar(&o.weighted, "hold-weighted", nil, "least squares: MARK=SD_MM holds a mark weighted, its current height an observation with that standard deviation in millimetres")
	fl.StringSliceVar(&o.params.Marks, "marks", nil, "also adjust every run with a section from or to these marks")
	fl.StringVar(&o.marksFile, "marks-file", "", "also adjust every run with a section from or to the marks named in this file, one a line (# comments)")
	fl.StringVar(&o.runsFile, "runs-file", "", "also adjust the runs numbered in this file, one a line (# comments)")
	fl.StringVar(&o.area, "area", "", "LAT,LON: also adjust every run with a section from or to a mark within --within of this point")
	fl.StringVar(&o.within, "within", "", "radius of --area, in m, km, ft, usft or mi (e.g. 5km, 3mi)")
	fl.StringVar(&o.weight, "weight", "length", "least squares: weigh sections by length or by setups")
	fl.StringVar(&o.params.Datum, "datum", "", "datum code (default: the one the runs' books name, else the one on which every held mark has a height)")
	fl.StringVar(&o.method, "method", string(adjust.MethodProportional), "method of adjustment: proportional or least-squares")
	fl.StringVar(&o.distrib, "distribute", "distance", "proportional: spread the misclosure by distance or by setups")
	fl.StringVar(&o.params.Unit, "unit", "", "unit of the heights to publish: m, ft or usft (default: the held heights' unit)")
	fl.IntVar(&o.decimals, "decimals", 0, "decimals of the heights to publish (default: the precision of the runs' class)")
	fl.BoolVar(&o.params.DryRun, "dry-run", false, "compute and report, store nothing")
	fl.BoolVar(&o.params.AllowCondition, "allow-condition", false, "hold marks whose latest condition report is disturbed, destroyed or not found (needs --reason)")
	fl.StringVar(&o.params.ConditionReason, "reason", "", "with --allow-condition: why those marks may be held")
	fl.StringVar(&o.by, "by", osUser(), "who makes the adjustment (--by distance|setups is deprecated: use --distribute)")
	fl.StringVar(&o.madeBy, "made-by", "", "deprecated: use --by")
}

// parse fills o.params from the flags and args.
func (o *adjustRegisterOptions) parse(cmd *cobra.Command, args []string) error {
	if o.marksFile != "" {
		if err := o.readMarksFile(); err != nil {
			return err
		}
	}
	for _, a := range args {
		id, err := strconv.ParseInt(strings.TrimSpace(a), 10, 64)
		if err != nil || id <= 0 {
			return badInput("run: %q is not a run number (see cairn run list)", a)
		}
		o.params.RunIDs = append(o.params.RunIDs, id)
	}
	if o.runsFile != "" {
		if err := o.readRunsFile(); err != nil {
			return err
		}
	}
	if len(o.params.RunIDs) == 0 && len(o.params.Marks) == 0 && o.area == "" {
		return badInput("run: name the runs to adjust (see cairn run list), or choose them with --runs-file, --marks, --marks-file or --area")
	}
	m, err := adjust.ParseMethod(o.method)
	if err != nil {
		return badInput("method: %v", err)
	}
	o.params.Method = m
	lsq := m == adjust.MethodLeastSquares
	if err := o.parseBy(cmd); err != nil {
		return err
	}
	d, err := adjust.ParseDistribution(o.distrib)
	if err != nil {
		return badInput("distribute: %v", err)
	}
	o.params.Distribution = d
	if cmd.Flags().Changed("distribute") {
		o.distribFlag = "distribute"
	}
	if lsq && o.distribFlag != "" {
		return badInput("%s: --%s spreads a proportional misclosure; least squares weighs sections with --weight", o.distribFlag, o.distribFlag)
	}
	for _, name := range []string{"weight", "sigma-mm-per-sqrt-km", "alpha", "snoop-critical", "snooping", "minimal", "hold-weighted"} {
		if !lsq && cmd.Flags().Changed(name) {
			return badInput("%s: --%s goes with --method least-squares", name, name)
		}
	}
	switch o.weight {
	case "length":
		o.params.LeastSquares.Weighting = adjust.WeightByLength
	case "setups":
		o.params.LeastSquares.Weighting = adjust.WeightBySetups
	default:
		return badInput("weight: %q is not length or setups", o.weight)
	}
	if o.area != "" {
		ll, err := parseLatLon(o.area)
		if err != nil || ll.Lat < -90 || ll.Lat > 90 || ll.Lon < -180 || ll.Lon > 180 {
			return badInput("area: %q is not LAT,LON in decimal degrees (e.g. 41.62,-97.95)", o.area)
		}
		if o.within == "" {
			return badInput("within: give the radius of --area (e.g. --within 5km)")
		}
		if o.params.RadiusM, err = parseDistance(o.within); err != nil {
			return err
		}
		o.params.Near = &ll
	} else if o.within != "" {
		return badInput("within: --within goes with --area")
	}
	if cmd.Flags().Changed("decimals") {
		o.params.Decimals = &o.decimals
	}
	if o.params.Hold, err = parseHeldMarks(o.f.IO, o.hold, o.weighted); err != nil {
		return err
	}
	if len(o.params.Hold) == 0 {
		return badInput("hold: hold at least one mark with --hold (a loop closes on its starting mark; a line needs a mark at each end)")
	}
	if o.params.ConditionReason != "" && !o.params.AllowCondition {
		return badInput("reason: --reason goes with --allow-condition")
	}
	return nil
}

// parseBy reads who makes the adjustment from --by (or the deprecated
// --made-by), and the deprecated --by distance|setups as the distribution.
func (o *adjustRegisterOptions) parseBy(cmd *cobra.Command) error {
	fl := cmd.Flags()
	o.params.By = o.by
	if fl.Changed("by") {
		if d, err := adjust.ParseDistribution(o.by); err == nil && strings.TrimSpace(o.by) != "" {
			if fl.Changed("distribute") {
				return badInput("by: --by names who makes the adjustment; give the distribution with --distribute only")
			}
			deprecated(o.f.IO, "--by "+o.by, "--distribute "+d.String()+" (and --by for who makes the adjustment)")
			o.distrib, o.distribFlag, o.params.By = d.String(), "by", osUser()
		}
	}
	if fl.Changed("made-by") {
		if fl.Changed("by") && o.params.By == o.by {
			return badInput("made-by: --made-by is the old spelling of --by; give one of them")
		}
		deprecated(o.f.IO, "--made-by", "--by")
		o.params.By = o.madeBy
	}
	return nil
}

// parseHeldMarks reads --hold MARK (and the deprecated MARK:SD_MM) and
// --hold-weighted MARK=SD_MM into held marks, in the order given: those of
// --hold first.
func parseHeldMarks(ios *IOStreams, fixed, weighted []string) ([]register.Hold, error) {
	var holds []register.Hold
	for _, h := range fixed {
		d, mm, colon := strings.Cut(strings.TrimSpace(h), ":")
		if !colon {
			holds = append(holds, register.Hold{Designation: d})
			continue
		}
		sd, err := parseSDMM(mm)
		if err != nil {
			return nil, badInput("hold: %q: after the colon give the held height's standard deviation in millimetres, more than zero (e.g. %s:5)", h, d)
		}
		deprecated(ios, "--hold "+h, "--hold-weighted "+d+"="+strings.TrimSpace(mm))
		holds = append(holds, register.Hold{Designation: d, SigmaM: sd})
	}
	for _, h := range weighted {
		d, mm, ok := strings.Cut(strings.TrimSpace(h), "=")
		sd, err := parseSDMM(mm)
		if !ok || err != nil || strings.TrimSpace(d) == "" {
			return nil, badInput("hold-weighted: %q: give MARK=SD_MM, the held height's standard deviation in millimetres, more than zero (e.g. TC-0412=5)", h)
		}
		holds = append(holds, register.Hold{Designation: strings.TrimSpace(d), SigmaM: sd})
	}
	return holds, nil
}

// parseSDMM reads a positive standard deviation in millimetres ("5" or
// "5mm") and returns it in metres.
func parseSDMM(s string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSuffix(strings.TrimSpace(s), "mm"), 64)
	if err != nil {
		return 0, err
	}
	if !(v > 0) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%v is not more than zero", v)
	}
	return v / 1000, nil
}

// deprecated says on stderr that an old spelling was used, and its new one.
func deprecated(ios *IOStreams, old, now string) {
	fmt.Fprintf(ios.ErrOut, "cairn: %s is deprecated and will be removed in the next release: use %s\n", old, now)
}

func adjustRegisterRun(ctx context.Context, opts *adjustRegisterOptions) error {
	r, err := openRegister(ctx, opts.f)
	if err != nil {
		return err
	}
	prog := startProgress(opts.f.IO)
	prog.set("reading the runs")
	opts.params.LeastSquares.Progress = prog.set
	v, err := r.Adjust(ctx, opts.params)
	prog.end()
	if err != nil {
		return err
	}
	if err := renderAdjustment(opts.f.IO, opts.format, v, opts.params.DryRun); err != nil {
		return err
	}
	if n := v.Failed(); n > 0 {
		return checksFailed{n}
	}
	return nil
}

// adjustmentJSON is an adjustment in machine output.
type adjustmentJSON struct {
	// AdjustmentID is null for a dry run.
	AdjustmentID *int64              `json:"adjustment_id"`
	DryRun       bool                `json:"dry_run"`
	Status       string              `json:"status"`
	StatusReason string              `json:"status_reason,omitempty"`
	StatusBy     string              `json:"status_by,omitempty"`
	StatusAt     *time.Time          `json:"status_at,omitempty"`
	Method       string              `json:"method"`
	Datum        string              `json:"datum"`
	Parameters   register.Parameters `json:"parameters"`
	CreatedBy    string              `json:"created_by,omitempty"`
	CreatedAt    *time.Time          `json:"created_at,omitempty"`
	// ConditionReason says why marks in doubt were held.
	ConditionReason string       `json:"condition_reason,omitempty"`
	Runs            []runRefJSON `json:"runs"`
	// RunsLeftOut are the voided runs --marks or --area chose, left out
	// (given when the draft is made).
	RunsLeftOut []runRefJSON      `json:"runs_left_out"`
	Held        []heldJSON        `json:"held"`
	Results     []resultJSON      `json:"results"`
	Statistics  adjust.Statistics `json:"statistics"`
	// Sections are a least-squares adjustment's sections, flagged or not.
	Sections []adjSectionJSON `json:"sections,omitempty"`
	// MarksInDoubt are adjusted marks whose latest condition report is
	// disturbed, destroyed or not found.
	MarksInDoubt []markInDoubtJSON `json:"marks_in_doubt"`
	ChecksFailed int               `json:"checks_failed"`
	// AcceptedFailedChecks is the acceptance of failed checks the
	// adjustment was published with; null when none.
	AcceptedFailedChecks *acceptanceJSON `json:"accepted_failed_checks"`
	Cautions             string          `json:"cautions"`
}

type markInDoubtJSON struct {
	Mark       string `json:"mark"`
	Condition  string `json:"condition"`
	ObservedOn string `json:"observed_on"`
	Note       string `json:"note"`
}

func toMarkInDoubtJSON(d register.MarkInDoubt) markInDoubtJSON {
	return markInDoubtJSON{Mark: d.Designation, Condition: d.Condition.Condition,
		ObservedOn: d.Condition.ObservedOn.Format("2006-01-02"), Note: d.Condition.Note}
}

type adjSectionJSON struct {
	RunID       int64    `json:"run_id"`
	Seq         int      `json:"section"`
	From        string   `json:"from"`
	To          string   `json:"to"`
	FromLine    int      `json:"from_line"`
	ToLine      int      `json:"to_line"`
	ResidualM   float64  `json:"residual_m"`
	ResidualSDM float64  `json:"residual_sd_m"`
	W           *float64 `json:"w"`
	Flagged     bool     `json:"flagged"`
}

type runRefJSON struct {
	RunID      int64  `json:"run_id"`
	Name       string `json:"name"`
	FileName   string `json:"file_name"`
	BookSHA256 string `json:"book_sha256"`
	// ObservedOn is the date in the book, YYYY-MM-DD; null when none.
	ObservedOn *string `json:"observed_on"`
	Class      string  `json:"class"`
	// Standards is the profile that judged the run.
	Standards runStandardsJSON `json:"standards"`
	// Voided is the run's void, null while it stands (a run voided after
	// the adjustment was made, or left out of it).
	Voided *voidJSON `json:"voided"`
}

type heldJSON struct {
	Mark     string  `json:"mark"`
	Datum    string  `json:"datum"`
	Version  int     `json:"version"`
	Value    *string `json:"value"`
	Unit     *string `json:"unit"`
	Current  bool    `json:"current"`
	Source   string  `json:"source"`
	HeightID int64   `json:"height_id"`
	// Doubts are the doubts about the held mark and the version held, as
	// of the report (register.Doubt); always present, empty for none.
	Doubts register.Doubts `json:"doubts"`
}

type resultJSON struct {
	Mark            string   `json:"mark"`
	Held            bool     `json:"held"`
	ComputedM       *float64 `json:"computed_m"`
	CorrectionM     *float64 `json:"correction_m"`
	AdjustedM       float64  `json:"adjusted_m"`
	SigmaM          *float64 `json:"sigma_m"`
	Value           *string  `json:"value"`
	Unit            *string  `json:"unit"`
	Decimals        *int     `json:"decimals"`
	Class           string   `json:"class"`
	ReplacesVersion *int     `json:"replaces_version"`
}

func toRunRef(r store.Run) runRefJSON {
	j := runRefJSON{RunID: r.ID, Name: r.Name, FileName: r.FileName, BookSHA256: hex.EncodeToString(r.BookSHA256),
		Class: r.Class, Standards: toRunStandardsJSON(r.Standards, r.Class), Voided: toVoidJSON(r.Voided)}
	if r.ObservedOn != nil {
		d := r.ObservedOn.Format("2006-01-02")
		j.ObservedOn = &d
	}
	return j
}

func toAdjustmentJSON(v *register.AdjustmentView, dryRun bool) adjustmentJSON {
	a := v.Adjustment
	j := adjustmentJSON{DryRun: dryRun, Status: a.Status, StatusReason: a.StatusReason, StatusBy: a.StatusBy, StatusAt: a.StatusAt,
		Method: a.Method, Datum: a.DatumCode, Parameters: v.Parameters, CreatedBy: a.CreatedBy, ConditionReason: a.ConditionReason,
		Runs: []runRefJSON{}, RunsLeftOut: []runRefJSON{}, Held: []heldJSON{}, Results: []resultJSON{}, Statistics: v.Statistics, MarksInDoubt: []markInDoubtJSON{},
		ChecksFailed: v.Failed(), AcceptedFailedChecks: toAcceptanceJSON(v.Accepted), Cautions: adjustCautions}
	if !dryRun {
		id, at := a.ID, a.CreatedAt
		j.AdjustmentID, j.CreatedAt = &id, &at
	} else {
		j.Status = "dry-run"
	}
	for _, r := range v.Runs {
		j.Runs = append(j.Runs, toRunRef(r))
	}
	for _, r := range v.RunsLeftOut {
		j.RunsLeftOut = append(j.RunsLeftOut, toRunRef(r))
	}
	for _, h := range v.Held {
		j.Held = append(j.Held, heldJSON{Mark: h.Designation, Datum: h.DatumCode, Version: h.Version, Value: h.Value,
			Unit: h.Unit, Current: h.Current, Source: h.Source, HeightID: h.ID, Doubts: doubtsJSON(v.HeldDoubts[h.Designation])})
	}
	for _, d := range v.InDoubt {
		j.MarksInDoubt = append(j.MarksInDoubt, toMarkInDoubtJSON(d))
	}
	for _, s := range v.Sections {
		j.Sections = append(j.Sections, adjSectionJSON{RunID: s.RunID, Seq: s.Seq, From: s.From, To: s.To, FromLine: s.FirstLine,
			ToLine: s.LastLine, ResidualM: s.ResidualM, ResidualSDM: s.ResidualSDM, W: s.W, Flagged: s.Flagged})
	}
	for _, r := range v.Results {
		j.Results = append(j.Results, resultJSON{Mark: r.Designation, Held: r.Held, ComputedM: r.ComputedM, CorrectionM: r.CorrectionM,
			AdjustedM: r.AdjustedM, SigmaM: r.SigmaM, Value: r.Value, Unit: r.Unit, Decimals: r.Decimals, Class: r.Class,
			ReplacesVersion: r.ReplacesVersion})
	}
	return j
}

// renderAdjustment prints an adjustment's report: as JSON; as CSV, the
// table of its marks alone on Out with the report's context on ErrOut; or
// the whole report on Out, terminal or not (docs/output.md): its
// heading, runs, held versions, marks, misclosures, warnings and cautions.
// A warning of the report is repeated on ErrOut when Out is not a terminal.
func renderAdjustment(ios *IOStreams, format Format, v *register.AdjustmentView, dryRun bool) error {
	j := toAdjustmentJSON(v, dryRun)
	if format != FormatTable || !ios.IsTerminal {
		for _, r := range v.RunsLeftOut {
			fmt.Fprintf(ios.ErrOut, "warning: run %d %q is left out of the adjustment: voided %s\n", r.ID, r.Name, voidText(r.Voided))
		}
	}
	if format == FormatJSON {
		return writeJSON(ios.Out, j)
	}
	say, warn := ios.printf, warnLoudly
	if format == FormatTable {
		say, warn = func(f string, a ...any) { fmt.Fprintf(ios.Out, f, a...) }, warnInReport
	}
	a := v.Adjustment
	title := fmt.Sprintf("Adjustment %d (%s)", a.ID, a.Status)
	if dryRun {
		title = "Adjustment (dry run, not stored)"
	}
	how := a.Method
	if v.Parameters.Distribution != "" {
		how += " by " + v.Parameters.Distribution
	}
	if pm := v.Parameters; pm.Weighting != "" {
		per := "km"
		if pm.Weighting == "setups" {
			per = "setup"
		}
		how += fmt.Sprintf(" weighted by %s (sigma %g mm per sqrt %s)", pm.Weighting, pm.SigmaMM, per)
		if pm.Minimal {
			how += ", minimally constrained"
		}
	}
	say("%s: %s, on %s, heights published in %s to %d decimals\n", title, how, a.DatumCode, v.Parameters.Unit, v.Parameters.Decimals)
	if a.Status != store.StatusDraft && a.StatusAt != nil {
		say("  %s %s by %s: %s\n", a.Status, timeText(*a.StatusAt), a.StatusBy, a.StatusReason)
	}
	if acc := j.AcceptedFailedChecks; acc != nil {
		warn(ios, acceptanceText(acc, ""))
	}
	for _, r := range v.RunsLeftOut {
		say("  run %d %q is left out of the adjustment: voided %s\n", r.ID, r.Name, voidText(r.Voided))
	}
	for _, r := range j.Runs {
		say("  run %d %q: book %s, sha256 %s\n", r.RunID, r.Name, r.FileName, r.BookSHA256)
		if v := r.Voided; v != nil {
			say("    VOIDED since %s by %s: %s\n", timeText(v.VoidedAt), v.VoidedBy, v.Reason)
		}
	}
	var heldDoubts register.Doubts
	for _, h := range j.Held {
		say("  held %s on %s, version %d: %s %s\n", h.Mark, h.Datum, h.Version, deref(h.Value), deref(h.Unit))
		for _, d := range h.Doubts {
			say("    !! DOUBT: %s\n", d.Text)
			if d.Kind != register.DoubtCondition { // a held mark's condition is warned of below
				heldDoubts = append(heldDoubts, d)
			}
		}
	}
	warnDoubts(ios, heldDoubts)
	if a.ConditionReason != "" {
		say("  marks in doubt held because: %s\n", a.ConditionReason)
	}
	for _, d := range j.MarksInDoubt {
		warn(ios, fmt.Sprintf("WARNING: %s was last reported %s on %s (%s); verify it in the field before publishing a height for it",
			d.Mark, strings.ToUpper(d.Condition), d.ObservedOn, d.Note))
	}
	say("\n")
	t := Table{Headers: []string{"MARK", "HELD", "COMPUTED (m)", "CORRECTION (m)", "ADJUSTED (m)", "SIGMA (m)", "PUBLISH" + perRowUnit, "UNIT", "REPLACES"}}
	for _, r := range j.Results {
		held, pub, rep := "", deref(r.Value), ""
		if r.Held {
			held = heldKind(v.Parameters, r.Mark)
		} else if r.ReplacesVersion != nil {
			rep = "version " + strconv.Itoa(*r.ReplacesVersion)
		} else {
			rep = "(first)"
		}
		corr := metres(r.CorrectionM)
		if r.CorrectionM != nil && *r.CorrectionM >= 0 {
			corr = "+" + corr
		}
		t.AddRow(r.Mark, held, metres(r.ComputedM), corr, metres(&r.AdjustedM), metres(r.SigmaM), pub, deref(r.Unit), rep)
	}
	write := func() error { return writeTable(ios, format, t) }
	if format == FormatTable {
		write = func() error { return writeAligned(ios.Out, t) }
	}
	if err := write(); err != nil {
		return err
	}
	say("\n")
	for _, s := range v.Statistics.Stretches {
		verdict := "not judged (no class)"
		switch {
		case s.AllowableM != nil:
			verdict = fmt.Sprintf("allowable %.4f m (%s): ", *s.AllowableM, s.Class)
			if *s.Pass {
				verdict += "within"
			} else {
				verdict += "EXCEEDS THE ALLOWABLE"
			}
		case s.Class != "":
			verdict = "not judged (no lengths)"
		case s.LengthM == 0:
			verdict = "not judged (no class, no lengths)"
		}
		say("Misclosure, run %d, %s to %s: %+.4f m over %.3f km (%g setups); %s\n",
			s.RunID, s.From, s.To, s.MisclosureM, s.LengthM/1000, s.Setups, verdict)
	}
	if st := v.Statistics.Network; st != nil {
		renderNetworkStats(say, v, st)
	}
	renderDraftChecks(say, v.Statistics)
	say("\n%s\n", adjustCautions)
	if !dryRun && a.Status == store.StatusDraft {
		say("\nReview it, then: cairn publish %d --reason \"...\"   or   cairn discard %d --reason \"...\"\n", a.ID, a.ID)
		if n := v.Failed(); n > 0 {
			say("%d check(s) failed: publishing refuses it unless they are accepted on purpose, with --accept-failed-checks --accept-reason \"...\"\n", n)
		}
	}
	return nil
}

// metres formats a value in metres to 0.1 mm (units.Format's exact
// rounding), or "" for none.
func metres(v *float64) string {
	if v == nil {
		return ""
	}
	return units.Format(*v, 4)
}

// heldKind says how an adjustment held a mark: fixed ("held"), weighted
// (its standard deviation), or only checked against (minimal).
func heldKind(pm register.Parameters, mark string) string {
	switch pm.HeldAs(mark) {
	case adjust.HeldCheck:
		return "check"
	case adjust.HeldWeighted:
		return fmt.Sprintf("%g mm", pm.HoldSDMM[mark])
	}
	return "held"
}

// renderNetworkStats prints a least-squares adjustment's statistics and its
// flagged sections, largest |w| first, with their runs and book lines.
func renderNetworkStats(say func(string, ...any), v *register.AdjustmentView, st *adjust.NetworkStat) {
	say("Least squares: %d marks, %d sections, %d observations, %d unknowns, redundancy %d\n",
		st.Points, st.Sections, st.Observations, st.Unknowns, st.Redundancy)
	if st.Redundancy > 0 && st.VarianceFactor != nil && st.ChiSquareLower != nil && st.ChiSquareUpper != nil {
		say("  %s\n", chiSquareLine(st.VTPV, *st.VarianceFactor, st.Redundancy, st.Alpha, *st.ChiSquareLower, *st.ChiSquareUpper, st.ChiSquarePass))
	} else {
		say("  %s\n", noRedundancyLine)
	}
	for _, h := range st.Held {
		w := "untested"
		if h.W != nil {
			w = fmt.Sprintf("w %+.2f", *h.W)
		}
		flag := ""
		if h.Flagged {
			flag = "  FLAGGED: the runs disagree with this held height"
		}
		say("  held %s weighted: adjusted minus held %+.4f m (sd %.4f), %s%s\n", h.Mark, h.ResidualM, h.SDM, w, flag)
	}
	idx := v.FlaggedSections()
	say("  %s\n", snoopingLine(st, len(idx)))
	names := map[int64]string{}
	for _, r := range v.Runs {
		names[r.ID] = r.FileName
	}
	const show = 20
	for k, i := range idx {
		if k == show {
			say("  ... and %d more (see -o json)\n", len(idx)-show)
			break
		}
		s := v.Sections[i]
		say("  FLAGGED run %d, section %d, %s to %s (%s lines %d-%d): residual %+.4f m (sd %.4f), w %+.2f\n",
			s.RunID, s.Seq, s.From, s.To, names[s.RunID], s.FirstLine, s.LastLine, s.ResidualM, s.ResidualSDM, *s.W)
	}
	if len(idx) > 0 {
		say("  The largest |w| points to the likeliest blunder; one blunder raises the w of its neighbours too, so\n")
		say("  check that section's book first and adjust again. Sections in series between two junctions share one w.\n")
	}
}

// renderDraftChecks says the draft's double-run sections between runs, its
// check connections between held marks and its heights from intermediate
// sights.
func renderDraftChecks(say func(string, ...any), st adjust.Statistics) {
	verdict := func(allow *float64, pass *bool, class string) string {
		if allow == nil {
			return "not judged (no class cairn knows, or no length)"
		}
		v := fmt.Sprintf("allowable %.4f m (%s): ", *allow, class)
		if *pass {
			return v + "within"
		}
		return v + "EXCEEDS THE ALLOWABLE"
	}
	for _, d := range st.DoubleRuns {
		k := ""
		if d.OneWayM != nil {
			k = fmt.Sprintf(" over %.3f km one way", *d.OneWayM/1000)
		}
		say("Double-run section %s to %s, run %d section %d and back in run %d section %d: %+.4f m%s; %s\n",
			d.From, d.To, d.RunID, d.Seq, d.BackRunID, d.BackSeq, d.ClosureM, k, verdict(d.AllowableM, d.Pass, d.Class))
	}
	for _, c := range st.Connections {
		l := ""
		if c.LengthM != nil {
			l = fmt.Sprintf(" over %.3f km", *c.LengthM/1000)
		}
		v := verdict(c.AllowableM, c.Pass, c.Class)
		if c.AsClosure {
			v = "the stretch's misclosure above"
		}
		say("Check connection, run %d, %s to %s: observed %+.4f m, held %+.4f m, differs %+.4f m%s; %s\n",
			c.RunID, c.From, c.To, c.ObservedM, c.KnownM, c.ObservedM-c.KnownM, l, v)
	}
	for _, sd := range st.Sides {
		say("%s: from an intermediate sight (run %d, book line %d), carried from %s: a spur with no check of its own\n", sd.Mark, sd.RunID, sd.Line, sd.From)
	}
}

// maxListFileBytes is the largest --marks-file or --runs-file read: 64
// MiB, some five million designations.
const maxListFileBytes = 64 << 20

// readListFile calls each with every line of the file named by --flag
// that names something, and where it was read (FILE:LINE): surrounding
// spaces trimmed, blank lines and lines starting with # skipped. A line
// that is not UTF-8 text, or holds a comma or a tab (two on one line?), is
// refused naming the file and line, and so is a file that names nothing;
// what names "a mark" or "a run" in those errors.
func readListFile(flag, path, what string, each func(line, at string) error) error {
	f, err := os.Open(path)
	if err != nil {
		return badInput("%s: %v", flag, err)
	}
	defer f.Close()
	if st, err := f.Stat(); err == nil && st.Size() > maxListFileBytes {
		return badInput("%s: %s: %d bytes is too long (at most %d)", flag, path, st.Size(), maxListFileBytes)
	}
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 0, 4096), MaxTextBytes)
	n, named := 0, 0
	for sc.Scan() {
		n++
		line := strings.TrimSpace(sc.Text())
		if n == 1 {
			line = strings.TrimSpace(strings.TrimPrefix(line, "\uFEFF"))
		}
		switch {
		case line == "" || strings.HasPrefix(line, "#"):
			continue
		case !utf8.ValidString(line) || strings.ContainsRune(line, 0):
			return badInput("%s: %s:%d: not UTF-8 text (save the file as UTF-8)", flag, path, n)
		case strings.ContainsAny(line, ",\t"):
			return badInput("%s: %s:%d: %q: %s a line (no commas or tabs)", flag, path, n, clip(line), strings.Replace(what, "a ", "one ", 1))
		}
		if err := each(line, fmt.Sprintf("%s:%d", path, n)); err != nil {
			return err
		}
		named++
	}
	if err := sc.Err(); err != nil {
		return badInput("%s: %s:%d: %v", flag, path, n+1, err)
	}
	if named == 0 {
		return badInput("%s: %s names no %s", flag, path, strings.TrimPrefix(what, "a "))
	}
	return nil
}

// readMarksFile appends the marks named in --marks-file to --marks, one
// designation (or alias) a line (readListFile).
func (o *adjustRegisterOptions) readMarksFile() error {
	for len(o.marksFrom) < len(o.params.Marks) {
		o.marksFrom = append(o.marksFrom, "")
	}
	err := readListFile("marks-file", o.marksFile, "a mark", func(line, at string) error {
		o.params.Marks = append(o.params.Marks, line)
		o.marksFrom = append(o.marksFrom, at)
		return nil
	})
	if err != nil {
		return err
	}
	o.params.MarksFrom = o.marksFrom
	return nil
}

// readRunsFile appends the runs named in --runs-file to those named as
// arguments, one run number a line (readListFile); a line that is not a
// run number is refused naming the file and line.
func (o *adjustRegisterOptions) readRunsFile() error {
	for len(o.params.RunsFrom) < len(o.params.RunIDs) {
		o.params.RunsFrom = append(o.params.RunsFrom, "")
	}
	return readListFile("runs-file", o.runsFile, "a run", func(line, at string) error {
		id, err := strconv.ParseInt(line, 10, 64)
		if err != nil || id <= 0 {
			return badInput("runs-file: %s: %q is not a run number (see cairn run list)", at, clip(line))
		}
		o.params.RunIDs = append(o.params.RunIDs, id)
		o.params.RunsFrom = append(o.params.RunsFrom, at)
		return nil
	})
}
