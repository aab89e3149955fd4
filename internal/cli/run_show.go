package cli

import (
	"bytes"
	"context"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"maps"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/reduce"
	"cairn/internal/register"
	"cairn/internal/store"
	"cairn/internal/units"
)

// runJSON is a run in machine output.
type runJSON struct {
	ID             int64     `json:"run_id"`
	Name           string    `json:"name"`
	ObservedOn     string    `json:"observed_on"`
	Crew           string    `json:"crew"`
	Instrument     string    `json:"instrument"`
	Rod            string    `json:"rod"`
	Datum          string    `json:"datum"`
	Class          string    `json:"class"`
	Unit           string    `json:"unit"`
	FileName       string    `json:"file_name"`
	BookSHA256     string    `json:"book_sha256"`
	BookBytes      int64     `json:"book_bytes"`
	RecordedBy     string    `json:"recorded_by"`
	RecordedAt     time.Time `json:"recorded_at"`
	ChecksFailed   int       `json:"checks_failed"`
	AcceptedReason string    `json:"accepted_reason"`
	SightingCount  int       `json:"sighting_count"`
	SectionCount   int       `json:"section_count"`
	LengthM        float64   `json:"length_m"`
	// ObservationsSHA256 is the fingerprint of the book's observations
	// (docs/runs.md); "" for a run recorded before fingerprints were kept.
	ObservationsSHA256 string `json:"observations_sha256"`
	// Standards is the profile that judged the run.
	Standards runStandardsJSON `json:"standards"`
	// CheckOnly says the run is a check run: it adjusts nothing.
	CheckOnly bool `json:"check_only"`
	// Voided is the run's void, null while it stands.
	Voided *voidJSON `json:"voided"`
}

func toRunJSON(r store.Run) runJSON {
	j := runJSON{ID: r.ID, Name: r.Name, Crew: r.Crew, Instrument: r.Instrument, Rod: r.Rod, Datum: r.Datum,
		Class: r.Class, Unit: r.Unit, FileName: r.FileName, BookSHA256: hex.EncodeToString(r.BookSHA256),
		BookBytes: r.BookSize, RecordedBy: r.RecordedBy, RecordedAt: r.RecordedAt, ChecksFailed: r.ChecksFailed,
		AcceptedReason: r.AcceptedReason, SightingCount: r.Sightings, SectionCount: r.Sections, LengthM: r.LengthM,
		ObservationsSHA256: hex.EncodeToString(r.ObservationsSHA256), Standards: toRunStandardsJSON(r.Standards, r.Class),
		CheckOnly: r.CheckOnly, Voided: toVoidJSON(r.Voided)}
	if r.ObservedOn != nil {
		j.ObservedOn = r.ObservedOn.Format("2006-01-02")
	}
	return j
}

// parseRunID reads a run's number.
func parseRunID(s string) (int64, error) {
	id, err := strconv.ParseInt(strings.TrimSpace(s), 10, 64)
	if err != nil || id < 1 {
		return 0, badInput("%q is not a run number (see cairn run list)", s)
	}
	return id, nil
}

// runShowOptions are the inputs of `cairn run show`.
type runShowOptions struct {
	f      *Factory
	ctx    context.Context
	ID     int64
	Book   bool
	Format Format
}

// newCmdRunShow builds `cairn run show`. runF replaces runShowRun in tests.
func newCmdRunShow(f *Factory, runF func(*runShowOptions) error) *cobra.Command {
	opts := &runShowOptions{f: f}
	cmd := &cobra.Command{
		Use:   "show RUN",
		Short: "Show a recorded run: its description, sections, checks and marks",
		Long: `Show a recorded run: its description from the book, who recorded it and
when, the sections between its marks, the checks as they stood when it was
recorded, and the marks it touched with the condition each had then.

With --book, print the field book exactly as recorded, byte for byte, and
nothing else: cairn run show 12 --book > copy.csv gives back the file.`,
		Example: `  cairn run show 12
  cairn run show 12 --book > north-loop.csv
  cairn run show 12 -o json`,
		Args: exactArgs(1, "a RUN number"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			var err error
			if opts.ID, err = parseRunID(args[0]); err != nil {
				return err
			}
			if opts.Book && opts.Format != FormatTable {
				return badInput("--book prints the file itself: it takes no --output")
			}
			if opts.Format == FormatCSV {
				return badInput("--output: run show prints a report or json, not csv")
			}
			return dispatch(opts, runF, runShowRun)
		},
	}
	cmd.Flags().BoolVar(&opts.Book, "book", false, "print the recorded field book byte for byte")
	addOutputFlag(cmd, &opts.Format)
	return cmd
}

