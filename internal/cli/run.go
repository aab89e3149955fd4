package cli

import (
	"bytes"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"cairn/internal/levelbook"
	"cairn/internal/reduce"
	"cairn/internal/standards"
	"cairn/internal/units"
)

// newCmdRun builds the `cairn run` command group: level runs and their
// runCheckOptions are the inputs of `cairn run check`.
type runCheckOptions struct {
	IO *IOStreams

	BookPath string
	// Hold gives held heights (--held-height) in the book's unit, by mark.
	Hold map[string]float64
	// Class overrides the book's accuracy class ("" keeps it).
	Class               standards.Class
	CurvatureRefraction bool
	Format              Format
}

// newCmdRunCheck builds `cairn run check`. runF replaces runCheckRun in
// tests.
func newCmdRunCheck(f *Factory, runF func(*runCheckOptions) error) *cobra.Command {
	opts := &runCheckOptions{IO: f.IO}
	var rf reductionFlags
	cmd := &cobra.Command{
		Use:   "check BOOK.csv",
		Short: "Reduce a level book and check it against its accuracy class",
		Long: `Reduce a level book and check it: heights of instrument and point heights
for every sighting, the sections between consecutive marks, the misclosure
of the loop or between held marks against the allowable of the run's
accuracy class, and every quality check with its tolerance and source.
Nothing is written to the register.

A loop closes on itself. A line closes only between held marks: give each
known height with --held-height MARK=HEIGHT, in the book's unit (--hold
MARK=HEIGHT, its old spelling, still works for this release). A run that
neither closes on itself nor joins two held marks fails the closure check.

Exit status: 0 when every check passes, 3 when any fails (the report is
still printed), 2 when the book cannot be read.

The report is aligned for reading; -o json gives the whole reduction
(numbers in metres, keys ending in _m), -o csv the reduced notes.

Checking a book is not approving it: results need review by a licensed
surveyor, check into two marks, verify each mark's condition before use,
and follow the codes and regulations that govern your work.`,
		Example: `  cairn run check north-loop.csv
  cairn run check levee-line.csv --held-height TC-0420=3.512 --held-height TC-0427=5.104
  cairn run check levee-line.csv --class second-II -o json`,
		Args: exactArgs(1, "one level book"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.BookPath = args[0]
			var err error
			if opts.Hold, opts.Class, err = rf.parse(cmd, opts.IO); err != nil {
				return err
			}
			opts.CurvatureRefraction = rf.curvatureRefraction
			return dispatch(opts, runF, runCheckRun)
		},
	}
	rf.add(cmd.Flags())
	addOutputFlag(cmd, &opts.Format)
	return cmd
}

// reductionFlags are the flags of run check and run record that say how a
// book is reduced.
type reductionFlags struct {
	heldHeights []string // --held-height MARK=HEIGHT
	// holds is --hold MARK=HEIGHT, the old spelling of --held-height, kept
	// for one release: on adjust, --hold holds a mark at its register
	// height, which is another thing.
	holds               []string
	class               string
	curvatureRefraction bool
}

func (rf *reductionFlags) add(fl *pflag.FlagSet) {
	fl.StringArrayVar(&rf.heldHeights, "held-height", nil, "known height of a mark to reduce the book from, MARK=HEIGHT in the book's unit (repeatable)")
	fl.StringArrayVar(&rf.holds, "hold", nil, "deprecated: use --held-height")
	fl.StringVar(&rf.class, "class", "", "accuracy class to check against, overriding the book's: first-I, first-II, second-I, second-II, third")
	fl.BoolVar(&rf.curvatureRefraction, "curvature-refraction", false, "correct every reading for curvature and refraction (k = 0.14)")
}

// parse reads the held heights and the class ("" keeps the book's). When
// the deprecated --hold is given, a one-line notice on ios.ErrOut says so.
func (rf *reductionFlags) parse(cmd *cobra.Command, ios *IOStreams) (map[string]float64, standards.Class, error) {
	if len(rf.holds) > 0 {
		fmt.Fprintf(ios.ErrOut, "%s: --hold is deprecated here and will be removed: use --held-height MARK=HEIGHT\n", cmd.CommandPath())
	}
	hold, err := parseHeldHeights(map[string][]string{"held-height": rf.heldHeights, "hold": rf.holds})
	if err != nil {
		return nil, "", err
	}
	var class standards.Class
	if rf.class != "" {
		if class, err = standards.ParseClass(rf.class); err != nil {
			return nil, "", badInput("--class: %v", err)
		}
	}
	return hold, class, nil
}

