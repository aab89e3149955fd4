package cli

import (
	"context"
	"encoding/hex"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"cairn/internal/geojson"
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
	toReach  string // the deprecated --to-reach
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
    --stamping "TC 0412 1961" --directions "north end of the Mere River bridge" \
    --lat 41.6207 --lon -97.9486`,
		Args: exactArgs(1, "a DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.params.Designation = cmd.Context(), args[0]
			if err := directionsFlag(cmd, f.IO, &opts.params.Directions, opts.toReach); err != nil {
				return err
			}
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
	addDirectionsFlags(fl, &opts.params.Directions, &opts.toReach)
	fl.Float64Var(&opts.lat, "lat", 0, "approximate latitude, decimal degrees (north positive)")
	fl.Float64Var(&opts.lon, "lon", 0, "approximate longitude, decimal degrees (east positive)")
	fl.StringVar(&opts.params.CreatedBy, "by", osUser(), "who is adding it")
	return cmd
}

// addDirectionsFlags adds --directions, and --to-reach, its old name,
// hidden and kept for this release.
func addDirectionsFlags(fl *pflag.FlagSet, directions, toReach *string) {
	fl.StringVar(directions, "directions", "", "how to find it, in words")
	fl.StringVar(toReach, "to-reach", "", "deprecated: use --directions")
	_ = fl.MarkHidden("to-reach")
}

// directionsFlag takes the deprecated --to-reach as --directions, with a
// notice; giving both is refused.
func directionsFlag(cmd *cobra.Command, ios *IOStreams, directions *string, toReach string) error {
	if !cmd.Flags().Changed("to-reach") {
		return nil
	}
	if cmd.Flags().Changed("directions") {
		return badInput("to-reach: --to-reach is the old name of --directions; give one of them")
	}
	deprecated(ios, "--to-reach", "--directions")
	*directions = toReach
	return nil
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
	Designation    string   `json:"mark"`
	Type           string   `json:"type"`
	Setting        string   `json:"setting"`
	Stamping       string   `json:"stamping"`
	Directions     string   `json:"directions"`
	Description    string   `json:"description"`
	Lat            *float64 `json:"lat"`
	Lon            *float64 `json:"lon"`
	PositionSource string   `json:"position_source"`
	// DescriptionVersion is the number of the description shown (1: as
	// the mark was added).
	DescriptionVersion int      `json:"description_version"`
	Aliases            []string `json:"aliases"`
	// Retired is the mark's retirement, null while it is in use.
	Retired *retiredJSON `json:"retired"`
	// Replaces is the mark this one replaced, "" for none.
	Replaces string `json:"replaces"`
	// FoundByAlias is the alias the mark was looked up by (mark show).
	FoundByAlias string `json:"found_by_alias,omitempty"`
	Condition    string `json:"condition"`
	Warning      string `json:"warning,omitempty"`
	// Doubts are the doubts about the mark and its current heights
	// (register.Doubt); always present, empty for none.
	Doubts       register.Doubts   `json:"doubts"`
	DistanceKm   *float64          `json:"distance_km,omitempty"`
	AliasDetails []aliasJSON       `json:"alias_details,omitempty"`
	Photos       []photoJSON       `json:"photos,omitempty"`
	Versions     []markVersionJSON `json:"versions,omitempty"`
	Conditions   []conditionJSON   `json:"conditions,omitempty"`
	Heights      []heightJSON      `json:"heights,omitempty"`
	Runs         []runJSON         `json:"runs,omitempty"`
}

type retiredJSON struct {
	On         string    `json:"on"`
	Reason     string    `json:"reason"`
	RecordedBy string    `json:"recorded_by"`
	RecordedAt time.Time `json:"recorded_at"`
	ReplacedBy string    `json:"replaced_by"`
}

type photoJSON struct {
	ID         int64  `json:"photo_id"`
	ReportOn   string `json:"report_observed_on"`
	View       string `json:"view"`
	MediaType  string `json:"media_type"`
	FileName   string `json:"file_name"`
	Bytes      int64  `json:"bytes"`
	SHA256     string `json:"sha256"`
	RecordedBy string `json:"recorded_by"`
}

type aliasJSON struct {
	Alias      string    `json:"alias"`
	Kind       string    `json:"kind"`
	Agency     string    `json:"agency,omitempty"`
	Note       string    `json:"note"`
	RecordedBy string    `json:"recorded_by"`
	RecordedAt time.Time `json:"recorded_at"`
}

type markVersionJSON struct {
	Version        int       `json:"version"`
	Type           string    `json:"type"`
	Setting        string    `json:"setting"`
	Stamping       string    `json:"stamping"`
	Directions     string    `json:"directions"`
	Description    string    `json:"description"`
	Lat            *float64  `json:"lat"`
	Lon            *float64  `json:"lon"`
	PositionSource string    `json:"position_source"`
	Reason         string    `json:"reason"`
	RecordedBy     string    `json:"recorded_by"`
	RecordedAt     time.Time `json:"recorded_at"`
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
		Directions: m.Directions, Description: m.Description, Lat: m.Lat, Lon: m.Lon, PositionSource: m.PositionSource,
		DescriptionVersion: m.Version, Aliases: m.Aliases, Replaces: m.Replaces, FoundByAlias: m.FoundBy,
		Condition: condition(m), Warning: register.Warning(m), Doubts: doubtsJSON(ds)}
	if j.Aliases == nil {
		j.Aliases = []string{}
	}
	if r := m.Retired; r != nil {
		j.Retired = &retiredJSON{On: r.On.Format("2006-01-02"), Reason: r.Reason, RecordedBy: r.RecordedBy, RecordedAt: r.RecordedAt, ReplacedBy: r.ReplacedBy}
	}
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
	history     bool
}

func newCmdMarkShow(f *Factory, runF func(*markShowOptions) error) *cobra.Command {
	opts := &markShowOptions{f: f}
	cmd := &cobra.Command{
		Use:   "show DESIGNATION|ALIAS [--history]",
		Short: "Show a benchmark, its condition history and its current heights",
		Long: `Show a benchmark: its current description, its other names, its condition
reports, its heights in force and the runs that levelled it. The mark may be
named by its designation or by any of its aliases. A retired mark names the
mark that replaced it, and a replacement the mark it replaced.

--history lists every version of the description, the first being the mark
as added, each with when, who and why.`,
		Args: exactArgs(1, "a DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.designation = cmd.Context(), args[0]
			return dispatch(opts, runF, markShowRun)
		},
	}
	addOutputFlag(cmd, &opts.format)
	cmd.Flags().BoolVar(&opts.history, "history", false, "list every version of the mark's description")
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
	if v.Mark.FoundBy != "" {
		ios.printf("%s is an alias of mark %s\n", v.Mark.FoundBy, v.Mark.Designation)
	}
	warnDoubts(ios, v.Doubts)
	j := toMarkJSON(v.Mark, v.Doubts)
	j.Conditions, j.Heights, j.AliasDetails = []conditionJSON{}, []heightJSON{}, []aliasJSON{}
	for _, a := range v.Aliases {
		j.AliasDetails = append(j.AliasDetails, aliasJSON{a.Alias, a.Kind, a.Agency, a.Note, a.RecordedBy, a.RecordedAt})
	}
	reportOn := map[int64]string{}
	for _, c := range v.Conditions {
		reportOn[c.ID] = c.ObservedOn.Format("2006-01-02")
	}
	j.Photos = []photoJSON{}
	for _, ph := range v.Photos {
		j.Photos = append(j.Photos, photoJSON{ph.ID, reportOn[ph.ConditionID], ph.View, ph.MediaType, ph.FileName, ph.Bytes,
			hex.EncodeToString(ph.SHA256), ph.RecordedBy})
	}
	if opts.history {
		j.Versions = []markVersionJSON{}
		for _, mv := range v.Versions {
			j.Versions = append(j.Versions, markVersionJSON{mv.Version, mv.Type, mv.Setting, mv.Stamping, mv.Directions,
				mv.Description, mv.Lat, mv.Lon, mv.PositionSource, mv.Reason, mv.RecordedBy, mv.RecordedAt})
		}
	}
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
	t := Table{Headers: []string{"FIELD", "VALUE"}}
	t.AddRow("designation", j.Designation)
	for _, a := range v.Aliases {
		t.AddRow("also known as", aliasText(a))
	}
	if v.Mark.Replaces != "" {
		t.AddRow("replaces", v.Mark.Replaces+" (retired)")
	}
	if rt := v.Mark.Retired; rt != nil {
		t.AddRow("retired", fmt.Sprintf("%s by %s: %s", rt.On.Format("2006-01-02"), rt.RecordedBy, rt.Reason))
		if rt.ReplacedBy != "" {
			t.AddRow("replaced by", rt.ReplacedBy)
		}
	}
	t.AddRow("kind of mark", j.Type)
	t.AddRow("set in", j.Setting)
	t.AddRow("stamped", j.Stamping)
	t.AddRow("directions", j.Directions)
	t.AddRow("description", j.Description)
	t.AddRow("position (deg, approx.)", positionText(v.Mark.Lat, v.Mark.Lon))
	t.AddRow("position from", j.PositionSource)
	if n := len(v.Versions); n > 0 {
		last := v.Versions[n-1]
		t.AddRow("described", fmt.Sprintf("version %d, %s by %s%s", last.Version, last.RecordedAt.UTC().Format("2006-01-02"), last.RecordedBy, reasonText(last.Reason)))
	}
	t.AddRow("condition", j.Condition)
	if v.Reset != nil {
		t.AddRow("last reset", fmt.Sprintf("%s (observed), reported %s by %s%s", v.Reset.ObservedOn.Format("2006-01-02"),
			v.Reset.RecordedAt.UTC().Format("2006-01-02"), v.Reset.RecordedBy, reasonText(v.Reset.Note)))
	}
	for _, d := range v.Doubts {
		t.AddRow("DOUBT", d.Text)
	}
	for _, c := range v.Conditions {
		t.AddRow("report", fmt.Sprintf("%s %s by %s: %s", c.ObservedOn.Format("2006-01-02"), c.Condition, c.RecordedBy, c.Note))
	}
	for _, ph := range j.Photos {
		t.AddRow(fmt.Sprintf("photo %d", ph.ID), fmt.Sprintf("%s, report of %s, %s (%s, %d bytes, sha256 %s)",
			ph.View, ph.ReportOn, ph.FileName, ph.MediaType, ph.Bytes, ph.SHA256))
	}
	for _, h := range v.Heights {
		t.AddRow("height on "+h.DatumCode, fmt.Sprintf("%s (version %d, %s)", valueText(h), h.Version, h.Source))
	}
	for _, run := range j.Runs {
		t.AddRow("levelled in run", fmt.Sprintf("%d %s %s (%s)", run.ID, run.ObservedOn, run.Name, run.FileName))
	}
	if opts.history {
		var prev *store.MarkVersion
		for i, mv := range v.Versions {
			t.AddRow(fmt.Sprintf("version %d", mv.Version), versionText(prev, mv))
			prev = &v.Versions[i]
		}
	}
	return writeTable(ios, opts.format, t)
}

// aliasText is an alias in words: the name, whose or what it is.
func aliasText(a store.Alias) string {
	s := a.Alias
	switch a.Kind {
	case store.AliasAgency:
		s += " (number of " + a.Agency + ")"
	case store.AliasFormer:
		s += " (former designation)"
	case store.AliasStamped:
		s += " (as stamped)"
	}
	if a.Note != "" {
		s += ": " + a.Note
	}
	return s
}

// positionText is a position in decimal degrees, or "".
func positionText(lat, lon *float64) string {
	if lat == nil {
		return ""
	}
	return strconv.FormatFloat(*lat, 'f', 5, 64) + ", " + strconv.FormatFloat(*lon, 'f', 5, 64)
}

// reasonText is ": reason", or "" for none.
func reasonText(r string) string {
	if r == "" {
		return ""
	}
	return ": " + r
}

// versionText says of one version of a mark's description when, who and
// why, and what it changed from the version before (all of it for the
// first).
func versionText(prev *store.MarkVersion, v store.MarkVersion) string {
	s := v.RecordedAt.UTC().Format("2006-01-02") + " by " + v.RecordedBy
	if prev == nil {
		s += ", as added"
	}
	s += reasonText(v.Reason)
	var changes []string
	field := func(name, was, now string) {
		if (prev == nil && now != "") || (prev != nil && was != now) {
			changes = append(changes, fmt.Sprintf("%s %q", name, now))
		}
	}
	var p store.MarkVersion
	if prev != nil {
		p = *prev
	}
	field("kind of mark", p.Type, v.Type)
	field("set in", p.Setting, v.Setting)
	field("stamped", p.Stamping, v.Stamping)
	field("directions", p.Directions, v.Directions)
	field("description", p.Description, v.Description)
	field("position", positionText(p.Lat, p.Lon), positionText(v.Lat, v.Lon))
	field("position from", p.PositionSource, v.PositionSource)
	if len(changes) > 0 {
		s += "; " + strings.Join(changes, ", ")
	}
	return s
}

// markListOptions are the inputs of `cairn mark list`.
type markListOptions struct {
	f          *Factory
	ctx        context.Context
	format     Format
	near       string
	within     string
	conditions []string
	name       string
	limit      int
	limitSet   bool // --limit was given
}

// defaultNearLimit is how many marks a near search lists unless told.
const defaultNearLimit = 100

func newCmdMarkList(f *Factory, runF func(*markListOptions) error) *cobra.Command {
	opts := &markListOptions{f: f}
	cmd := &cobra.Command{
		Use:   "list [--near LAT,LON --within 2km [--limit N]] [--condition ...] [--name NAME]",
		Short: "List benchmarks, optionally those near a point, nearest first",
		Long: `List the benchmarks of the register with their latest condition.

--condition keeps the marks whose condition, as the list shows it, is one
of those given (in any case): good, disturbed, destroyed, not-found,
unverified (created by recording a book, no report yet) or unknown (no
report at all).

With --near, only marks within --within of the point (great-circle distance
on a sphere of the mean Earth radius) are listed, nearest first, at most
--limit of them (default 100; 0 for all): when more are within the radius,
the error stream says so. Marks last reported disturbed, destroyed or not
found are flagged with a warning.

--name keeps the mark whose designation or one of whose aliases (another
agency's number, a former designation, what is stamped on it) is NAME, in
any case.

-o geojson writes the marks as an RFC 7946 FeatureCollection for a GIS: one
Point feature per mark at its current position [longitude, latitude] (a
null geometry for a mark with no position), its fields as properties with
snake_case names (docs/output.md).`,
		Example: `  cairn mark list --near 41.62,-97.95 --within 2km
  cairn mark list --condition disturbed,not-found
  cairn mark list --near 41.62,-97.95 --within 5km -o geojson > marks.geojson`,
		Args: exactArgs(0, "no arguments"),
	}
	run := runE(&opts.ctx, opts, runF, markListRun)
	cmd.RunE = func(cmd *cobra.Command, args []string) error {
		opts.limitSet = cmd.Flags().Changed("limit")
		return run(cmd, args)
	}
	addGeoOutputFlag(cmd, &opts.format)
	cmd.Flags().StringVar(&opts.near, "near", "", "LAT,LON in decimal degrees: list marks near this point")
	cmd.Flags().StringVar(&opts.within, "within", "2km", "search radius with --near, in m, km, ft, usft or mi (e.g. 2km, 500m, 2mi)")
	cmd.Flags().IntVar(&opts.limit, "limit", defaultNearLimit, "with --near, list at most this many marks, nearest first (0 for all)")
	cmd.Flags().StringVar(&opts.name, "name", "", "keep the mark with this designation or alias, in any case")
	cmd.Flags().StringSliceVar(&opts.conditions, "condition", nil, "keep marks whose latest condition is one of these, in any case: "+strings.Join(register.ShownConditions, ", ")+" (no report yet)")
	return cmd
}

// markListRun lists the marks, those near a point nearest first.
func markListRun(opts *markListOptions) error {
	p := register.MarkListParams{Conditions: opts.conditions, Name: opts.name}
	if opts.near != "" {
		ll, err := parseLatLon(opts.near)
		if err != nil {
			return err
		}
		if p.RadiusM, err = parseDistance(opts.within); err != nil {
			return err
		}
		p.Near = &ll
		if opts.limit < 0 {
			return badInput("limit: %d is not a number of marks (0 for all)", opts.limit)
		}
		if opts.limit > 0 {
			p.Limit = opts.limit + 1 // one more, to know whether there are more
		}
	} else if opts.limitSet {
		return badInput("limit: --limit goes with --near")
	}
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	headers := []string{"DESIGNATION", "TYPE", "CONDITION", "LAT (deg)", "LON (deg)", "ALIASES", "DOUBT"}
	if p.Near != nil {
		headers = append(headers, "DISTANCE (km)")
	}
	var ms []register.ListedMark
	lw := &listWriter{ios: opts.f.IO, format: opts.format, headers: headers,
		feature: func(w *geojson.Writer, i int) error { return w.Write(markFeature(ms[i], p.Near != nil)) }}
	listed, inDoubt, more := 0, 0, false
	// The whole register a page at a time (MarkListEach); a near search
	// is one page.
	err = r.MarkListEach(opts.ctx, p, func(page []register.ListedMark) error {
		ms = page
		if p.Limit > 0 && len(ms) > opts.limit {
			ms, more = ms[:opts.limit], true
		}
		values := make([]any, len(ms))
		rows := make([][]string, len(ms))
		for i, m := range ms {
			warnCondition(opts.f.IO, m.Mark)
			j := toMarkJSON(m.Mark, m.Doubts)
			values[i] = j
			if len(m.Doubts) > 0 {
				inDoubt++
			}
			lat, lon := position(m.Mark)
			cond := j.Condition
			if j.Warning != "" {
				cond = "!! " + strings.ToUpper(cond)
			}
			row := []string{m.Designation, m.Type, cond, lat, lon, strings.Join(m.Aliases, "; "), doubtCell(opts.f.IO, m.Doubts)}
			if p.Near != nil {
				row = append(row, strconv.FormatFloat(*j.DistanceKm, 'f', 3, 64))
			}
			rows[i] = row
		}
		listed += len(ms)
		return lw.page(values, rows)
	})
	if err != nil {
		return err
	}
	if err := lw.close(); err != nil {
		return err
	}
	warnListed(opts.f.IO, opts.format, inDoubt, listed, "marks")
	if more {
		opts.f.IO.printf("more marks are within %s of %s than the %d nearest listed (--limit 0 lists all)\n", opts.within, opts.near, opts.limit)
	}
	return nil
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
	photos []string // VIEW=FILE
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
reset. A reset report ends that doubt, and every height recorded before it
is shown as before reset and is never held as control: level the mark again
and publish its new height.`,
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
	cmd.Flags().StringArrayVar(&opts.photos, "photo", nil, "VIEW=FILE: a JPEG or PNG photograph to keep with the report, VIEW one of "+strings.Join(store.PhotoViews, ", ")+" (repeat)")
	cmd.Flags().StringVar(&opts.params.Note, "note", "", "what was seen")
	cmd.Flags().StringVar(&opts.on, "on", "", "date observed, YYYY-MM-DD (default today)")
	cmd.Flags().StringVar(&opts.params.RecordedBy, "by", osUser(), "who observed it")
	return cmd
}

// markConditionRun records the condition report, with its photographs.
func markConditionRun(opts *markConditionOptions) error {
	for _, ph := range opts.photos {
		view, path, ok := strings.Cut(ph, "=")
		if !ok || strings.TrimSpace(path) == "" {
			return badInput("photo: %q: give VIEW=FILE (e.g. close-up=IMG_0412.jpg), VIEW one of %s", ph, strings.Join(store.PhotoViews, ", "))
		}
		content, err := readPhoto(path)
		if err != nil {
			return err
		}
		opts.params.Photos = append(opts.params.Photos, register.PhotoFile{View: view, Name: filepath.Base(path), Content: content})
	}
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	c, err := r.MarkCondition(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	opts.f.IO.printf("recorded %s as %s on %s\n", opts.params.Designation, c.Condition, c.ObservedOn.Format("2006-01-02"))
	if n := len(opts.params.Photos); n > 0 {
		opts.f.IO.printf("kept %d photograph(s) with the report\n", n)
	}
	return nil
}

// readPhoto reads a photograph's file, refusing one larger than the
// register keeps before reading it whole.
func readPhoto(path string) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, badInput("photo: %v", err)
	}
	defer f.Close()
	content, err := io.ReadAll(io.LimitReader(f, store.PhotoMaxBytes+1))
	if err != nil {
		return nil, badInput("photo: %s: %v", path, err)
	}
	if len(content) > store.PhotoMaxBytes {
		return nil, badInput("photo: %s: more than the %d bytes (8 MiB) the register keeps of one photograph", path, store.PhotoMaxBytes)
	}
	return content, nil
}