// sectionJSON is a section in machine output.
type sectionJSON struct {
	Seq         int      `json:"section"`
	From        string   `json:"from"`
	To          string   `json:"to"`
	FromLine    int      `json:"from_line"`
	ToLine      int      `json:"to_line"`
	Setups      int      `json:"setups"`
	DifferenceM float64  `json:"difference_m"`
	LengthM     *float64 `json:"length_m"`
}

// runMarkJSON is a mark a run touched, in machine output.
type runMarkJSON struct {
	Designation string         `json:"mark"`
	Created     bool           `json:"created"`
	Condition   *conditionJSON `json:"condition"`
}

// runShowRun prints the run's report, or its book.
func runShowRun(opts *runShowOptions) error {
	ctx := opts.ctx
	ios := opts.f.IO
	r, err := openRegister(ctx, opts.f)
	if err != nil {
		return err
	}
	if opts.Book {
		b, err := r.RunBook(ctx, opts.ID)
		if err != nil {
			return err
		}
		_, err = ios.Out.Write(b)
		return err
	}
	v, err := r.Run(ctx, opts.ID)
	if err != nil {
		return err
	}
	if opts.Format == FormatJSON {
		j := struct {
			runJSON
			Sections []sectionJSON   `json:"sections"`
			Marks    []runMarkJSON   `json:"marks"`
			Held     []runHeldJSON   `json:"held"`
			Checks   json.RawMessage `json:"checks"`
			Cautions []string        `json:"cautions"`
		}{runJSON: toRunJSON(v.Run), Sections: []sectionJSON{}, Marks: []runMarkJSON{}, Held: toHeldJSON(v.Run.Unit, v.Held),
			Checks: v.Run.Checks, Cautions: nonNil(v.Cautions)}
		for _, s := range v.Sections {
			j.Sections = append(j.Sections, sectionJSON{s.Seq, s.From, s.To, s.FirstLine, s.LastLine, s.Setups, s.DifferenceM, s.LengthM})
		}
		for _, m := range v.Marks {
			rm := runMarkJSON{Designation: m.Designation, Created: m.Created}
			if m.Condition != nil {
				c := toConditionJSON(*m.Condition)
				rm.Condition = &c
			}
			j.Marks = append(j.Marks, rm)
		}
		return writeJSON(ios.Out, j)
	}
	// The whole report goes to Out, its warnings too (repeated on ErrOut
	// when Out is not a terminal), and ends with the cautions.
	for _, c := range v.Cautions {
		warnInReport(ios, c)
	}
	if v.Run.Voided != nil {
		warnInReport(ios, fmt.Sprintf("Run %d is VOIDED (%s): it is left out of adjustments", v.Run.ID, voidText(v.Run.Voided)))
	}
	if len(v.Cautions) > 0 || v.Run.Voided != nil {
		fmt.Fprintln(ios.Out)
	}
	if v.CheckOnly {
		fmt.Fprintf(ios.Out, "Run %d is a check run: it adjusts nothing.\n\n", v.Run.ID)
	}
	if err := writeRunReport(ios.Out, v.Run, v.Summary, v.Sections, v.Marks, v.Held); err != nil {
		return err
	}
	_, err = fmt.Fprintf(ios.Out, "\n%s\n", cautions)
	return err
}

