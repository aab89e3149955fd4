package cli

import (
	"context"
	"encoding/hex"
	"errors"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/geojson"
	"cairn/internal/register"
	"cairn/internal/store"
	"cairn/internal/units"
)

// heightSetOptions are the inputs of `cairn height set` and `cairn height
// withdraw`.
type heightSetOptions struct {
	f        *Factory
	ctx      context.Context
	params   register.HeightSetParams
	decimals int
	inForce  string
}

func newCmdHeightSet(f *Factory, runF func(*heightSetOptions) error) *cobra.Command {
	opts := &heightSetOptions{f: f}
	cmd := &cobra.Command{
		Use:   "set DESIGNATION VALUE --unit m|ft|usft --datum CODE --in-force-from DATE --source CITATION --reason TEXT",
		Short: "Record a height published by an outside authority",
		Long: `Record a height of a benchmark as an outside authority published it: the
value exactly as printed, its unit (m, ft for the international foot, usft for
the US survey foot) and its number of decimals, on one datum, with a citation
of the publication and the reason for recording it.

--kind says what the new version is: authority (the default: a height as an
outside authority published it), correction (an earlier version was wrong,
for example a transcription error), or datum-change (the same mark moved to
another realisation of the datum). Heights from adjustments of recorded runs
come from 'cairn publish', and a withdrawal from 'cairn height withdraw'.

--in-force-from (required) is when the height came in force, as its source
gives it: the date the authority published it or it took effect (a date is
the start of that day, local time; or a time, 2019-03-04T09:00:00Z). It is
required because the register cannot know it: a default of today would
make a height published years ago look in force only from its recording.
It may not be in the future. A version in force from an earlier date than
the one in force now is a correction of the past: 'height show --as-of'
gives it for the dates it covers, and the height in force now stays.

The height becomes a new version; the version it replaces stays in the
register for good (see 'cairn history').

` + cautions,
		Example: `  cairn height set TC-0412 769.83 --unit usft --datum NAVD88 --class second-I \
    --in-force-from 1994-05-02 \
    --source "Tallis County Benchmark Book, 1994 edition, p. 12" \
    --reason "entered from the county benchmark book"
  cairn height set TC-0412 769.88 --unit usft --datum NAVD88 --kind correction \
    --in-force-from 1994-05-02 \
    --source "errata sheet 3 to the 1994 book" --reason "769.83 was a transcription error"`,
		Args: exactArgs(2, "a DESIGNATION and a VALUE"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			opts.params.Designation, opts.params.Value = args[0], args[1]
			switch opts.params.Kind {
			case register.KindAuthority, register.KindCorrection, register.KindDatumChange:
			default:
				return badInput("--kind: %q is not a kind of outside height (want authority, correction or datum-change)", opts.params.Kind)
			}
			if cmd.Flags().Changed("decimals") {
				opts.params.Decimals = &opts.decimals
			}
			if strings.TrimSpace(opts.params.Unit) == "" {
				return badInput("--unit is required: say which unit the value is published in: m, ft (international foot, 0.3048 m) or usft (US survey foot, 1200/3937 m)")
			}
			var err error
			if opts.params.InForceFrom, err = parseInForce(opts.inForce); err != nil {
				return err
			}
			return dispatch(opts, runF, heightSetRun)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&opts.params.Unit, "unit", "", "unit of the value (required): m, ft (international foot, 0.3048 m) or usft (US survey foot, 1200/3937 m); feet is refused as ambiguous")
	fl.StringVar(&opts.params.Datum, "datum", "", "datum code (see cairn datum list)")
	fl.IntVar(&opts.decimals, "decimals", 0, "number of decimals published (default: as written)")
	fl.StringVar(&opts.params.Class, "class", "", "accuracy class: "+classNames()+" (in any case)")
	fl.StringVar(&opts.params.Source, "source", "", "citation of the publication the height comes from")
	fl.StringVar(&opts.params.Reason, "reason", "", "why this height is being recorded (required)")
	fl.StringVar(&opts.params.RecordedBy, "by", osUser(), "who records it")
	fl.StringVar(&opts.params.Kind, "kind", register.KindAuthority, "what the version is: authority, correction or datum-change")
	fl.StringVar(&opts.inForce, "in-force-from", "", "when the height came in force, as its source gives it (required): a date (start of the day) or a time")
	_ = cmd.RegisterFlagCompletionFunc("kind", func(*cobra.Command, []string, string) ([]string, cobra.ShellCompDirective) {
		return []string{register.KindAuthority, register.KindCorrection, register.KindDatumChange}, cobra.ShellCompDirectiveNoFileComp
	})
	_ = cmd.RegisterFlagCompletionFunc("unit", func(*cobra.Command, []string, string) ([]string, cobra.ShellCompDirective) {
		return []string{"m", "ft", "usft"}, cobra.ShellCompDirectiveNoFileComp
	})
	return cmd
}

// newCmdHeightWithdraw builds `cairn height withdraw`: a version with no
// value, so that the mark has no height in force on that datum.
func newCmdHeightWithdraw(f *Factory, runF func(*heightSetOptions) error) *cobra.Command {
	opts := &heightSetOptions{f: f}
	cmd := &cobra.Command{
		Use:   "withdraw DESIGNATION --datum CODE --in-force-from DATE --reason TEXT",
		Short: "Withdraw a mark's height on a datum, leaving none in force",
		Long: `Withdraw a benchmark's height on one datum, for example when the mark is
destroyed or its height can no longer be vouched for. The withdrawal is a new
version with no value and a reason; the versions before it stay in the
register, and as-of look-ups before the withdrawal still return them.
--in-force-from (required) is when the withdrawal took effect, as for height
set.

` + cautions,
		Example: `  cairn height withdraw TC-0423 --datum NAVD88 --in-force-from 2024-06-10 --reason "mark destroyed when the depot was demolished"`,
		Args:    exactArgs(1, "a DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			opts.params.Designation = args[0]
			opts.params.Kind = register.KindWithdrawal
			var err error
			if opts.params.InForceFrom, err = parseInForce(opts.inForce); err != nil {
				return err
			}
			return dispatch(opts, runF, heightSetRun)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&opts.params.Datum, "datum", "", "datum code (see cairn datum list)")
	fl.StringVar(&opts.params.Source, "source", "", "citation of a notice of the withdrawal, if any")
	fl.StringVar(&opts.params.Reason, "reason", "", "why the height is withdrawn (required)")
	fl.StringVar(&opts.params.RecordedBy, "by", osUser(), "who withdraws it")
	fl.StringVar(&opts.inForce, "in-force-from", "", "when the withdrawal took effect (required): a date (start of the day) or a time")
	return cmd
}

// heightSetRun records the version opts describes (a value, or a
// withdrawal) and says what it replaced.
func heightSetRun(opts *heightSetOptions) error {
	f := opts.f
	r, err := openRegister(opts.ctx, f)
	if err != nil {
		return err
	}
	res, err := r.HeightSet(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	v := res.Version
	if opts.params.Kind == register.KindWithdrawal {
		f.IO.printf("%s on %s has no height in force from %s on (version %d, a withdrawal)\n", v.Designation, v.DatumCode, timeText(v.InForceFrom), v.Version)
		f.IO.printf("  withdraws version %d: %s\n", res.Previous.Version, valueText(*res.Previous))
		return nil
	}
	if v.Current {
		f.IO.printf("%s on %s is now %s (version %d, in force from %s)\n", v.Designation, v.DatumCode, valueText(v), v.Version, timeText(v.InForceFrom))
	} else {
		f.IO.printf("%s on %s was %s from %s (version %d); a version in force from a later time stays in force now\n",
			v.Designation, v.DatumCode, valueText(v), timeText(v.InForceFrom), v.Version)
	}
	if res.Previous != nil {
		f.IO.printf("  replaces version %d: %s\n", res.Previous.Version, valueText(*res.Previous))
	}
	warnCondition(f.IO, mustMark(opts.ctx, f, v.Designation))
	return nil
}

// mustMark returns the mark for the warning after a write; a failure to
// read it only loses the warning, which height show repeats.
func mustMark(ctx context.Context, f *Factory, designation string) store.Mark {
	r, err := openRegister(ctx, f)
	if err != nil {
		return store.Mark{}
	}
	v, err := r.HeightShow(ctx, register.HeightShowParams{Designation: designation})
	if err != nil {
		return store.Mark{}
	}
	return v.Mark
}

// heightJSON is a height version in machine output.
type heightJSON struct {
	Mark       string  `json:"mark"`
	Datum      string  `json:"datum"`
	Version    int     `json:"version"`
	Value      *string `json:"value"`
	Unit       *string `json:"unit"`
	Decimals   *int    `json:"decimals"`
	Class      string  `json:"class"`
	SourceKind string  `json:"source_kind"`
	Source     string  `json:"source"`
	Reason     string  `json:"reason"`
	RecordedBy string  `json:"recorded_by"`
	// RecordedRole is the database login role that wrote the version;
	// null for versions written before schema v12.
	RecordedRole *string   `json:"recorded_role"`
	RecordedAt   time.Time `json:"recorded_at"`
	// CommittedAt is when the register learned of the version (its
	// transaction's commit), the instant --known-at compares with.
	CommittedAt time.Time `json:"committed_at"`
	// InForceFrom is when the version came in force, the instant --as-of
	// compares with: the time its source gives, or its commit for a
	// version cairn published (or written before schema v17).
	InForceFrom time.Time      `json:"in_force_from"`
	Current     bool           `json:"current"`
	Hash        string         `json:"hash"`
	Converted   *convertedJSON `json:"converted,omitempty"`
	Change      *string        `json:"change,omitempty"`
	// Doubts are the doubts that concern the version (register.Doubt);
	// always present, empty for none.
	Doubts register.Doubts `json:"doubts"`
}

type convertedJSON struct {
	Value    string `json:"value"`
	Unit     string `json:"unit"`
	Decimals int    `json:"decimals"`
}

// toHeightJSON renders h, converted exactly to unit in too if it is set.
func toHeightJSON(h store.Height, in units.Unit) heightJSON {
	j := heightJSON{Mark: h.Designation, Datum: h.DatumCode, Version: h.Version, Value: h.Value, Unit: h.Unit,
		Decimals: h.Decimals, Class: h.Class, SourceKind: h.SourceKind, Source: h.Source, Reason: h.Reason,
		RecordedBy: h.RecordedBy, RecordedRole: h.RecordedRole, RecordedAt: h.RecordedAt, CommittedAt: h.CommittedAt, InForceFrom: h.InForceFrom,
		Current: h.Current, Hash: hex.EncodeToString(h.Hash)}
	if in != "" && h.Value != nil {
		from := units.Unit(*h.Unit)
		d := units.ConvertedDecimals(from, in, *h.Decimals)
		if v, err := units.ConvertExact(*h.Value, from, in, d); err == nil {
			j.Converted = &convertedJSON{v, string(in), d}
		}
	}
	return j
}

// byText is who recorded a version: the name given (--by) and the
// database login role that wrote it.
func byText(h heightJSON) string {
	if h.RecordedRole == nil {
		return h.RecordedBy + " (login not recorded)"
	}
	return h.RecordedBy + " (login " + *h.RecordedRole + ")"
}

// whenText is the instant a look-up asked about: "now", "at T", and "as
// known at K".
func whenText(asOf, knownAt *time.Time) string {
	when := "now"
	if asOf != nil {
		when = "at " + timeText(*asOf)
	}
	if knownAt != nil {
		when += " as known at " + timeText(*knownAt)
	}
	return when
}

// valueText is "769.83 usft", or "withdrawn".
func valueText(h store.Height) string {
	if h.Value == nil {
		return "withdrawn"
	}
	return *h.Value + " " + *h.Unit
}

// heightShowOptions are the inputs of `cairn height show`.
type heightShowOptions struct {
	f       *Factory
	ctx     context.Context
	format  Format
	params  register.HeightShowParams
	asOf    string
	knownAt string
	in      string
}

func newCmdHeightShow(f *Factory, runF func(*heightShowOptions) error) *cobra.Command {
	opts := &heightShowOptions{f: f}
	cmd := &cobra.Command{
		Use:   "show DESIGNATION [--datum CODE] [--as-of TIME] [--known-at TIME] [--in UNIT]",
		Short: "Show a benchmark's heights in force, now or at a past time",
		Long: `Show the heights of a benchmark in force now, or in force at a past time
(--as-of), as the register knows them now or as it knew them at a past time
(--known-at): one per datum, exactly as published, with the version, class
and source. --in adds the value converted exactly to another unit.

Every version has two times. IN FORCE FROM is when it came in force: the
date its source gives for a height from outside (height set
--in-force-from), the commit of the publication for a height cairn
published. RECORDED is when the register learned of it: the commit of the
transaction that wrote it. --as-of D answers "what was in force on D" by
the first; --known-at T answers "what did the register know at T" by the
second (alone, what it then said was in force then); both together answer
"what did we think, at T, was in force on D". Of the versions known and in
force by then, the answer is the one in force from the latest time, and of
two in force from the same time (a correction), the one recorded later.

Both take 2024-03-01T14:00:00Z, a local time 2024-03-01 14:00, or a date,
meaning the end of that day.

A loud warning goes to the error stream when the mark's latest condition
report says it is disturbed, destroyed or not found.`,
		Args: exactArgs(1, "a DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.params.Designation = cmd.Context(), args[0]
			var err error
			if opts.params.AsOf, err = parseAsOf(opts.asOf); err != nil {
				return err
			}
			if opts.params.KnownAt, err = parseKnownAt(opts.knownAt); err != nil {
				return err
			}
			return dispatch(opts, runF, heightShowRun)
		},
	}
	addOutputFlag(cmd, &opts.format)
	cmd.Flags().StringVar(&opts.params.Datum, "datum", "", "only this datum")
	cmd.Flags().StringVar(&opts.asOf, "as-of", "", asOfUsage("show the heights"))
	cmd.Flags().StringVar(&opts.knownAt, "known-at", "", knownAtUsage("show the heights"))
	cmd.Flags().StringVar(&opts.in, "in", "", "also show the value converted to this unit: m, ft or usft")
	return cmd
}

// heightShowRun shows the heights in force.
func heightShowRun(opts *heightShowOptions) error {
	var in units.Unit
	if opts.in != "" {
		u, err := units.Parse(opts.in)
		if err != nil {
			return badInput("in: %v", err)
		}
		in = u
	}
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	v, err := r.HeightShow(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	warnDoubts(opts.f.IO, v.Doubts)
	out := struct {
		Mark      string          `json:"mark"`
		Condition string          `json:"condition"`
		Warning   string          `json:"warning,omitempty"`
		Doubts    register.Doubts `json:"doubts"`
		AsOf      *time.Time      `json:"as_of"`
		KnownAt   *time.Time      `json:"known_at"`
		Heights   []heightJSON    `json:"heights"`
	}{v.Mark.Designation, condition(v.Mark), register.Warning(v.Mark), doubtsJSON(v.Doubts),
		register.AsOfOrKnown(opts.params.AsOf, opts.params.KnownAt), opts.params.KnownAt, []heightJSON{}}
	for _, h := range v.Heights {
		j := toHeightJSON(h, in)
		j.Doubts = doubtsJSON(v.Doubts.Of(h.DatumCode, h.Version))
		out.Heights = append(out.Heights, j)
	}
	if len(v.Heights) == 0 {
		opts.f.IO.printf("%s has no height in force %s\n", v.Mark.Designation, whenText(out.AsOf, out.KnownAt))
	}
	defer reportCautions(opts.f.IO, opts.format)
	return render(opts.f.IO, opts.format, out, func() Table {
		t := Table{Headers: []string{"DATUM", "VERSION", "HEIGHT" + perRowUnit, "UNIT", "CLASS", "IN FORCE FROM (UTC)", "RECORDED (UTC)", "SOURCE", "DOUBT"}}
		if in != "" {
			t.Headers = append(t.Headers, "HEIGHT ("+string(in)+")")
		}
		for _, h := range out.Heights {
			row := []string{h.Datum, strconv.Itoa(h.Version), deref(h.Value), deref(h.Unit), h.Class, timeText(h.InForceFrom), timeText(h.CommittedAt), sourceShown(h.SourceKind, h.Source), doubtCell(opts.f.IO, h.Doubts)}
			if h.Value == nil {
				row[2] = "withdrawn"
			}
			if in != "" {
				c := ""
				if h.Converted != nil {
					c = h.Converted.Value
				}
				row = append(row, c)
			}
			t.AddRow(row...)
		}
		return t
	})
}

// heightListOptions are the inputs of `cairn height list`.
type heightListOptions struct {
	f       *Factory
	ctx     context.Context
	format  Format
	datum   string
	asOf    string
	knownAt string
	at      *time.Time
	known   *time.Time
}

func newCmdHeightList(f *Factory, runF func(*heightListOptions) error) *cobra.Command {
	opts := &heightListOptions{f: f}
	cmd := &cobra.Command{
		Use:   "list [--datum CODE] [--as-of TIME] [--known-at TIME]",
		Short: "List the height of every benchmark in force, now or at a past time",
		Long: `List the height of every benchmark in force now, or in force at a past time
(--as-of) as the register knows it now or knew it at a past time
(--known-at), by the rule of height show (a version in force then and
withdrawn is listed as withdrawn).

-o geojson writes the heights as an RFC 7946 FeatureCollection for a GIS:
one Point feature per mark and datum at the mark's current position
[longitude, latitude] (a null geometry for a mark with no position), with
the height as published (height_in_unit, unit) and converted exactly to
metres (height_m) (docs/output.md).`,
		Example: `  cairn height list --datum NAVD88 -o geojson > heights.geojson`,
		Args:    exactArgs(0, "no arguments"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			var err error
			if opts.at, err = parseAsOf(opts.asOf); err != nil {
				return err
			}
			if opts.known, err = parseKnownAt(opts.knownAt); err != nil {
				return err
			}
			return dispatch(opts, runF, heightListRun)
		},
	}
	addGeoOutputFlag(cmd, &opts.format)
	cmd.Flags().StringVar(&opts.datum, "datum", "", "only this datum")
	cmd.Flags().StringVar(&opts.asOf, "as-of", "", asOfUsage("list the heights"))
	cmd.Flags().StringVar(&opts.knownAt, "known-at", "", knownAtUsage("list the heights"))
	return cmd
}

// heightListRun lists the current heights.
func heightListRun(opts *heightListOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	var hs []register.CurrentHeight
	lw := &listWriter{ios: opts.f.IO, format: opts.format,
		headers: []string{"MARK", "DATUM", "VERSION", "HEIGHT" + perRowUnit, "UNIT", "CLASS", "SOURCE", "DOUBT"},
		feature: func(w *geojson.Writer, i int) error { return w.Write(heightFeature(hs[i])) }}
	listed, inDoubt := 0, 0
	// The whole register a page of marks at a time (HeightsAsOfEach).
	err = r.HeightsAsOfEach(opts.ctx, opts.datum, opts.at, opts.known, func(page []register.CurrentHeight) error {
		hs = page
		values := make([]any, len(hs))
		rows := make([][]string, len(hs))
		for i, h := range hs {
			j := toHeightJSON(h.Height, "")
			j.Doubts = doubtsJSON(h.Doubts)
			if len(h.Doubts) > 0 {
				inDoubt++
			}
			values[i] = j
			val := deref(j.Value)
			if j.Value == nil {
				val = "withdrawn"
			}
			rows[i] = []string{j.Mark, j.Datum, strconv.Itoa(j.Version), val, deref(j.Unit), j.Class, sourceShown(j.SourceKind, j.Source), doubtCell(opts.f.IO, h.Doubts)}
		}
		listed += len(hs)
		return lw.page(values, rows)
	})
	if err != nil {
		return err
	}
	if err := lw.close(); err != nil {
		return err
	}
	warnListed(opts.f.IO, opts.format, inDoubt, listed, "heights")
	return nil
}

// historyOptions are the inputs of `cairn history`.
type historyOptions struct {
	f           *Factory
	ctx         context.Context
	format      Format
	designation string
	datum       string
}

func newCmdHistory(f *Factory, runF func(*historyOptions) error) *cobra.Command {
	opts := &historyOptions{f: f}
	cmd := &cobra.Command{
		Use:   "history DESIGNATION [--datum CODE]",
		Short: "Every version of a benchmark's heights, newest first",
		Long: `List every version of a benchmark's heights ever recorded, newest first
(per datum), with the change from the version before (in the version's unit;
an earlier version in another unit is converted exactly), its reason, its
source and who recorded it: the name given with --by and the database login
role that wrote it ("login not recorded" for versions from before schema
v12). Each version has two times: IN FORCE FROM, when it came in force (the
date its source gives, or the commit of a publication), the instant
--as-of compares with; and RECORDED, when the register learned of it (the
commit of the transaction that wrote it), the instant --known-at compares
with. The versions are listed in recorded order; a version recorded later
may be in force from an earlier date (a correction of the past).`,
		Args: exactArgs(1, "a DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.designation = cmd.Context(), args[0]
			return dispatch(opts, runF, historyRun)
		},
	}
	addGeoOutputFlag(cmd, &opts.format)
	cmd.Flags().StringVar(&opts.datum, "datum", "", "only this datum")
	return cmd
}

// historyRun lists every version of the mark's heights.
func historyRun(opts *historyOptions) error {
	ios := opts.f.IO
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	v, err := r.History(opts.ctx, opts.designation, opts.datum)
	if err != nil {
		return err
	}
	hs := v.Versions
	// The loud warning: the doubts of the mark and its current versions
	// (the superseded versions' are in their rows).
	var now register.Doubts
	for _, d := range v.Doubts {
		if d.Datum == "" || slices.ContainsFunc(hs, func(e register.HistoryEntry) bool {
			return e.Current && e.DatumCode == d.Datum && e.Version == d.Version
		}) {
			now = append(now, d)
		}
	}
	warnDoubts(ios, now)
	// A version from a publication that accepted failed checks carries the
	// acceptance.
	type historyJSON struct {
		heightJSON
		AcceptedFailedChecks *acceptanceJSON `json:"accepted_failed_checks,omitempty"`
	}
	out := []historyJSON{}
	for _, h := range hs {
		j := historyJSON{heightJSON: toHeightJSON(h.Height, ""), AcceptedFailedChecks: toAcceptanceJSON(h.Accepted)}
		j.Change, j.Doubts = h.Change, doubtsJSON(h.Doubts)
		out = append(out, j)
	}
	defer reportCautions(ios, opts.format)
	return render(ios, opts.format, out, func() Table {
		t := Table{Headers: []string{"DATUM", "VERSION", "IN FORCE FROM (UTC)", "RECORDED (UTC)", "HEIGHT" + perRowUnit, "UNIT", "CHANGE" + perRowUnit, "KIND", "REASON", "SOURCE", "BY", "DOUBT"}}
		for _, h := range out {
			val := deref(h.Value)
			if h.Value == nil {
				val = "withdrawn"
			}
			t.AddRow(h.Datum, strconv.Itoa(h.Version), timeText(h.InForceFrom), timeText(h.CommittedAt), val, deref(h.Unit),
				deref(h.Change), h.SourceKind, h.Reason, sourceShown(h.SourceKind, h.Source), byText(h.heightJSON), doubtCell(opts.f.IO, h.Doubts))
		}
		return t
	})
}

// auditVerifyOptions are the inputs of `cairn audit verify`.
type auditVerifyOptions struct {
	f         *Factory
	ctx       context.Context
	format    Format
	against   string
	since     string
	publicKey string
	fresh     bool
}

func newCmdAuditVerify(f *Factory, runF func(*auditVerifyOptions) error) *cobra.Command {
	opts := &auditVerifyOptions{f: f}
	cmd := &cobra.Command{
		Use:   "verify",
		Short: "Recompute every hash chain, derive the register again, and report any break",
		Long: `Recompute, independently of the database, the hash of every height version
from its contents and its predecessor's hash, from the first version of each
mark and datum to the last, and report every break: a version changed behind
cairn's back, a broken link between versions, a gap in the numbering.

Then derive the register again from what it keeps: every stored field book
is parsed and reduced again and compared, row by row, with its stored
sightings and sections; every published adjustment is computed again from
its stored inputs and compared with its results and with the height versions
that cite it; a height of kind adjustment citing an adjustment that is not
published is a break. Last, the schema (functions, triggers and whether they
are enabled, constraints, columns, grants) is compared with a scratch
database migrated by this binary, made and dropped for the purpose (the role
must be allowed to create databases; otherwise the comparison is skipped with
a warning). Each such break is listed with its kind, where it is, since when
it can date, and what differs.

Then recompute, from the rows themselves, the commit chain of every table in
the evidence (docs/reliability.md, "The evidence") and report each commit
whose rows changed, naming the table, each broken link (a commit removed or
reordered) and rows no commit covers. With --against STATEMENT (made by
"cairn audit head"), also prove that the chain up to the statement is the one
it names, and that the register only grew since; a signed statement's
signature is checked, with --public-key when given.

With --since STATEMENT, audit from that checkpoint on, quickly: trust the
chain up to the statement (its signature checked when it has one), prove that
the register still has the statement's commit with the statement's hash,
and recompute only the commits after it, the chains with a version written
after it (each whole), the runs recorded and the adjustments published after
it; the schema is compared in full.

The schema is compared with the one this binary's migrations make on this
server: a scratch database is created, migrated, read and dropped, and what
was read is kept in the user's cache directory (CAIRN_CACHE_DIR, or
~/.cache/cairn/audit), by the server's address and version, the register's
roles on it and the SHA-256 of the migrations, so that the next audit with
the same compares with it in a tenth of a second instead of seconds. A kept
file another user could have written is not used. --fresh-schema makes the
scratch database again. A change behind cairn's back to a row
written before the statement is not seen: run the whole audit as well, on a
schedule.

Exit status 0 when everything verifies, 3 when any break is found.`,
		Args: exactArgs(0, "no arguments"),
		RunE: runE(&opts.ctx, opts, runF, auditVerifyRun),
	}
	addOutputFlag(cmd, &opts.format)
	cmd.Flags().StringVar(&opts.against, "against", "", "a statement FILE made by cairn audit head")
	cmd.Flags().StringVar(&opts.since, "since", "", "audit only what was written after the statement FILE (made by cairn audit head): quick, and blind to changes before it")
	cmd.Flags().StringVar(&opts.publicKey, "public-key", "", "the Ed25519 public key (hex) the statement must be signed with")
	cmd.Flags().BoolVar(&opts.fresh, "fresh-schema", false, "compare the schema with a database migrated afresh now, not with the copy kept from an earlier audit")
	return cmd
}

// auditVerifyRun recomputes the hash chains and reports their breaks.
func auditVerifyRun(opts *auditVerifyOptions) error {
	ios := opts.f.IO
	if opts.since != "" && opts.against != "" {
		return flagError{errors.New("--since and --against: give one (--since audits from a statement on; --against proves the whole chain up to it)")}
	}
	r, err := openAdminRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	useSchemaCache(r, opts.fresh)
	var since *register.Statement
	var sinceCheck *statementCheck
	var xid uint64
	if opts.since != "" {
		s, check, err := readSince(opts.f, opts.since, opts.publicKey)
		if err != nil {
			return err
		}
		if xid, err = r.StatementXid(opts.ctx, s); err != nil {
			return err
		}
		since, sinceCheck = &s, check
	}
	var sinceResult func() (register.EvidenceReport, error)
	if since != nil {
		sinceResult = sinceEvidence(opts.ctx, r, *since)
		defer sinceResult()
	}
	// A bar of the versions checked, on a terminal and not with -o json;
	// what follows them (the derived checks) is not counted.
	var bar *Bar
	if opts.format != FormatJSON {
		bar = ios.StartBar(-1, "audit: height versions checked", "versions")
	}
	var rep register.AuditReport
	if since != nil {
		rep, err = r.AuditVerifySince(opts.ctx, xid, bar.Add)
	} else {
		rep, err = r.AuditVerifyProgress(opts.ctx, bar.Add)
	}
	bar.Finish()
	if err != nil {
		return err
	}
	if since != nil {
		ios.printf("audit: since the statement's seq %d: the chains with a version written since, the runs recorded and the adjustments published since\n", since.Seq)
	}
	if opts.format != FormatJSON {
		aerr := renderAudit(ios, opts.format, rep)
		_, _, everr := verifyEvidence(opts.ctx, opts.f, r, opts.against, opts.publicKey, since, sinceResult)
		if aerr != nil {
			return aerr
		}
		return everr
	}
	// One JSON document: the chains, what was derived again, the
	// evidence, the statement; the summary lines on stderr as in a table.
	ev, stmt, everr := verifyEvidence(opts.ctx, opts.f, r, opts.against, opts.publicKey, since, sinceResult)
	if since != nil {
		stmt = sinceCheck
	}
	var failed checksFailed
	if everr != nil && !errors.As(everr, &failed) {
		return everr
	}
	aerr := summarizeAudit(ios, rep)
	if err := writeJSON(ios.Out, auditVerifyDoc{AuditReport: rep, Evidence: ev, Statement: stmt, Verified: aerr == nil && everr == nil}); err != nil {
		return err
	}
	if aerr != nil {
		return aerr
	}
	return everr
}

// auditVerifyDoc is audit verify's JSON: the audit's report with the
// evidence's and the statement's, and whether everything verified.
type auditVerifyDoc struct {
	register.AuditReport
	Evidence  register.EvidenceReport `json:"evidence"`
	Statement *statementCheck         `json:"statement"`
	Verified  bool                    `json:"verified"`
}
