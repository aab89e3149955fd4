package cli

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"
	"unicode/utf8"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"cairn/internal/levelbook"
	"cairn/internal/reduce"
	"cairn/internal/register"
	"cairn/internal/standards"
	"cairn/internal/store"
	"cairn/internal/units"
)

// runCheckOptions are the inputs of `cairn run check`.
type runCheckOptions struct {
	IO  *IOStreams
	f   *Factory
	ctx context.Context

	BookPath string
	// Hold gives held heights (--held-height MARK=HEIGHT) in the book's
	// unit, by mark.
	Hold map[string]float64
	// HoldCurrent names marks held at their current height in the register
	// (--hold MARK); only then is the register opened.
	HoldCurrent []string
	// AllowCondition and ConditionReason hold marks of HoldCurrent in
	// doubt (--allow-condition, --condition-reason).
	AllowCondition  bool
	ConditionReason string
	// Class overrides the book's accuracy class ("" keeps it).
	Class               standards.Class
	CurvatureRefraction bool
	// Standards names the profile that judges the run (--standards NAME
	// or FILE), overriding the book's; "" keeps the book's.
	Standards string
	Format    Format
}

// newCmdRunCheck builds `cairn run check`. runF replaces runCheckRun in
// tests.
func newCmdRunCheck(f *Factory, runF func(*runCheckOptions) error) *cobra.Command {
	opts := &runCheckOptions{IO: f.IO, f: f}
	var rf reductionFlags
	cmd := &cobra.Command{
		Use:   "check BOOK.csv",
		Short: "Reduce a level book and check it against its accuracy class",
		Long: `Reduce a level book and check it: heights of instrument and point heights
for every sighting, the spot heights the book declares, the sections between
consecutive marks, the misclosure of the loop or between held marks against
the allowable of the run's accuracy class, every intermediate sight on a
held mark against its held height, and every quality check with its
tolerance and source. Nothing is written to the register.

A loop closes on itself. A line closes only between held marks. Hold a mark
at its current height in the register with --hold MARK (its published height
on the book's datum, converted exactly to the book's unit; the register is
opened only then), or give a known height yourself with --held-height
MARK=HEIGHT, in the book's unit. --held-height MARK, without a height, is the
same as --hold MARK; --hold MARK=HEIGHT, the old spelling of --held-height,
still works for this release. A mark without a current height is refused,
and so is a mark whose latest condition report says disturbed, destroyed or
not found, unless --allow-condition is given with --condition-reason. A run
that neither closes on itself nor joins two held marks fails the closure
check.

The tolerances come from a standards profile: the book's "# standards:"
line, or --standards NAME|FILE, else fgcc-1984 (see cairn standards). The
report names the profile that judged the run, with its source and the
status of its values in plain words: most of the built-in 1984 table is from
memory (recalled, not read in the publication), and the report says so.

The report ends with how the checks came out: "All checks passed." only when
every check that applies was made and passed; otherwise it names the checks
not made and why (no class, no distances, no closure).

Exit status: 0 when every check made passes, 3 when any fails (the report is
still printed), 2 when the book cannot be read or a held mark is refused.

The report is aligned for reading; -o json gives the whole reduction
(numbers in metres, keys ending in _m), -o csv the reduced notes.

Checking a book is not approving it: results need review by a licensed
surveyor, check into two marks, verify each mark's condition before use,
and follow the codes and regulations that govern your work.`,
		Example: `  cairn run check north-loop.csv
  cairn run check levee-line.csv --hold TC-0420 --hold TC-0427
  cairn run check levee-line.csv --held-height TC-0420=3.512 --held-height TC-0427=5.104
  cairn run check levee-line.csv --class second-II -o json
  cairn run check levee-line.csv --standards en0593
  cairn run check levee-line.csv --standards office.std`,
		Args: exactArgs(1, "one level book"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.BookPath = cmd.Context(), args[0]
			var err error
			if opts.Hold, opts.HoldCurrent, opts.Class, err = rf.parse(cmd, opts.IO); err != nil {
				return err
			}
			opts.CurvatureRefraction, opts.Standards = rf.curvatureRefraction, strings.TrimSpace(rf.standards)
			opts.AllowCondition, opts.ConditionReason = rf.allowCondition, strings.TrimSpace(rf.conditionReason)
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
	heldHeights []string // --held-height MARK=HEIGHT, or MARK
	// holds is --hold MARK: the mark at its current height in the register,
	// as on adjust; --hold MARK=HEIGHT, the old spelling of --held-height,
	// is kept for one release.
	holds               []string
	class               string
	standards           string
	curvatureRefraction bool
	allowCondition      bool
	conditionReason     string
}

func (rf *reductionFlags) add(fl *pflag.FlagSet) {
	fl.StringArrayVar(&rf.heldHeights, "held-height", nil, "known height of a mark to reduce the book from, MARK=HEIGHT in the book's unit; MARK alone takes its current height in the register (repeatable)")
	fl.StringArrayVar(&rf.holds, "hold", nil, "hold MARK at its current height in the register, on the book's datum (repeatable; MARK=HEIGHT is deprecated: use --held-height)")
	fl.StringVar(&rf.class, "class", "", "accuracy class to check against, overriding the book's: "+classNames()+" (in any case)")
	fl.StringVar(&rf.standards, "standards", "", standardsFlagHelp)
	fl.BoolVar(&rf.curvatureRefraction, "curvature-refraction", false, "correct every reading for curvature and refraction (k = 0.14)")
	fl.BoolVar(&rf.allowCondition, "allow-condition", false, "hold marks from the register whose latest condition report is disturbed, destroyed or not found (needs --condition-reason)")
	fl.StringVar(&rf.conditionReason, "condition-reason", "", "with --allow-condition: why those marks may be held")
}

// parse reads the held heights (typed, and the marks held at their
// register heights) and the class ("" keeps the book's). When the
// deprecated --hold MARK=HEIGHT is given, a one-line notice on ios.ErrOut
// says so.
func (rf *reductionFlags) parse(cmd *cobra.Command, ios *IOStreams) (map[string]float64, []string, standards.Class, error) {
	for _, h := range rf.holds {
		if strings.Contains(h, "=") {
			fmt.Fprintf(ios.ErrOut, "%s: --hold MARK=HEIGHT is deprecated here and will be removed: use --held-height MARK=HEIGHT (--hold MARK, without a height, holds the mark at its height in the register)\n", cmd.CommandPath())
			break
		}
	}
	hold, current, err := parseHeldHeights(map[string][]string{"held-height": rf.heldHeights, "hold": rf.holds})
	if err != nil {
		return nil, nil, "", err
	}
	reason := strings.TrimSpace(rf.conditionReason)
	switch {
	case rf.allowCondition && reason == "":
		return nil, nil, "", badInput("--allow-condition needs --condition-reason saying why marks in doubt may be held")
	case !rf.allowCondition && reason != "":
		return nil, nil, "", badInput("--condition-reason goes with --allow-condition")
	case rf.allowCondition && len(current) == 0:
		return nil, nil, "", badInput("--allow-condition goes with --hold MARK: only marks held at their register height have their condition checked")
	}
	var class standards.Class
	if rf.class != "" {
		if class, err = standards.ParseClass(rf.class); err != nil {
			return nil, nil, "", badInput("--class: %v", err)
		}
	}
	return hold, current, class, nil
}

// parseHeldHeights reads MARK=HEIGHT values and MARK alone, given by flag
// name: hold has the typed heights, current the marks to hold at their
// register height, in the order given. A mark may be held once in all.
func parseHeldHeights(byFlag map[string][]string) (hold map[string]float64, current []string, err error) {
	seen := map[string]bool{}
	for _, name := range []string{"held-height", "hold"} {
		for _, h := range byFlag[name] {
			mark, value, ok := strings.Cut(h, "=")
			mark, value = strings.TrimSpace(mark), strings.TrimSpace(value)
			if mark == "" || ok && value == "" {
				return nil, nil, badInput("--%s %q: want MARK=HEIGHT, or MARK for its height in the register", name, h)
			}
			if seen[mark] {
				return nil, nil, badInput("--%s %q: %s is held twice", name, h, mark)
			}
			seen[mark] = true
			if !ok {
				current = append(current, mark)
				continue
			}
			if err := units.CheckDigits(value); err != nil {
				return nil, nil, badInput("--%s %q: %v", name, units.Brief(h), err)
			}
			v, err := strconv.ParseFloat(value, 64)
			if err != nil || v != v || v > 1e6 || v < -1e6 {
				return nil, nil, badInput("--%s %q: height %q is not a number", name, h, value)
			}
			if hold == nil {
				hold = map[string]float64{}
			}
			hold[mark] = v
		}
	}
	return hold, current, nil
}

// reduceBook reduces a level book with held heights typed in the book's
// unit and held from the register. Every error is bad input (exit status
// 2).
func reduceBook(book *levelbook.Book, hold map[string]float64, held []register.HeldHeight, published map[string]register.PublishedHeight, class standards.Class, prof *standards.Profile, cr bool) (*reduce.Result, error) {
	var holdM map[string]float64
	if len(hold)+len(held) > 0 {
		var err error
		if holdM, err = register.TypedHoldM(book.Meta.Unit, hold, len(held)); err != nil {
			return nil, err
		}
		for _, h := range held {
			holdM[h.Designation] = h.ValueM
		}
	}
	var pubM map[string]float64
	for name, p := range published {
		if _, typed := hold[name]; !typed {
			if pubM == nil {
				pubM = map[string]float64{}
			}
			pubM[name] = p.ValueM
		}
	}
	r, err := reduce.Reduce(book, reduce.Options{Hold: holdM, Published: pubM, Class: class, Standards: prof, CurvatureRefraction: cr})
	if err != nil {
		return nil, badInput("%v", err)
	}
	return r, nil
}

// runCheckJSON is `run check -o json`: the whole reduction, whether it
// passed, and where each held height came from.
type runCheckJSON struct {
	*reduce.Result
	Passed bool          `json:"passed"`
	Held   []runHeldJSON `json:"held"`
	// Warnings are the register's warnings about the book (BookWarnings).
	Warnings []string `json:"warnings"`
}

// runCheckRun reduces the book, prints the report and reports failed
// checks through the exit status. The register is opened only to hold
// marks at their register heights.
func runCheckRun(opts *runCheckOptions) error {
	book, err := levelbook.ReadFile(opts.BookPath)
	if err != nil {
		return err // a *levelbook.Error: exit status 2
	}
	if err := register.CheckBookDate(book, time.Time{}); err != nil {
		return err
	}
	var held []register.HeldHeight
	var published map[string]register.PublishedHeight
	var warnings []string
	if len(opts.HoldCurrent) > 0 {
		for _, name := range opts.HoldCurrent {
			if err := reduce.CheckHold(book, name); err != nil {
				return badInput("--hold: %v", err)
			}
		}
		reg, err := openRegister(opts.ctx, opts.f)
		if err != nil {
			return err
		}
		if warnings, err = reg.BookWarnings(opts.ctx, book); err != nil {
			return err
		}
		if held, err = reg.HeldHeights(opts.ctx, register.HeldHeightsParams{Book: book, Marks: opts.HoldCurrent,
			AllowCondition: opts.AllowCondition, ConditionReason: opts.ConditionReason}); err != nil {
			return err
		}
		if published, err = reg.PublishedHeights(opts.ctx, book, held, opts.HoldCurrent); err != nil {
			return err
		}
	} else if src := opts.f.Source(); !src.Embedded {
		// A register named (--db, CAIRN_DATABASE_URL, PG* variables) is
		// consulted for what it knows of the book's marks, their
		// published heights too (check connections); one that cannot be
		// reached is said, and the check goes on without it.
		if reg, err := openRegister(opts.ctx, opts.f); err != nil {
			warnings = append(warnings, fmt.Sprintf("NOTE: the register (%s) was not consulted (%v): marks the book takes as turning points, a date before a mark's earliest record, and the published heights to check into, are not looked for", src.From, err))
		} else if warnings, err = reg.BookWarnings(opts.ctx, book); err != nil {
			return err
		} else if published, err = reg.PublishedHeights(opts.ctx, book, nil, nil); err != nil {
			return err
		}
	}
	prof, err := resolveStandards(opts.Standards, book.Meta.Standards, filepath.Dir(opts.BookPath))
	if err != nil {
		return err
	}
	r, err := reduceBook(book, opts.Hold, held, published, opts.Class, prof, opts.CurvatureRefraction)
	if err != nil {
		return err
	}
	hj := checkHeldJSON(r, opts.Hold, held, opts.ConditionReason)
	switch opts.Format {
	case FormatJSON, FormatCSV:
		for _, w := range warnings {
			warnLoudly(opts.IO, w)
		}
	}
	switch opts.Format {
	case FormatJSON:
		err = writeJSON(opts.IO.Out, runCheckJSON{r, r.Passed(), hj, nonNil(warnings)})
	case FormatCSV:
		err = writeTable(opts.IO, FormatCSV, notesTable(r))
	default:
		// The report's warnings are in it, repeated on ErrOut when Out is
		// not a terminal.
		doubt := false
		for _, h := range held {
			if h.InDoubt {
				warnInReport(opts.IO, register.Warning(store.Mark{Designation: h.Designation, Latest: h.Condition}))
				doubt = true
			}
		}
		for _, w := range warnings {
			warnInReport(opts.IO, w)
			doubt = true
		}
		if doubt {
			fmt.Fprintln(opts.IO.Out)
		}
		err = writeReport(opts.IO.Out, r, heldNotes(hj))
	}
	if err != nil {
		return err
	}
	if !r.Passed() {
		return checksFailed{len(r.Failures)}
	}
	return nil
}

// numbers formats values of a reduction in its unit.
type numbers struct {
	u   units.Unit
	dec int
}

func numbersFor(r *reduce.Result) numbers { return numbers{r.Unit, reduce.Decimals(r.Unit)} }

// h formats a reading, height or difference (metres in) in the run's unit.
func (n numbers) h(m float64) string { return units.FormatIn(m, n.u, n.dec) }

// d formats a distance.
func (n numbers) d(m float64) string { return units.FormatIn(m, n.u, reduce.DistanceDecimals) }

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
	t := Table{Headers: notesHeaders(r)}
	n := numbersFor(r)
	rowsOf(r)(func(row reduce.Row, st *reduce.Setup) bool {
		t.AddRow(noteCells(r, n, row, st)...)
		return true
	})
	return t
}

// notesHeaders are the headers of the reduced notes of r.
func notesHeaders(r *reduce.Result) []string {
	u := string(r.Unit)
	h := []string{"LINE", "POINT", "BS (" + u + ")", "IS (" + u + ")", "FS (" + u + ")", "DIST (" + u + ")",
		"HI (" + u + ")", "HEIGHT (" + u + ")", "IMBAL (" + u + ")", "ACC IMBAL (" + u + ")", "NOTE"}
	if r.CurvatureRefraction {
		h = append(h[:len(h)-1], "C&R ("+u+")", "NOTE")
	}
	return h
}

// noteCells are the cells of row (st the setup a foresight closes) in the
// reduced notes of r.
func noteCells(r *reduce.Result, n numbers, row reduce.Row, st *reduce.Setup) []string {
	cells := make([]string, 0, 12)
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
	if st != nil && row.Sight == levelbook.Foresight && st.HasDistances {
		imb, acc = n.d(st.ImbalanceM), n.d(st.AccumulatedImbalanceM)
	}
	cells = append(cells, strconv.Itoa(row.Line), row.Point, bs, is, fs, dist, n.h(row.HeightOfInstrumentM), n.h(row.HeightM), imb, acc)
	if r.CurvatureRefraction {
		cells = append(cells, n.h(row.CorrectionM))
	}
	return append(cells, row.Note)
}

// noteRows calls each with every row of a reduction, in field order, and
// the setup a foresight closes (nil for other sightings), until each
// returns false.
type noteRows func(each func(reduce.Row, *reduce.Setup) bool) error

// rowsOf gives the rows r holds (a reduction of the whole book).
func rowsOf(r *reduce.Result) noteRows {
	return func(each func(reduce.Row, *reduce.Setup) bool) error {
		for _, row := range r.Rows {
			var st *reduce.Setup
			if row.Sight == levelbook.Foresight {
				st = &r.Setups[row.Setup-1]
			}
			if !each(row, st) {
				break
			}
		}
		return nil
	}
}

// rowsScanned gives the rows of r, which holds none (a book reduced a
// sighting at a time), by reducing its book's bytes, data, again.
func rowsScanned(r *reduce.Result, data []byte) noteRows {
	return func(each func(reduce.Row, *reduce.Setup) bool) error {
		sc, err := r.Book.Rescan(data)
		if err != nil {
			return err
		}
		err = r.ScanRows(r.Book, func(yield func(*levelbook.Sighting) bool) {
			for sc.Next() && yield(sc.Sighting()) {
			}
		}, each)
		if err == nil {
			err = sc.Err()
		}
		return err
	}
}

// writeNotes writes the reduced notes of r a row at a time, laid out as
// tabwriter lays out the report's other tables (each column but the last
// as wide as its widest cell in runes and two spaces more, trailing spaces
// trimmed), from the widths found in a first pass over the rows: the rows
// are never held.
func writeNotes(w io.Writer, r *reduce.Result, rows noteRows) error {
	n := numbersFor(r)
	headers := notesHeaders(r)
	widths := make([]int, len(headers))
	measure := func(cells []string) {
		for i, c := range cells[:len(cells)-1] {
			widths[i] = max(widths[i], utf8.RuneCountInString(c))
		}
	}
	measure(headers)
	if err := rows(func(row reduce.Row, st *reduce.Setup) bool {
		measure(noteCells(r, n, row, st))
		return true
	}); err != nil {
		return err
	}
	bw := bufio.NewWriterSize(w, 64<<10)
	var line []byte
	write := func(cells []string) error {
		line = line[:0]
		for i, c := range cells[:len(cells)-1] {
			line = append(line, c...)
			for pad := widths[i] + 2 - utf8.RuneCountInString(c); pad > 0; pad-- {
				line = append(line, ' ')
			}
		}
		line = append(line, cells[len(cells)-1]...)
		line = append(bytes.TrimRight(line, " "), '\n')
		_, err := bw.Write(line)
		return err
	}
	if err := write(headers); err != nil {
		return err
	}
	var werr error
	if err := rows(func(row reduce.Row, st *reduce.Setup) bool {
		werr = write(noteCells(r, n, row, st))
		return werr == nil
	}); err != nil {
		return err
	}
	if werr != nil {
		return werr
	}
	return bw.Flush()
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

// notJudged says why a closure of r has no allowable: the run names no
// class, or it does and the closure has no length to judge it over.
func notJudged(r *reduce.Result, hasLength bool) string {
	switch {
	case r.Tolerances != nil:
		return "not judged (no lengths)"
	case !hasLength:
		return "not judged (no class, no lengths)"
	}
	return "not judged (no class)"
}

func misclosureTable(r *reduce.Result) Table {
	n := numbersFor(r)
	u := string(r.Unit)
	t := Table{Headers: []string{"KIND", "FROM", "TO", "LINES", "SETUPS", "LENGTH (" + u + ")", "OBSERVED (" + u + ")", "KNOWN (" + u + ")", "MISCLOSURE (" + u + ")", "ALLOWABLE (" + u + ")", "RESULT"}}
	for _, m := range r.Misclosures {
		length, allow, result := "-", "-", notJudged(r, m.HasLength && m.LengthM > 0)
		if m.HasLength {
			length = n.d(m.LengthM)
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

// doubleRunTable lists the sections levelled both ways with their
// closures (forward + backward) against the section tolerance.
func doubleRunTable(r *reduce.Result) Table {
	n := numbersFor(r)
	u := string(r.Unit)
	t := Table{Headers: []string{"FROM", "TO", "FORWARD", "BACKWARD", "FORWARD (" + u + ")", "BACKWARD (" + u + ")", "CLOSURE (" + u + ")", "ONE WAY (" + u + ")", "ALLOWABLE (" + u + ")", "RESULT"}}
	for _, d := range r.DoubleRuns {
		oneWay, allow, result := "-", "-", "not judged (no class)"
		if d.HasLength {
			oneWay = n.d(d.OneWayM)
		} else {
			result = "not judged (no length)"
		}
		if d.HasAllowable {
			allow, result = n.h(d.AllowableM), "FAIL"
			if d.Pass {
				result = "pass"
			}
		}
		back := fmt.Sprintf("section %d, lines %d-%d", d.Backward, d.BackwardLines[0], d.BackwardLines[1])
		if d.OtherRun != 0 {
			back = fmt.Sprintf("run %d section %d, lines %d-%d", d.OtherRun, d.Backward, d.BackwardLines[0], d.BackwardLines[1])
		}
		t.AddRow(d.From, d.To, fmt.Sprintf("section %d, lines %d-%d", d.Forward, d.ForwardLines[0], d.ForwardLines[1]), back,
			n.signed(d.ForwardM), n.signed(d.BackwardM), n.signed(d.ClosureM), oneWay, allow, result)
	}
	return t
}

// connectionTable lists the check connections: each two marks of known
// height the run ties to.
func connectionTable(r *reduce.Result) Table {
	n := numbersFor(r)
	u := string(r.Unit)
	t := Table{Headers: []string{"FROM", "TO", "LINES", "LENGTH (" + u + ")", "OBSERVED (" + u + ")", "KNOWN (" + u + ")", "DIFFERENCE (" + u + ")", "ALLOWABLE (" + u + ")", "RESULT"}}
	for _, c := range r.Connections {
		length, allow, result := "-", "-", "not judged (no class)"
		if c.HasLength {
			length = n.d(c.LengthM)
		} else {
			result = "not judged (no length)"
		}
		if c.HasAllowable {
			allow, result = n.h(c.AllowableM), "FAIL"
			if c.Pass {
				result = "pass"
			}
		}
		if c.AsClosure {
			result = "as the line's misclosure"
		}
		t.AddRow(c.From, c.To, fmt.Sprintf("%d-%d", c.FromLine, c.ToLine), length, n.signed(c.ObservedM), n.signed(c.KnownM), n.signed(c.DifferenceM), allow, result)
	}
	return t
}

// spotTable lists the spot heights.
func spotTable(r *reduce.Result) Table {
	n := numbersFor(r)
	t := Table{Headers: []string{"LINE", "POINT", "SETUP", "HEIGHT (" + string(r.Unit) + ")", "NOTE"}}
	for _, s := range r.SpotHeights {
		t.AddRow(strconv.Itoa(s.Line), s.Point, strconv.Itoa(s.Setup), n.h(s.HeightM), s.Note)
	}
	return t
}

// heldSightsTable lists the intermediate sights on held marks with their
// comparison.
func heldSightsTable(r *reduce.Result) Table {
	n := numbersFor(r)
	u := string(r.Unit)
	t := Table{Headers: []string{"LINE", "MARK", "HEIGHT (" + u + ")", "HELD (" + u + ")", "DIFFERENCE (" + u + ")", "LENGTH (" + u + ")", "ALLOWABLE (" + u + ")", "RESULT"}}
	for _, h := range r.HeldSights {
		length, allow, result := "-", "-", notJudged(r, h.HasLength && h.LengthM > 0)
		if h.HasLength {
			length = n.d(h.LengthM)
		}
		if h.HasAllowable {
			allow, result = n.h(h.AllowableM), "FAIL"
			if h.Pass {
				result = "pass"
			}
		}
		t.AddRow(strconv.Itoa(h.Line), h.Point, n.h(h.HeightM), n.h(h.HeldM), n.signed(h.DifferenceM), length, allow, result)
	}
	return t
}

func checksTable(r *reduce.Result) Table {
	t := Table{Headers: []string{"CHECK", "CHECKED", "FAILED", "TOLERANCE", "SOURCE"}}
	for _, c := range r.Checks {
		if c.NotApplicable {
			t.AddRow(string(c.Kind), "-", "-", "not applicable: "+c.NotMade, c.Source)
			continue
		}
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
// notes, spot heights, sections, misclosures, intermediate sights on held
// marks, checks and failures, each aligned under its headers, the summary
// of the checks and the caution. heldFrom says where held heights came
// from, by mark (none for typed heights).
func writeReport(w io.Writer, r *reduce.Result, heldFrom map[string]string) error {
	return writeReportOf(w, r, rowsOf(r), heldFrom)
}

// writeReportOf is writeReport with the reduced notes from rows (the rows
// of r, or of its book reduced again), which it reads twice and never
// holds.
func writeReportOf(w io.Writer, r *reduce.Result, rows noteRows, heldFrom map[string]string) error {
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
	standardsReport(w, r)
	kind := "line"
	if r.Loop {
		kind = "loop"
	}
	setups := 0
	for _, s := range r.Sections {
		setups += s.Setups
	}
	fmt.Fprintf(w, "A %s from %s to %s: %d setups, %d sections\n", kind, r.Start, r.End, setups, len(r.Sections))
	if r.Relative {
		fmt.Fprintf(w, "No mark held: heights are relative to %s = %s %s\n", r.Start, n.h(0), r.Unit)
	} else {
		// The held marks in the order the book first sights them.
		var held []string
		seen := map[string]bool{}
		if err := rows(func(row reduce.Row, _ *reduce.Setup) bool {
			if v, ok := r.Held[row.Point]; ok && !seen[row.Point] {
				seen[row.Point] = true
				h := fmt.Sprintf("%s = %s", row.Point, n.h(v))
				if from := heldFrom[row.Point]; from != "" {
					h += " (" + from + ")"
				}
				held = append(held, h)
			}
			return len(seen) < len(r.Held)
		}); err != nil {
			return err
		}
		fmt.Fprintf(w, "Held (%s): %s\n", r.Unit, strings.Join(held, ", "))
	}
	parts := []struct {
		title string
		t     Table
	}{
		{"Reduced notes", Table{}},
		{"Sections", sectionsTable(r)},
		{"Misclosure", misclosureTable(r)},
		{"Checks", checksTable(r)},
	}
	if len(r.Misclosures) == 0 {
		parts[2].title = "Misclosure: none (the run does not close)"
	}
	if len(r.SpotHeights) > 0 {
		parts = slices.Insert(parts, 1, struct {
			title string
			t     Table
		}{"Spot heights (not marks)", spotTable(r)})
	}
	if len(r.DoubleRuns) > 0 {
		parts = slices.Insert(parts, len(parts)-1, struct {
			title string
			t     Table
		}{"Double-run sections (forward + backward)", doubleRunTable(r)})
	}
	if len(r.Connections) > 0 {
		parts = slices.Insert(parts, len(parts)-1, struct {
			title string
			t     Table
		}{"Check connections (marks of known height)", connectionTable(r)})
	}
	if len(r.HeldSights) > 0 {
		parts = slices.Insert(parts, len(parts)-1, struct {
			title string
			t     Table
		}{"Intermediate sights on held marks", heldSightsTable(r)})
	}
	if len(r.Failures) > 0 {
		parts = append(parts, struct {
			title string
			t     Table
		}{"Failed checks", failuresTable(r)})
	}
	for i, p := range parts {
		fmt.Fprintf(w, "\n%s\n", p.title)
		if i == 0 {
			if err := writeNotes(w, r, rows); err != nil {
				return err
			}
			continue
		}
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
	fmt.Fprintln(w, r.Summary)
	_, err := fmt.Fprintln(w, "Caution: review by a licensed surveyor is needed before these heights are used; check into two marks, verify each mark's condition, and follow local codes and regulations.")
	return err
}

// classNames lists the accuracy classes as the register prints them, for
// help texts.
func classNames() string {
	names := make([]string, len(standards.Classes))
	for i, c := range standards.Classes {
		names[i] = c.String()
	}
	return strings.Join(names, ", ")
}

// writeJSONWithRows writes v as writeJSON does, where v holds r with its
// Rows and Setups left nil (r a reduction a sighting at a time): the
// reduced notes and the setups are written in their places from rows, one
// at a time, laid out as the encoder lays out the rest, so that the
// output is byte for byte writeJSON's of v holding them all.
func writeJSONWithRows(w io.Writer, v any, r *reduce.Result, rows noteRows) error {
	var head bytes.Buffer
	if err := writeJSON(&head, v); err != nil {
		return err
	}
	text := head.Bytes()
	bw := bufio.NewWriterSize(w, 64<<10)
	for _, key := range []string{"rows", "setups"} {
		marker := []byte(`"` + key + `": null`)
		at := bytes.Index(text, marker)
		if at < 0 || bytes.Count(text, marker) != 1 {
			return fmt.Errorf("the report has %d places for its %s", bytes.Count(text, marker), key)
		}
		lineStart := bytes.LastIndexByte(text[:at], '\n') + 1
		ind := string(text[lineStart:at])
		bw.Write(text[:at+len(marker)-len("null")])
		bw.WriteByte('[')
		n := 0
		var merr error
		if err := rows(func(row reduce.Row, st *reduce.Setup) bool {
			var elem any = row
			if key == "setups" {
				if st == nil {
					return true
				}
				elem = st
			}
			b, err := json.MarshalIndent(elem, ind+"  ", "  ")
			if err != nil {
				merr = err
				return false
			}
			if n > 0 {
				bw.WriteByte(',')
			}
			bw.WriteString("\n" + ind + "  ")
			bw.Write(b)
			n++
			return true
		}); err != nil {
			return err
		}
		if merr != nil {
			return merr
		}
		if n > 0 {
			bw.WriteString("\n" + ind)
		}
		bw.WriteByte(']')
		text = text[at+len(marker):]
	}
	bw.Write(text)
	return bw.Flush()
}