// writeRunReport writes a recorded run for reading.
func writeRunReport(w io.Writer, run store.Run, sum register.CheckSummary, sections []store.Section, marks []store.RunMark, held []store.RunHeld) error {
	mis, checks, failures := sum.Misclosures, sum.Checks, sum.Failures
	u := units.Unit(run.Unit)
	n := numbers{u, reduce.Decimals(u)}
	j := toRunJSON(run)
	head := Table{Headers: []string{"FIELD", "VALUE"}}
	for _, kv := range [][2]string{
		{"run", strconv.FormatInt(run.ID, 10)},
		{"name", j.Name}, {"observed on", j.ObservedOn}, {"crew", j.Crew}, {"instrument", j.Instrument}, {"rod", j.Rod},
		{"datum", j.Datum}, {"class", j.Class}, {"standards", j.Standards.Words}, {"standards source", j.Standards.Source},
		{"standards values", j.Standards.Values}, {"unit", j.Unit},
		{"file", fmt.Sprintf("%s (%d bytes)", j.FileName, j.BookBytes)}, {"sha256", j.BookSHA256},
		{"recorded", timeText(run.RecordedAt) + " by " + run.RecordedBy},
		{"sightings", strconv.Itoa(run.Sightings)},
	} {
		head.AddRow(kv[0], kv[1])
	}
	if j.ObservationsSHA256 != "" {
		head.AddRow("observations sha256", j.ObservationsSHA256)
	}
	if run.Voided != nil {
		head.AddRow("VOIDED", voidText(run.Voided)+" (left out of adjustments)")
	} else {
		head.AddRow("voided", "no")
	}
	if run.ChecksFailed > 0 {
		head.AddRow("checks", fmt.Sprintf("%d failed, accepted: %s", run.ChecksFailed, run.AcceptedReason))
	} else if sum.Summary != "" && sum.Summary != "All checks passed." {
		head.AddRow("checks", strings.TrimSuffix(sum.Summary, "."))
	} else {
		head.AddRow("checks", "all passed")
	}

	us := string(u)
	secs := Table{Headers: []string{"#", "FROM", "TO", "LINES", "SETUPS", "DIFFERENCE (" + us + ")", "LENGTH (" + us + ")"}}
	for _, s := range sections {
		length := "-"
		if s.LengthM != nil {
			length = n.d(*s.LengthM)
		}
		secs.AddRow(strconv.Itoa(s.Seq), s.From, s.To, fmt.Sprintf("%d-%d", s.FirstLine, s.LastLine), strconv.Itoa(s.Setups), n.signed(s.DifferenceM), length)
	}
	ms := Table{Headers: []string{"MARK", "CONDITION WHEN RECORDED", "REPORTED", "CREATED BY THIS RUN"}}
	for _, m := range marks {
		cond, on, created := "none reported", "", "no"
		if m.Condition != nil {
			cond, on = m.Condition.Condition, m.Condition.ObservedOn.Format("2006-01-02")
		}
		if m.Created {
			created = "yes"
		}
		ms.AddRow(m.Designation, cond, on, created)
	}
	res := &reduce.Result{Unit: u, Misclosures: mis, DoubleRuns: sum.DoubleRuns, Connections: sum.Connections, Checks: checks, Failures: failures}
	parts := []struct {
		title string
		t     Table
	}{
		{"", head},
		{"Sections", secs},
		{"Held heights", heldTable(run.Unit, toHeldJSON(run.Unit, held))},
		{"Misclosure", misclosureTable(res)},
		{"Checks when recorded", checksTable(res)},
	}
	if len(held) == 0 && len(sum.HeldM) > 0 {
		// Recorded before the held heights were kept on their own: the
		// check summary has them, in metres.
		for _, name := range slices.Sorted(maps.Keys(sum.HeldM)) {
			held = append(held, store.RunHeld{Designation: name, Value: strconv.FormatFloat(u.FromMetres(sum.HeldM[name]), 'f', -1, 64)})
		}
		parts[2].t = heldTable(run.Unit, toHeldJSON(run.Unit, held))
	}
	if len(held) == 0 {
		parts[2].title = "Held heights: none (heights relative to the first mark)"
	}
	if len(mis) == 0 {
		parts[3].title = "Misclosure: none (the run does not close)"
	}
	if len(sum.DoubleRuns) > 0 {
		parts = slices.Insert(parts, 4, struct {
			title string
			t     Table
		}{"Double-run sections (forward + backward)", doubleRunTable(res)})
	}
	if len(sum.Connections) > 0 {
		parts = slices.Insert(parts, 4, struct {
			title string
			t     Table
		}{"Check connections (marks of known height)", connectionTable(res)})
	}
	if len(failures) > 0 {
		parts = append(parts, struct {
			title string
			t     Table
		}{"Failed checks", failuresTable(res)})
	}
	parts = append(parts, struct {
		title string
		t     Table
	}{"Marks touched", ms})
	for i, p := range parts {
		if i > 0 {
			fmt.Fprintf(w, "\n%s\n", p.title)
		}
		if len(p.t.Rows) == 0 {
			continue
		}
		if err := writeAligned(w, p.t); err != nil {
			return err
		}
	}
	return nil
}

// writeAligned writes t with headers in aligned columns.
func writeAligned(w io.Writer, t Table) error {
	var buf bytes.Buffer
	tw := tabwriter.NewWriter(&buf, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, strings.Join(t.Headers, "\t"))
	for _, row := range t.Rows {
		fmt.Fprintln(tw, strings.Join(row, "\t"))
	}
	tw.Flush()
	for _, line := range strings.SplitAfter(buf.String(), "\n") {
		if _, err := io.WriteString(w, strings.TrimRight(line, " \n")+strings.Repeat("\n", strings.Count(line, "\n"))); err != nil {
			return err
		}
	}
	return nil
}
