// Package registertest is the one set of fixtures of cairn's tests that
// need a register: a bundle made by Setup (a fresh test database from
// pgtest, the register on it and a context), row factories, and one row
// counter over every table of the register. Only tests import it.
//
// Each factory takes an options struct whose zero value gives sensible
// invented defaults (Tallis County, Orrin Bay, the Mere River; marks
// TC-0412, TC-0413, ...), so that a test names only what it cares about:
//
//	b := registertest.Setup(t)
//	b.Mark(t, registertest.MarkOpts{Designation: "TC-0415"})
//	b.Height(t, registertest.HeightOpts{Designation: "TC-0415", Value: "10.9012"})
//	before := b.Counts(t)
//	... // something refused
//	b.AssertNothingWritten(t, before)
//
// The factories go through the register's use cases (package register),
// so they build rows the way users do; none writes SQL of its own. Any
// failure fails the test at once.
//
// Import cycles: this package imports package register, so a test file in
// package register itself (an internal test) cannot import it. The tests
// of package register that use these fixtures are therefore external
// tests, in package register_test. Those that were internal tests before
// import register with a dot (import . "cairn/internal/register"), the
// form Go's code review comments keep for exactly this case (a test that
// a cycle keeps out of its package): their bodies name the register's
// identifiers as before, unqualified. What such a test needs that is not
// exported, package register gives it in export_test.go.
//
// Adjustments are made in one place, Bundle.AdjustParams, which turns
// AdjustmentOpts into the register's AdjustParams; tests that test
// adjustment itself still call Register.Adjust with parameters of their
// own.
package registertest

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"
	"time"

	"cairn/internal/adjust"
	"cairn/internal/booktest"
	"cairn/internal/pgtest"
	"cairn/internal/register"
	"cairn/internal/store"
)

// Bundle is what a test of the register works with.
type Bundle struct {
	Ctx context.Context
	DB  *pgtest.DB
	Reg *register.Register

	// Runs are the runs recorded through Run and WorkedCircuit, in order:
	// the runs Adjustment adjusts when its options name none.
	Runs []int64
	// Held are the marks Adjustment holds when its options name none;
	// WorkedCircuit adds its held mark, BM1.
	Held []string

	datum  string // code of the first datum made through the bundle
	marks  int    // default designations handed out
	placed int    // marks made through Mark
	books  int    // default books handed out
}

// Setup gives a fresh, migrated register of its own to tb.
func Setup(tb testing.TB) *Bundle {
	tb.Helper()
	return On(tb, pgtest.New(tb))
}

// On gives a bundle on a database the test already has (one it made
// itself, or that another test harness made).
func On(tb testing.TB, db *pgtest.DB) *Bundle {
	tb.Helper()
	return &Bundle{Ctx: context.Background(), DB: db, Reg: register.New(db.Pool)}
}

// By is who the factories say wrote the rows, unless told otherwise.
const By = "test"

func or(s, def string) string {
	if s == "" {
		return def
	}
	return s
}

// DatumOpts are the fields of a datum; the zero value gives NAVD88.
type DatumOpts struct {
	Code string // default NAVD88
	Name string // default "North American Vertical Datum of 1988" for NAVD88, else "Datum CODE (invented)"
	Note string
	By   string // default By
}

// Datum adds a datum through DatumAdd. The first datum made through the
// bundle is the one Height and WorkedCircuit use when told none.
func (b *Bundle) Datum(tb testing.TB, o DatumOpts) store.Datum {
	tb.Helper()
	o.Code = or(o.Code, "NAVD88")
	if o.Name == "" {
		o.Name = "Datum " + o.Code + " (invented)"
		if o.Code == "NAVD88" {
			o.Name = "North American Vertical Datum of 1988"
		}
	}
	d, err := b.Reg.DatumAdd(b.Ctx, register.DatumAddParams{Code: o.Code, Name: o.Name, Note: o.Note, By: or(o.By, By)})
	if err != nil {
		tb.Fatalf("registertest: datum %s: %v", o.Code, err)
	}
	if b.datum == "" {
		b.datum = d.Code
	}
	return d
}

// defaultDatum is the first datum made through the bundle, NAVD88 made now
// if there is none.
func (b *Bundle) defaultDatum(tb testing.TB) string {
	tb.Helper()
	if b.datum == "" {
		b.Datum(tb, DatumOpts{})
	}
	return b.datum
}

// MarkOpts are the fields of a mark. The zero value gives the next of
// TC-0412, TC-0413, ..., a bronze disk in a concrete post in Tallis County;
// the first mark made through the bundle is at 41.62° N 97.95° W and each
// next one 0.01° (1.1 km) further north.
type MarkOpts struct {
	Designation string
	Type        string // default "bronze disk"
	Setting     string // default "concrete post"
	Stamping    string // default the designation
	Directions  string // default "Mere River road, Tallis County (invented)"
	// Lat and Lon give the position; both nil means the default one, and
	// NoPosition a mark with none.
	Lat, Lon   *float64
	NoPosition bool
	By         string // default By
}