// parseHeldHeights reads MARK=HEIGHT values, given by flag name; a mark
// may be held once in all.
func parseHeldHeights(byFlag map[string][]string) (map[string]float64, error) {
	var m map[string]float64
	for _, name := range []string{"held-height", "hold"} {
		for _, h := range byFlag[name] {
			mark, value, ok := strings.Cut(h, "=")
			mark, value = strings.TrimSpace(mark), strings.TrimSpace(value)
			if !ok || mark == "" || value == "" {
				return nil, badInput("--%s %q: want MARK=HEIGHT", name, h)
			}
			v, err := strconv.ParseFloat(value, 64)
			if err != nil || v != v || v > 1e6 || v < -1e6 {
				return nil, badInput("--%s %q: height %q is not a number", name, h, value)
			}
			if _, dup := m[mark]; dup {
				return nil, badInput("--%s %q: %s is held twice", name, h, mark)
			}
			if m == nil {
				m = map[string]float64{}
			}
			m[mark] = v
		}
	}
	return m, nil
}

// reduceBook reads and reduces a level book with held heights given in the
// book's unit. Every error is bad input (exit status 2).
func reduceBook(path string, hold map[string]float64, class standards.Class, cr bool) (*reduce.Result, error) {
	book, err := levelbook.ReadFile(path)
	if err != nil {
		return nil, err // a *levelbook.Error: exit status 2
	}
	var holdM map[string]float64
	if len(hold) > 0 {
		holdM = make(map[string]float64, len(hold))
		for k, v := range hold {
			holdM[k] = book.Meta.Unit.ToMetres(v)
		}
	}
	r, err := reduce.Reduce(book, reduce.Options{Hold: holdM, Class: class, CurvatureRefraction: cr})
	if err != nil {
		return nil, badInput("%v", err)
	}
	return r, nil
}

// runCheckRun reduces the book, prints the report and reports failed
// checks through the exit status.
func runCheckRun(opts *runCheckOptions) error {
	r, err := reduceBook(opts.BookPath, opts.Hold, opts.Class, opts.CurvatureRefraction)
	if err != nil {
		return err
	}
	switch opts.Format {
	case FormatJSON:
		err = writeJSON(opts.IO.Out, struct {
			*reduce.Result
			Passed bool `json:"passed"`
		}{r, r.Passed()})
	case FormatCSV:
		t := notesTable(r)
		for i, h := range t.Headers {
			t.Headers[i] = csvHeader(h)
		}
		err = writeTable(opts.IO, FormatCSV, t)
	default:
		err = writeReport(opts.IO.Out, r)
	}
	if err != nil {
		return err
	}
	if !r.Passed() {
		return checksFailed{len(r.Failures)}
	}
	return nil
}

// csvHeader turns a display header into a snake_case CSV header with its
// unit: "ACC IMBAL (usft)" becomes "acc_imbal_usft".
func csvHeader(h string) string {
	h = strings.ToLower(h)
	h = strings.NewReplacer("&", "_and_", " (", "_", "(", "", ")", "", " ", "_").Replace(h)
	return h
}

// numbers formats values of a reduction in its unit.
type numbers struct {
	u   units.Unit
	dec int
}

func numbersFor(r *reduce.Result) numbers { return numbers{r.Unit, reduce.Decimals(r.Unit)} }

// h formats a reading, height or difference (metres in) in the run's unit.
func (n numbers) h(m float64) string { return units.Format(n.u.FromMetres(m), n.dec) }

// d formats a distance.
func (n numbers) d(m float64) string { return units.Format(n.u.FromMetres(m), reduce.DistanceDecimals) }

// signed formats a difference with its sign.
func (n numbers) signed(m float64) string {
	s := n.h(m)
	if !strings.HasPrefix(s, "-") {
		s = "+" + s
	}
	return s
}

