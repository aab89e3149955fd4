package cli

import (
	"context"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/register"
	"cairn/internal/store"
	"cairn/internal/units"
)

// markAddOptions are the inputs of `cairn mark add`.
type markAddOptions struct {
	f        *Factory
	ctx      context.Context
	params   register.MarkAddParams
	lat, lon float64
}

func newCmdMarkAdd(f *Factory, runF func(*markAddOptions) error) *cobra.Command {
	opts := &markAddOptions{f: f}
	cmd := &cobra.Command{
		Use:   "add DESIGNATION",
		Short: "Add a benchmark to the register",
		Long: `Add a benchmark. DESIGNATION is its name in the register (for example
TC-0412) and never changes. The position is approximate, in decimal degrees,
for finding the mark; heights are recorded with 'cairn height set'.`,
		Example: `  cairn mark add TC-0412 --type "bronze disk" --setting "concrete post" \
    --stamping "TC 0412 1961" --to-reach "north end of the Mere River bridge" \
    --lat 41.6207 --lon -97.9486`,
		Args: exactArgs(1, "a DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.params.Designation = cmd.Context(), args[0]
			if cmd.Flags().Changed("lat") {
				opts.params.Lat = &opts.lat
			}
			if cmd.Flags().Changed("lon") {
				opts.params.Lon = &opts.lon
			}
			return dispatch(opts, runF, markAddRun)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&opts.params.Type, "type", "", "kind of mark, e.g. \"bronze disk\", \"brass rod\"")
	fl.StringVar(&opts.params.Setting, "setting", "", "what it is set in, e.g. \"concrete post\", \"bridge abutment\"")
	fl.StringVar(&opts.params.Stamping, "stamping", "", "what is stamped on it")
	fl.StringVar(&opts.params.ToReach, "to-reach", "", "how to find it, in words")
	fl.Float64Var(&opts.lat, "lat", 0, "approximate latitude, decimal degrees (north positive)")
	fl.Float64Var(&opts.lon, "lon", 0, "approximate longitude, decimal degrees (east positive)")
	fl.StringVar(&opts.params.CreatedBy, "by", osUser(), "who is adding it")
	return cmd
}

// markAddRun adds the mark.
func markAddRun(opts *markAddOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	m, err := r.MarkAdd(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	opts.f.IO.printf("added mark %s\n", m.Designation)
	return nil
}

// markJSON is a mark in machine output.
type markJSON struct {
	Designation string   `json:"mark"`
	Type        string   `json:"type"`
	Setting     string   `json:"setting"`
	Stamping    string   `json:"stamping"`
	ToReach     string   `json:"to_reach"`
	Lat         *float64 `json:"lat"`
	Lon         *float64 `json:"lon"`
	Condition   string   `json:"condition"`
	Warning     string   `json:"warning,omitempty"`
	// Doubts are the doubts about the mark and its current heights
	// (register.Doubt); always present, empty for none.
	Doubts     register.Doubts `json:"doubts"`
	DistanceKm *float64        `json:"distance_km,omitempty"`
	Conditions []conditionJSON `json:"conditions,omitempty"`
	Heights    []heightJSON    `json:"heights,omitempty"`
	Runs       []runJSON       `json:"runs,omitempty"`
}

type conditionJSON struct {
	Condition  string    `json:"condition"`
	ObservedOn string    `json:"observed_on"`
	Note       string    `json:"note"`
	RecordedBy string    `json:"recorded_by"`
	RecordedAt time.Time `json:"recorded_at"`
}

func toMarkJSON(m store.Mark, ds register.Doubts) markJSON {
	j := markJSON{Designation: m.Designation, Type: m.Type, Setting: m.Setting, Stamping: m.Stamping,
		ToReach: m.ToReach, Lat: m.Lat, Lon: m.Lon, Condition: condition(m), Warning: register.Warning(m), Doubts: doubtsJSON(ds)}
	if m.DistanceM != nil {
		km := *m.DistanceM / 1000
		j.DistanceKm = &km
	}
	return j
}

func toConditionJSON(c store.Condition) conditionJSON {
	return conditionJSON{c.Condition, c.ObservedOn.Format("2006-01-02"), c.Note, c.RecordedBy, c.RecordedAt}
}

func position(m store.Mark) (string, string) {
	if m.Lat == nil {
		return "", ""
	}
	return strconv.FormatFloat(*m.Lat, 'f', 5, 64), strconv.FormatFloat(*m.Lon, 'f', 5, 64)
}

// markShowOptions are the inputs of `cairn mark show`.
type markShowOptions struct {
	f           *Factory
	ctx         context.Context
	format      Format
	designation string
}

func newCmdMarkShow(f *Factory, runF func(*markShowOptions) error) *cobra.Command {
	opts := &markShowOptions{f: f}
	cmd := &cobra.Command{
		Use:   "show DESIGNATION",
		Short: "Show a benchmark, its condition history and its current heights",
		Args:  exactArgs(1, "a DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.designation = cmd.Context(), args[0]
			return dispatch(opts, runF, markShowRun)
		},
	}
	addOutputFlag(cmd, &opts.format)
	return cmd
}

// markShowRun shows the mark with its conditions, heights and runs.
func markShowRun(opts *markShowOptions) error {
	ios := opts.f.IO
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	v, err := r.MarkShow(opts.ctx, opts.designation)
	if err != nil {
		return err
	}
	warnDoubts(ios, v.Doubts)
	j := toMarkJSON(v.Mark, v.Doubts)
	j.Conditions, j.Heights = []conditionJSON{}, []heightJSON{}
	for _, c := range v.Conditions {
		j.Conditions = append(j.Conditions, toConditionJSON(c))
	}
	for _, h := range v.Heights {
		hj := toHeightJSON(h, "")
		hj.Doubts = doubtsJSON(v.Doubts.Of(h.DatumCode, h.Version))
		j.Heights = append(j.Heights, hj)
	}
	j.Runs = []runJSON{}
	for _, run := range v.Runs {
		j.Runs = append(j.Runs, toRunJSON(run))
	}
	if opts.format == FormatJSON {
		return writeJSON(ios.Out, j)
	}
	lat, lon := position(v.Mark)
	t := Table{Headers: []string{"FIELD", "VALUE"}}
	t.AddRow("designation", j.Designation)
	t.AddRow("type", j.Type)
	t.AddRow("setting", j.Setting)
	t.AddRow("stamping", j.Stamping)
	t.AddRow("to reach", j.ToReach)
	t.AddRow("lat, lon (deg)", strings.Trim(lat+", "+lon, ", "))
	t.AddRow("condition", j.Condition)
	for _, d := range v.Doubts {
		t.AddRow("DOUBT", d.Text)
	}
	for _, c := range v.Conditions {
		t.AddRow("reported", fmt.Sprintf("%s %s by %s: %s", c.ObservedOn.Format("2006-01-02"), c.Condition, c.RecordedBy, c.Note))
	}
	for _, h := range v.Heights {
		t.AddRow("height "+h.DatumCode, fmt.Sprintf("%s (version %d, %s)", valueText(h), h.Version, h.Source))
	}
	for _, run := range j.Runs {
		t.AddRow("run", fmt.Sprintf("%d %s %s (%s)", run.ID, run.ObservedOn, run.Name, run.FileName))
	}
	return writeTable(ios, opts.format, t)
}

// markListOptions are the inputs of `cairn mark list`.
type markListOptions struct {
	f          *Factory
	ctx        context.Context
	format     Format
	near       string
	within     string
	conditions []string
}

func newCmdMarkList(f *Factory, runF func(*markListOptions) error) *cobra.Command {
	opts := &markListOptions{f: f}
	cmd := &cobra.Command{
		Use:   "list [--near LAT,LON --within 2km] [--condition ...]",
		Short: "List benchmarks, optionally those near a point, nearest first",
		Long: `List the benchmarks of the register with their latest condition.

--condition keeps the marks whose condition, as the list shows it, is one
of those given (in any case): good, disturbed, destroyed, not-found,
unverified (created by recording a book, no report yet) or unknown (no
report at all).

With --near, only marks within --within of the point (great-circle distance
on a sphere of the mean Earth radius) are listed, nearest first. Marks last
reported disturbed, destroyed or not found are flagged with a warning.`,
		Example: `  cairn mark list --near 41.62,-97.95 --within 2km
  cairn mark list --condition disturbed,not-found`,
		Args: exactArgs(0, "no arguments"),
		RunE: runE(&opts.ctx, opts, runF, markListRun),
	}
	addOutputFlag(cmd, &opts.format)
	cmd.Flags().StringVar(&opts.near, "near", "", "LAT,LON in decimal degrees: list marks near this point")
	cmd.Flags().StringVar(&opts.within, "within", "2km", "search radius with --near, in m, km, ft, usft or mi (e.g. 2km, 500m, 2mi)")
	cmd.Flags().StringSliceVar(&opts.conditions, "condition", nil, "keep marks whose latest condition is one of these, in any case: "+strings.Join(register.ShownConditions, ", ")+" (no report yet)")
	return cmd
}

// markListRun lists the marks, those near a point nearest first.
func markListRun(opts *markListOptions) error {
	p := register.MarkListParams{Conditions: opts.conditions}
	if opts.near != "" {
		ll, err := parseLatLon(opts.near)
		if err != nil {
			return err
		}
		if p.RadiusM, err = parseDistance(opts.within); err != nil {
			return err
		}
		p.Near = &ll
	}
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	ms, err := r.MarkList(opts.ctx, p)
	if err != nil {
		return err
	}
	out := []markJSON{}
	inDoubt := 0
	for _, m := range ms {
		warnCondition(opts.f.IO, m.Mark)
		out = append(out, toMarkJSON(m.Mark, m.Doubts))
		if len(m.Doubts) > 0 {
			inDoubt++
		}
	}
	defer warnListed(opts.f.IO, opts.format, inDoubt, len(out), "marks")
	return render(opts.f.IO, opts.format, out, func() Table {
		t := Table{Headers: []string{"DESIGNATION", "TYPE", "CONDITION", "LAT (deg)", "LON (deg)", "DOUBT"}}
		if p.Near != nil {
			t.Headers = append(t.Headers, "DISTANCE (km)")
		}
		for i, m := range ms {
			lat, lon := position(m.Mark)
			cond := out[i].Condition
			if out[i].Warning != "" {
				cond = "!! " + strings.ToUpper(cond)
			}
			row := []string{m.Designation, m.Type, cond, lat, lon, doubtCell(opts.f.IO, m.Doubts)}
			if p.Near != nil {
				row = append(row, strconv.FormatFloat(*out[i].DistanceKm, 'f', 3, 64))
			}
			t.AddRow(row...)
		}
		return t
	})
}

// parseLatLon reads "LAT,LON" in decimal degrees.
func parseLatLon(s string) (store.LatLon, error) {
	a, b, ok := strings.Cut(s, ",")
	lat, err1 := strconv.ParseFloat(strings.TrimSpace(a), 64)
	lon, err2 := strconv.ParseFloat(strings.TrimSpace(b), 64)
	if !ok || err1 != nil || err2 != nil {
		return store.LatLon{}, badInput("near: %q is not LAT,LON in decimal degrees (e.g. 41.62,-97.95)", s)
	}
	return store.LatLon{Lat: lat, Lon: lon}, nil
}

// parseDistance reads the --within distance with its unit (m, km, ft,
// usft or mi, with or without a space: units.ParseLength), in metres.
func parseDistance(s string) (float64, error) {
	m, err := units.ParseLength(s)
	if err != nil {
		return 0, badInput("within: %v", err)
	}
	return m, nil
}

// markConditionOptions are the inputs of `cairn mark condition`.
type markConditionOptions struct {
	f      *Factory
	ctx    context.Context
	params register.MarkConditionParams
	on     string
}

func newCmdMarkCondition(f *Factory, runF func(*markConditionOptions) error) *cobra.Command {
	opts := &markConditionOptions{f: f}
	cmd := &cobra.Command{
		Use:   "condition DESIGNATION good|disturbed|destroyed|not-found|reset",
		Short: "Report the condition a benchmark was found in",
		Long: `Add a condition report on a benchmark: good, disturbed, destroyed,
not-found (searched for and not found), or reset, in any case (set again, or
re-established, and levelled since). Reports are kept for good; the latest
one (by the date observed) is the mark's condition. While it is disturbed,
destroyed or not found the mark is in doubt: every command that shows its
height warns loudly, new heights included, until a later report says good or
reset.`,
		Example: `  cairn mark condition TC-0415 disturbed --note "post tilted, struck by mower" --on 2024-05-14`,
		Args:    exactArgs(2, "a DESIGNATION and a condition"),
		ValidArgsFunction: func(cmd *cobra.Command, args []string, _ string) ([]string, cobra.ShellCompDirective) {
			if len(args) == 1 {
				return register.Conditions, cobra.ShellCompDirectiveNoFileComp
			}
			return nil, cobra.ShellCompDirectiveNoFileComp
		},
		RunE: func(cmd *cobra.Command, args []string) error {
			now := time.Now()
			opts.ctx = cmd.Context()
			opts.params.Designation, opts.params.Condition = args[0], args[1]
			opts.params.Today = time.Date(now.Year(), now.Month(), now.Day(), 0, 0, 0, 0, time.UTC)
			opts.params.ObservedOn = opts.params.Today
			if opts.on != "" {
				d, err := time.Parse("2006-01-02", opts.on)
				if err != nil {
					return badInput("on: %q is not a date (write 2024-05-14)", opts.on)
				}
				opts.params.ObservedOn = d
			}
			return dispatch(opts, runF, markConditionRun)
		},
	}
	cmd.Flags().StringVar(&opts.params.Note, "note", "", "what was seen")
	cmd.Flags().StringVar(&opts.on, "on", "", "date observed, YYYY-MM-DD (default today)")
	cmd.Flags().StringVar(&opts.params.RecordedBy, "by", osUser(), "who observed it")
	return cmd
}

// markConditionRun records the condition report.
func markConditionRun(opts *markConditionOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	c, err := r.MarkCondition(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	opts.f.IO.printf("recorded %s as %s on %s\n", opts.params.Designation, c.Condition, c.ObservedOn.Format("2006-01-02"))
	return nil
}