// Mark adds a mark through MarkAdd.
func (b *Bundle) Mark(tb testing.TB, o MarkOpts) store.Mark {
	tb.Helper()
	if o.Designation == "" {
		o.Designation = fmt.Sprintf("TC-%04d", 412+b.marks)
		b.marks++
	}
	k := b.placed
	b.placed++
	if o.Lat == nil && o.Lon == nil && !o.NoPosition {
		lat, lon := 41.62+0.01*float64(k), -97.95
		o.Lat, o.Lon = &lat, &lon
	}
	if o.NoPosition {
		o.Lat, o.Lon = nil, nil
	}
	m, err := b.Reg.MarkAdd(b.Ctx, register.MarkAddParams{Designation: o.Designation, Type: or(o.Type, "bronze disk"),
		Setting: or(o.Setting, "concrete post"), Stamping: or(o.Stamping, o.Designation),
		Directions: or(o.Directions, "Mere River road, Tallis County (invented)"), Lat: o.Lat, Lon: o.Lon, CreatedBy: or(o.By, By)})
	if err != nil {
		tb.Fatalf("registertest: mark %s: %v", o.Designation, err)
	}
	return m
}

// Marks adds marks with these designations and no position, the way a
// recording of a book that names them expects to find them.
func (b *Bundle) Marks(tb testing.TB, designations ...string) {
	tb.Helper()
	for _, d := range designations {
		b.Mark(tb, MarkOpts{Designation: d, NoPosition: true})
	}
}

// ConditionOpts are the fields of a condition report. The zero value
// reports a new default mark good on 1 May 2024.
type ConditionOpts struct {
	Designation string    // default a new mark (Mark with zero options)
	Condition   string    // default "good"
	Note        string    // default none
	ObservedOn  time.Time // default 2024-05-01
	By          string    // default By
}

// Condition reports a mark's condition through MarkCondition.
func (b *Bundle) Condition(tb testing.TB, o ConditionOpts) store.Condition {
	tb.Helper()
	if o.Designation == "" {
		o.Designation = b.Mark(tb, MarkOpts{}).Designation
	}
	if o.ObservedOn.IsZero() {
		o.ObservedOn = time.Date(2024, 5, 1, 0, 0, 0, 0, time.UTC)
	}
	c, err := b.Reg.MarkCondition(b.Ctx, register.MarkConditionParams{Designation: o.Designation, Condition: or(o.Condition, "good"),
		Note: o.Note, ObservedOn: o.ObservedOn, RecordedBy: or(o.By, By)})
	if err != nil {
		tb.Fatalf("registertest: condition of %s: %v", o.Designation, err)
	}
	return c
}

// HeightOpts are the fields of a height version. The zero value gives an
// outside height of 10.000 m on a new default mark and the bundle's datum.
type HeightOpts struct {
	Designation string // default a new mark (Mark with zero options)
	Datum       string // default the first datum made through the bundle (NAVD88, made if none)
	Value       string // default "10.000"; ignored for a withdrawal
	Unit        string // default "m"
	Decimals    *int
	Class       string // default none
	Kind        string // default register.KindAuthority
	// Source cites the publication; default "Tallis County control
	// sheet 1 (invented citation)" for an outside height.
	Source string
	Reason string // default "outside control"
	By     string // default By
	// InForceFrom is when the version came in force; default the time of
	// the call (so that each version recorded is the one in force now).
	InForceFrom *time.Time
}

// Height records a version of a mark's height through HeightSet.
func (b *Bundle) Height(tb testing.TB, o HeightOpts) store.Height {
	tb.Helper()
	if o.Designation == "" {
		o.Designation = b.Mark(tb, MarkOpts{}).Designation
	}
	if o.Datum == "" {
		o.Datum = b.defaultDatum(tb)
	}
	kind := or(o.Kind, register.KindAuthority)
	if kind == register.KindWithdrawal {
		o.Value, o.Unit = "", ""
	} else {
		o.Value, o.Unit = or(o.Value, "10.000"), or(o.Unit, "m")
	}
	if kind == register.KindAuthority {
		o.Source = or(o.Source, "Tallis County control sheet 1 (invented citation)")
	}
	if o.InForceFrom == nil && kind != register.KindAdjustment {
		now := time.Now().Truncate(time.Microsecond)
		o.InForceFrom = &now
	}
	res, err := b.Reg.HeightSet(b.Ctx, register.HeightSetParams{Designation: o.Designation, Datum: o.Datum, Value: o.Value,
		Unit: o.Unit, Decimals: o.Decimals, Class: o.Class, Kind: o.Kind, Source: o.Source,
		Reason: or(o.Reason, "outside control"), RecordedBy: or(o.By, By), InForceFrom: o.InForceFrom})
	if err != nil {
		tb.Fatalf("registertest: height of %s: %v", o.Designation, err)
	}
	return res.Version
}