// notesTable is the reduced notes: one row per sighting.
func notesTable(r *reduce.Result) Table {
	n := numbersFor(r)
	u := string(r.Unit)
	t := Table{Headers: []string{"LINE", "POINT", "BS (" + u + ")", "IS (" + u + ")", "FS (" + u + ")", "DIST (" + u + ")",
		"HI (" + u + ")", "HEIGHT (" + u + ")", "IMBAL (" + u + ")", "ACC IMBAL (" + u + ")", "NOTE"}}
	if r.CurvatureRefraction {
		t.Headers = append(t.Headers[:len(t.Headers)-1], "C&R ("+u+")", "NOTE")
	}
	for _, row := range r.Rows {
		cells := make([]string, 0, len(t.Headers))
		reading := n.h(row.ReadingM)
		bs, is, fs := "", "", ""
		switch row.Sight {
		case levelbook.Backsight:
			bs = reading
		case levelbook.Intermediate:
			is = reading
		case levelbook.Foresight:
			fs = reading
		}
		dist := ""
		if row.HasDistance {
			dist = n.d(row.DistanceM)
		}
		imb, acc := "", ""
		if st := r.Setups[row.Setup-1]; row.Sight == levelbook.Foresight && st.HasDistances {
			imb, acc = n.d(st.ImbalanceM), n.d(st.AccumulatedImbalanceM)
		}
		cells = append(cells, strconv.Itoa(row.Line), row.Point, bs, is, fs, dist, n.h(row.HeightOfInstrumentM), n.h(row.HeightM), imb, acc)
		if r.CurvatureRefraction {
			cells = append(cells, n.h(row.CorrectionM))
		}
		t.AddRow(append(cells, row.Note)...)
	}
	return t
}

func sectionsTable(r *reduce.Result) Table {
	n := numbersFor(r)
	u := string(r.Unit)
	t := Table{Headers: []string{"#", "FROM", "TO", "LINES", "SETUPS", "DIFFERENCE (" + u + ")", "LENGTH (" + u + ")", "CUMULATIVE (" + u + ")", "ACC IMBAL (" + u + ")"}}
	for _, s := range r.Sections {
		length, cum, imb := "-", "-", "-"
		if s.HasLength {
			length, cum, imb = n.d(s.LengthM), n.d(s.CumulativeLengthM), n.d(s.ImbalanceM)
		}
		t.AddRow(strconv.Itoa(s.Number), s.From, s.To, fmt.Sprintf("%d-%d", s.FromLine, s.ToLine), strconv.Itoa(s.Setups),
			n.signed(s.DifferenceM), length, cum, imb)
	}
	return t
}

func misclosureTable(r *reduce.Result) Table {
	n := numbersFor(r)
	u := string(r.Unit)
	t := Table{Headers: []string{"KIND", "FROM", "TO", "LINES", "SETUPS", "LENGTH (" + u + ")", "OBSERVED (" + u + ")", "KNOWN (" + u + ")", "MISCLOSURE (" + u + ")", "ALLOWABLE (" + u + ")", "RESULT"}}
	for _, m := range r.Misclosures {
		length, allow, result := "-", "-", "not judged (no class)"
		if m.HasLength {
			length = n.d(m.LengthM)
		} else {
			result = "not judged (no length)"
		}
		if m.HasAllowable {
			allow, result = n.h(m.AllowableM), "FAIL"
			if m.Pass {
				result = "pass"
			}
		}
		t.AddRow(m.Kind, m.From, m.To, fmt.Sprintf("%d-%d", m.FromLine, m.ToLine), strconv.Itoa(m.Setups), length,
			n.signed(m.ObservedM), n.signed(m.KnownM), n.signed(m.MisclosureM), allow, result)
	}
	return t
}

func checksTable(r *reduce.Result) Table {
	t := Table{Headers: []string{"CHECK", "CHECKED", "FAILED", "TOLERANCE", "SOURCE"}}
	for _, c := range r.Checks {
		if c.NotMade != "" {
			t.AddRow(string(c.Kind), "-", "-", "not made: "+c.NotMade, c.Source)
			continue
		}
		t.AddRow(string(c.Kind), strconv.Itoa(c.Checked), strconv.Itoa(c.Failed), c.Tolerance, c.Source)
	}
	return t
}