// RunOpts are the fields of a recording. The zero value records a
// generated loop (booktest.Loop, 12 setups, a mark every 4: TC-1001 to
// TC-1003), different bytes each time, creating the marks it names.
type RunOpts struct {
	// Book is the book's bytes; nil means a generated loop, recorded with
	// NewMarks.
	Book []byte
	// Path names the book; default "orrin-bay-N.csv".
	Path string
	// NewMarks, AcceptFailedChecks, Reason and Hold are those of
	// register.RecordParams.
	NewMarks           bool
	AcceptFailedChecks bool
	Reason             string
	Hold               map[string]float64
	By                 string // default By
}

// Run records a book through Record and adds the run to b.Runs.
func (b *Bundle) Run(tb testing.TB, o RunOpts) *register.Recorded {
	tb.Helper()
	b.books++
	if o.Book == nil {
		o.Book = booktest.Loop{Name: fmt.Sprintf("Orrin Bay loop %d", b.books), Setups: 12, MarkEvery: 4, Seed: uint64(b.books)}.Book()
		o.NewMarks = true
	}
	rec, err := b.Reg.Record(b.Ctx, register.RecordParams{Path: or(o.Path, fmt.Sprintf("orrin-bay-%d.csv", b.books)), Book: o.Book,
		By: or(o.By, By), NewMarks: o.NewMarks, AcceptFailedChecks: o.AcceptFailedChecks, Reason: o.Reason, Hold: o.Hold})
	if err != nil {
		tb.Fatalf("registertest: record %s: %v", or(o.Path, "a generated loop"), err)
	}
	b.Runs = append(b.Runs, rec.Run.ID)
	return rec
}

// AdjustmentOpts are the fields of an adjustment. The zero value adjusts
// every run of b.Runs by the proportional method, holding the marks of
// b.Held.
type AdjustmentOpts struct {
	Runs []int64  // default b.Runs
	Hold []string // designations held fixed; default b.Held
	// SigmaMM holds some of the marks of Hold weighted instead (least
	// squares), with these standard deviations in millimetres.
	SigmaMM map[string]float64
	Method  adjust.Method // default the register's (proportional)
	DryRun  bool
	By      string // default By
	// Edit, if set, changes the parameters last, for what the options do
	// not name (Marks, Near, LeastSquares...).
	Edit func(*register.AdjustParams)
}

// AdjustParams turns o into the register's parameters: the one place the
// fixtures say how marks are held.
func (b *Bundle) AdjustParams(o AdjustmentOpts) register.AdjustParams {
	runs, hold := o.Runs, o.Hold
	if runs == nil {
		runs = slices.Clone(b.Runs)
	}
	if hold == nil {
		hold = b.Held
	}
	held := register.HoldFixed(hold...)
	for i, d := range hold {
		held[i].SigmaM = o.SigmaMM[d] / 1000
	}
	p := register.AdjustParams{RunIDs: runs, Hold: held, Method: o.Method, DryRun: o.DryRun, By: or(o.By, By)}
	if o.Edit != nil {
		o.Edit(&p)
	}
	return p
}

// Adjustment makes a draft adjustment (or, with DryRun, only computes
// one) through Adjust.
func (b *Bundle) Adjustment(tb testing.TB, o AdjustmentOpts) *register.AdjustmentView {
	tb.Helper()
	p := b.AdjustParams(o)
	v, err := b.Reg.Adjust(b.Ctx, p)
	if err != nil {
		tb.Fatalf("registertest: adjust runs %v holding %v: %v", p.RunIDs, p.Hold, err)
	}
	return v
}

// PublicationOpts are the fields of a publication.
type PublicationOpts struct {
	Reason string // default "reviewed"
	By     string // default By
}

// Publication publishes draft adjustment id through Publish.
func (b *Bundle) Publication(tb testing.TB, id int64, o PublicationOpts) *register.Published {
	tb.Helper()
	pub, err := b.Reg.Publish(b.Ctx, register.PublishParams{AdjustmentID: id, Reason: or(o.Reason, "reviewed"), By: or(o.By, By)})
	if err != nil {
		tb.Fatalf("registertest: publish adjustment %d: %v", id, err)
	}
	return pub
}

// WorkedCircuitOpts tell WorkedCircuit who set the held height and why.
type WorkedCircuitOpts struct {
	// Copies of the book to record, each a run; default 1.
	Copies int
	Source string // the held height's citation; default "Outside control, sheet 1 (invented citation)"
	Reason string // the held height's reason; default "outside control"
	Class  string // the held height's class; default none
	By     string // default By
}

// WorkedCircuit adds the worked circuit of testdata/adjust: the bundle's
// datum (NAVD88 if none), marks BM1 to BM6 (no position), BM1's outside
// height 728.730 m, and the book recorded as runs (WorkedBook); it adds BM1
// to b.Held and returns the runs.
func (b *Bundle) WorkedCircuit(tb testing.TB, o WorkedCircuitOpts) []int64 {
	tb.Helper()
	for i := 1; i <= 6; i++ {
		b.Mark(tb, MarkOpts{Designation: fmt.Sprintf("BM%d", i), NoPosition: true, By: o.By})
	}
	b.Height(tb, HeightOpts{Designation: "BM1", Value: "728.730", Unit: "m", Class: o.Class,
		Source: or(o.Source, "Outside control, sheet 1 (invented citation)"), Reason: or(o.Reason, "outside control"), By: o.By})
	b.Held = append(b.Held, "BM1")
	var runs []int64
	for c := 1; c <= max(o.Copies, 1); c++ {
		runs = append(runs, b.WorkedCopy(tb, c, o.By))
	}
	return runs
}

// WorkedCopy records copy c of the worked circuit's book (WorkedBook) as a
// run, by by (default By), and returns it.
func (b *Bundle) WorkedCopy(tb testing.TB, c int, by string) int64 {
	tb.Helper()
	return b.Run(tb, RunOpts{Path: "worked-circuit.csv", Book: WorkedBook(tb, c), By: by}).Run.ID
}

// WorkedBook returns testdata/adjust/worked-circuit.csv, worked example 1
// of REFERENCES.md as a level book; copies after the first get a comment
// line of their own ("# copy 2") and a side shot of their own
// (SideShot(b, "copy 2")), so that they are different files of different
// observations, with the same sections.
func WorkedBook(tb testing.TB, copy int) []byte {
	tb.Helper()
	b := Testdata(tb, "adjust/worked-circuit.csv")
	if copy > 1 {
		b = append([]byte(fmt.Sprintf("# copy %d\n", copy)), SideShot(tb, b, fmt.Sprintf("copy %d", copy))...)
	}
	return b
}

// SideShot returns book with one more sighting after its first row: an
// intermediate sight of 1.000 on a turning point of its own, named "TP "
// and label (with the note label). A side shot changes none of the book's
// sections, so the copy adjusts exactly as the book does, but it is other
// observations: a book recorded already can be recorded again as a run of
// its own. The book must name turning points "TP*" (the default) and have
// its header and rows one to a line.
func SideShot(tb testing.TB, book []byte, label string) []byte {
	tb.Helper()
	b, err := SideShotOf(book, label)
	if err != nil {
		tb.Fatal(err)
	}
	return b
}

// SideShotOf is SideShot for a goroutine of a test: it returns an error
// where SideShot stops the test.
func SideShotOf(book []byte, label string) ([]byte, error) {
	lines := strings.SplitAfter(string(book), "\n")
	for i, l := range lines {
		t := strings.TrimSpace(l)
		if t == "" || strings.HasPrefix(t, "#") {
			continue
		}
		if i+1 >= len(lines) {
			break
		}
		cols := strings.Split(t, ",")
		cells := make([]string, len(cols))
		for k, c := range cols {
			switch strings.ToLower(strings.TrimSpace(c)) {
			case "point":
				cells[k] = "TP " + label
			case "sight":
				cells[k] = "IS"
			case "middle":
				cells[k] = "1.000"
			case "note":
				cells[k] = label
			}
		}
		end := "\n"
		if strings.HasSuffix(l, "\r\n") {
			end = "\r\n"
		}
		row := strings.Join(cells, ",") + end
		return []byte(strings.Join(lines[:i+2], "") + row + strings.Join(lines[i+2:], "")), nil
	}
	return nil, errors.New("registertest: no header and first row in the book for a side shot")
}

// Testdata returns the bytes of a file under the module's testdata
// folder, e.g. "books/tallis-north-loop.csv", whichever package's test
// asks.
func Testdata(tb testing.TB, path string) []byte {
	tb.Helper()
	b, err := os.ReadFile(TestdataPath(tb, path))
	if err != nil {
		tb.Fatal(err)
	}
	return b
}

// TestdataPath returns the path of a file under the module's testdata
// folder.
func TestdataPath(tb testing.TB, path string) string {
	tb.Helper()
	_, here, _, ok := runtime.Caller(0)
	if !ok {
		tb.Fatal("registertest: cannot find the testdata folder")
	}
	return filepath.Join(filepath.Dir(here), "..", "..", "testdata", filepath.FromSlash(path))
}