func failuresTable(r *reduce.Result) Table {
	t := Table{Headers: []string{"LINE", "CHECK", "SUBJECT", "PROBLEM"}}
	for _, f := range r.Failures {
		t.AddRow(strconv.Itoa(f.Line), string(f.Kind), f.Subject, f.Message)
	}
	return t
}

// writeReport writes the reduction for reading: a heading, the reduced
// notes, sections, misclosures, checks and failures, each aligned under its
// headers, and the caution.
func writeReport(w io.Writer, r *reduce.Result) error {
	m := r.Meta
	n := numbersFor(r)
	fmt.Fprintf(w, "Level book %s", r.Name)
	if m.Run != "" {
		fmt.Fprintf(w, ": %s", m.Run)
	}
	if m.Date != "" {
		fmt.Fprintf(w, ", %s", m.Date)
	}
	fmt.Fprintln(w)
	class := "none named"
	if r.Class != "" {
		class = string(r.Class)
	}
	datum := m.Datum
	if datum == "" {
		datum = "not stated"
	}
	reading := "mean of three wires where booked"
	if r.Reading == levelbook.ReadMiddle {
		reading = "middle wire"
	}
	cr := "not applied"
	if r.CurvatureRefraction {
		cr = "applied (k = 0.14)"
	}
	fmt.Fprintf(w, "Unit %s (%s) · datum %s · class %s · reading %s · curvature and refraction %s\n", r.Unit, r.Unit.Name(), datum, class, reading, cr)
	kind := "line"
	if r.Loop {
		kind = "loop"
	}
	fmt.Fprintf(w, "A %s from %s to %s: %d setups, %d sections\n", kind, r.Start, r.End, len(r.Setups), len(r.Sections))
	if r.Relative {
		fmt.Fprintf(w, "No mark held: heights are relative to %s = %s %s\n", r.Start, n.h(0), r.Unit)
	} else {
		var held []string
		seen := map[string]bool{}
		for _, row := range r.Rows {
			if v, ok := r.Held[row.Point]; ok && !seen[row.Point] {
				seen[row.Point] = true
				held = append(held, fmt.Sprintf("%s = %s", row.Point, n.h(v)))
			}
		}
		fmt.Fprintf(w, "Held (%s): %s\n", r.Unit, strings.Join(held, ", "))
	}
	parts := []struct {
		title string
		t     Table
	}{
		{"Reduced notes", notesTable(r)},
		{"Sections", sectionsTable(r)},
		{"Misclosure", misclosureTable(r)},
		{"Checks", checksTable(r)},
	}
	if len(r.Misclosures) == 0 {
		parts[2].title = "Misclosure: none (the run does not close)"
	}
	if len(r.Failures) > 0 {
		parts = append(parts, struct {
			title string
			t     Table
		}{"Failed checks", failuresTable(r)})
	}
	for _, p := range parts {
		fmt.Fprintf(w, "\n%s\n", p.title)
		if len(p.t.Rows) == 0 {
			continue
		}
		var buf bytes.Buffer
		tw := tabwriter.NewWriter(&buf, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, strings.Join(p.t.Headers, "\t"))
		for _, row := range p.t.Rows {
			fmt.Fprintln(tw, strings.Join(row, "\t"))
		}
		tw.Flush()
		for _, line := range strings.SplitAfter(buf.String(), "\n") {
			if _, err := io.WriteString(w, strings.TrimRight(line, " \n")+strings.Repeat("\n", strings.Count(line, "\n"))); err != nil {
				return err
			}
		}
	}
	fmt.Fprintln(w)
	if r.Passed() {
		fmt.Fprintln(w, "All checks passed.")
	} else {
		fmt.Fprintf(w, "%d check(s) failed.\n", len(r.Failures))
	}
	_, err := fmt.Fprintln(w, "Caution: review by a licensed surveyor is needed before these heights are used; check into two marks, verify each mark's condition, and follow local codes and regulations.")
	return err
}
