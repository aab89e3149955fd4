package register_test

import (
	"bytes"
	"crypto/sha256"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"runtime"
	"runtime/debug"
	"strings"
	"testing"
	"time"

	"cairn/internal/booktest"
	"cairn/internal/levelbook"
	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// loopBook is an invented loop over three Orrin Bay marks, in metres, that
// meets class third: TC-0412 → TP1 → TC-0415 → TC-0417 → TC-0412, 60 m a
// setup, closing 1 mm low.
const loopBook = `# run: Orrin Bay harbour loop
# date: 2026-03-10
# crew: J. Marsh, P. Oduya
# units: m
# class: third
# x-weather: overcast
point,sight,upper,middle,lower,note
TC-0412,BS,1.650,1.500,1.350,harbour wall
TP1,FS,1.350,1.200,1.050,
TP1,BS,1.550,1.400,1.250,
TC-0415,FS,1.750,1.600,1.450,
TC-0415,BS,1.450,1.300,1.150,
TC-0417,FS,1.250,1.100,0.950,
TC-0417,BS,1.350,1.200,1.050,
TC-0412,FS,1.651,1.501,1.351,
`

// loopMarks are the marks loopBook names.
var loopMarks = []string{"TC-0412", "TC-0415", "TC-0417"}

// runSetup gives a register with marks (no position) and nothing else.
func runSetup(t *testing.T, marks ...string) *registertest.Bundle {
	t.Helper()
	b := registertest.Setup(t)
	b.Marks(t, marks...)
	return b
}

// noRuns are the counts of a register with no run.
var noRuns = map[string]int64{"run": 0, "sighting": 0, "section": 0, "run_mark": 0}

// assertNothingRecorded fails the test unless the register holds no run
// and every table is as it was before.
func assertNothingRecorded(t *testing.T, b *registertest.Bundle, before store.TableCounts) {
	t.Helper()
	if !b.AssertCounts(t, noRuns) || !b.AssertNothingWritten(t, before) {
		t.FailNow()
	}
}

func params(path string, book []byte) register.RecordParams {
	return register.RecordParams{Path: path, Book: book, By: "J. Marsh"}
}

// A recorded book comes back byte for byte, byte-order mark and CRLF line
// ends included, with the SHA-256 of those bytes; its sightings and
// sections are those of the reduction.
func TestRecordKeepsBookVerbatim(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	book := []byte("\ufeff" + strings.ReplaceAll(loopBook, "\n", "\r\n"))
	rec, err := b.Reg.Record(b.Ctx, params("books/harbour.csv", book))
	if err != nil {
		t.Fatal(err)
	}
	got, err := b.Reg.RunBook(b.Ctx, rec.Run.ID)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, book) {
		t.Fatalf("stored book differs from the file:\n%q\n%q", got, book)
	}
	sum := sha256.Sum256(book)
	if !bytes.Equal(rec.Run.BookSHA256, sum[:]) {
		t.Errorf("sha256 %x, want %x", rec.Run.BookSHA256, sum)
	}
	r := rec.Run
	if r.FileName != "harbour.csv" || r.Name != "Orrin Bay harbour loop" || r.Crew != "J. Marsh, P. Oduya" ||
		r.Unit != "m" || r.Class != "third" || r.ObservedOn == nil || r.ObservedOn.Format("2006-01-02") != "2026-03-10" ||
		r.RecordedBy != "J. Marsh" || r.ChecksFailed != 0 || r.AcceptedReason != "" || r.BookSize != int64(len(book)) {
		t.Errorf("run %+v", r)
	}
	var meta struct {
		Extra map[string]string `json:"extra"`
	}
	if err := json.Unmarshal(r.Meta, &meta); err != nil || meta.Extra["x-weather"] != "overcast" {
		t.Errorf("metadata %s lacks the x- key (%v)", r.Meta, err)
	}
	if r.Sightings != 8 || r.Sections != 3 || math.Abs(r.LengthM-240) > 1e-9 {
		t.Errorf("%d sightings, %d sections, %.3f m", r.Sightings, r.Sections, r.LengthM)
	}

	sights, err := b.Reg.Sightings(b.Ctx, r.ID)
	if err != nil {
		t.Fatal(err)
	}
	parsed, err := levelbook.Parse("books/harbour.csv", book)
	if err != nil {
		t.Fatal(err)
	}
	if len(sights) != len(parsed.Sightings) {
		t.Fatalf("%d sightings stored, the book has %d", len(sights), len(parsed.Sightings))
	}
	for i, s := range sights {
		want := parsed.Sightings[i]
		if s.Seq != i+1 || s.Line != want.Line || s.Point != want.Point || s.Sight != string(want.Sight) ||
			s.Middle != want.Middle || s.Upper == nil || *s.Upper != want.Upper || s.Distance == nil || *s.Distance != want.Distance {
			t.Errorf("sighting %d: %+v, want %+v", i+1, s, want)
		}
	}
	if sights[0].Line != 8 || sights[0].Note != "harbour wall" {
		t.Errorf("first sighting %+v", sights[0])
	}

	// Worked by hand from loopBook: each setup is BS − FS.
	want := []struct {
		from, to     string
		dh, len      float64
		setups, f, l int
	}{
		{"TC-0412", "TC-0415", 0.300 - 0.200, 120, 2, 8, 11},
		{"TC-0415", "TC-0417", 0.200, 60, 1, 12, 13},
		{"TC-0417", "TC-0412", -0.301, 60, 1, 14, 15},
	}
	secs, err := b.Reg.Sections(b.Ctx, []int64{r.ID})
	if err != nil {
		t.Fatal(err)
	}
	if len(secs) != len(want) {
		t.Fatalf("%d sections", len(secs))
	}
	for i, s := range secs {
		w := want[i]
		if s.RunID != r.ID || s.Seq != i+1 || s.From != w.from || s.To != w.to || math.Abs(s.DifferenceM-w.dh) > 1e-9 ||
			s.LengthM == nil || math.Abs(*s.LengthM-w.len) > 1e-9 || s.Setups != w.setups || s.FirstLine != w.f || s.LastLine != w.l {
			t.Errorf("section %d: %+v, want %+v", i+1, s, w)
		}
		if s.DifferenceM != rec.Result.Sections[i].DifferenceM {
			t.Errorf("section %d: stored %v, reduced %v: not unrounded", i+1, s.DifferenceM, rec.Result.Sections[i].DifferenceM)
		}
	}
}

// A failure after the sightings are written (the database refuses a
// section with no setups) leaves no run, sighting, section, or mark the
// recording created.
func TestRecordFailingHalfWayLeavesNothing(t *testing.T) {
	t.Parallel()
	b := runSetup(t, "TC-1001")
	before := b.Counts(t)
	l := booktest.Loop{Setups: 500, MarkEvery: 25}
	p := params("long.csv", l.Book())
	p.NewMarks = true
	wrote := false
	register.SetBeforeSections(&p, func(secs []store.Section) {
		wrote = true
		secs[len(secs)-1].Setups = 0
	})
	_, err := b.Reg.Record(b.Ctx, p)
	if err == nil || !strings.Contains(err.Error(), "section_setups_check") {
		t.Fatalf("error %v, want the section check violated", err)
	}
	if !wrote {
		t.Fatal("the failure came before the sightings were written")
	}
	assertNothingRecorded(t, b, before)
	marks, err := b.Reg.MarkList(b.Ctx, register.MarkListParams{})
	if err != nil {
		t.Fatal(err)
	}
	if len(marks) != 1 {
		t.Errorf("%d marks after the failed recording, want the 1 there before", len(marks))
	}
}

// The same bytes are recorded once; the second attempt names the run that
// holds them.
func TestRecordTwiceIsRefused(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	first, err := b.Reg.Record(b.Ctx, params("harbour.csv", []byte(loopBook)))
	if err != nil {
		t.Fatal(err)
	}
	before := b.Counts(t)
	_, err = b.Reg.Record(b.Ctx, params("copy-of-harbour.csv", []byte(loopBook)))
	var are *register.AlreadyRecordedError
	if !errors.As(err, &are) || are.Run.ID != first.Run.ID {
		t.Fatalf("error %v, want already recorded as run %d", err, first.Run.ID)
	}
	if !strings.Contains(err.Error(), "copy-of-harbour.csv is already recorded as run ") {
		t.Errorf("message %q", err)
	}
	b.AssertCounts(t, map[string]int64{"run": 1, "sighting": 8})
	b.AssertNothingWritten(t, before)
	// One byte more is another file but the same observations: refused
	// too, naming the run (issue 11: a run is its observations).
	_, err = b.Reg.Record(b.Ctx, params("harbour.csv", []byte(loopBook+"\n")))
	var soe *register.SameObservationsError
	if !errors.As(err, &soe) || soe.Run.ID != first.Run.ID {
		t.Errorf("a different file of the same observations: %v", err)
	}
	b.AssertNothingWritten(t, before)
	// One reading more is another book.
	if _, err := b.Reg.Record(b.Ctx, params("harbour.csv", []byte(strings.Replace(loopBook, "TC-0417,FS,1.250,1.100,0.950", "TC-0417,FS,1.250,1.101,0.950", 1)))); err != nil {
		t.Errorf("a different book: %v", err)
	}
}

// Every unknown mark is named, with the line that first names it, and
// nothing is written; --new-marks creates them unverified.
func TestRecordUnknownMarks(t *testing.T) {
	t.Parallel()
	b := runSetup(t, "TC-0415")
	before := b.Counts(t)
	_, err := b.Reg.Record(b.Ctx, params("harbour.csv", []byte(loopBook)))
	var ume *register.UnknownMarksError
	if !errors.As(err, &ume) {
		t.Fatalf("error %v, want unknown marks", err)
	}
	want := []register.UnknownMark{{Designation: "TC-0412", Line: 8}, {Designation: "TC-0417", Line: 13}}
	if len(ume.Marks) != len(want) || ume.Marks[0] != want[0] || ume.Marks[1] != want[1] {
		t.Errorf("unknown %+v, want %+v", ume.Marks, want)
	}
	if msg := err.Error(); !strings.Contains(msg, "harbour.csv: 2 marks are not in the register: TC-0412 (line 8), TC-0417 (line 13)") {
		t.Errorf("message %q", msg)
	}
	assertNothingRecorded(t, b, before)

	p := params("harbour.csv", []byte(loopBook))
	p.NewMarks = true
	rec, err := b.Reg.Record(b.Ctx, p)
	if err != nil {
		t.Fatal(err)
	}
	if rec.Run.ID != 1 {
		t.Errorf("first run recorded is run %d: the refusal used up a run number", rec.Run.ID)
	}
	created := map[string]bool{}
	for _, m := range rec.Marks {
		if m.Created != (m.Condition != nil) || (m.Created && m.Condition.Condition != "unverified") {
			t.Errorf("mark %s: condition %+v", m.Designation, m.Condition)
		}
		created[m.Designation] = m.Created
	}
	if !created["TC-0412"] || created["TC-0415"] || !created["TC-0417"] {
		t.Errorf("created %v", created)
	}
	v, err := b.Reg.MarkShow(b.Ctx, "TC-0417")
	if err != nil {
		t.Fatal(err)
	}
	if len(v.Conditions) != 1 || v.Conditions[0].Condition != "unverified" || len(v.Heights) != 0 {
		t.Errorf("new mark %+v", v)
	}
}

// A book whose checks fail is refused, listing the failures, unless it is
// accepted with a reason, which the run keeps.
func TestRecordFailedChecks(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	before := b.Counts(t)
	// Upper wire 1.260 against 1.100 and 0.950: half-intervals 0.160 and
	// 0.150 differ by 10 mm, beyond the 3 mm of EN0593 §4.
	bad := strings.Replace(loopBook, "TC-0417,FS,1.250,", "TC-0417,FS,1.260,", 1)
	_, err := b.Reg.Record(b.Ctx, params("harbour.csv", []byte(bad)))
	var cfe *register.ChecksFailedError
	if !errors.As(err, &cfe) {
		t.Fatalf("error %v, want checks failed", err)
	}
	if !strings.Contains(err.Error(), "line 13: three_wire: TC-0417:") {
		t.Errorf("message %q", err)
	}
	assertNothingRecorded(t, b, before)

	p := params("harbour.csv", []byte(bad))
	p.AcceptFailedChecks = true
	if _, err := b.Reg.Record(b.Ctx, p); err == nil {
		t.Fatal("accepted without a reason")
	}
	assertNothingRecorded(t, b, before)
	p.Reason = "upper wire misread; crew confirmed the middle wire"
	rec, err := b.Reg.Record(b.Ctx, p)
	if err != nil {
		t.Fatal(err)
	}
	v, err := b.Reg.Run(b.Ctx, rec.Run.ID)
	if err != nil {
		t.Fatal(err)
	}
	if v.Run.AcceptedReason != p.Reason || v.Run.ChecksFailed != 1 || len(v.Summary.Failures) != 1 ||
		v.Summary.Failures[0].Line != 13 || v.Summary.Class != "third" || len(v.Summary.Checks) == 0 {
		t.Errorf("run %+v, summary %+v", v.Run, v.Summary)
	}
}

// A run links to the condition report current when it was recorded, and
// cautions about a disturbed mark; a later report does not change it.
func TestRecordLinksConditions(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	day := time.Date(2026, 2, 1, 0, 0, 0, 0, time.UTC)
	c, err := b.Reg.MarkCondition(b.Ctx, register.MarkConditionParams{
		Designation: "TC-0415", Condition: "disturbed", Note: "kerb relaid", ObservedOn: day, RecordedBy: "P. Oduya",
	})
	if err != nil {
		t.Fatal(err)
	}
	rec, err := b.Reg.Record(b.Ctx, params("harbour.csv", []byte(loopBook)))
	if err != nil {
		t.Fatal(err)
	}
	if len(rec.Cautions) != 1 || !strings.Contains(rec.Cautions[0], "TC-0415") || !strings.Contains(rec.Cautions[0], "DISTURBED") {
		t.Errorf("cautions %q", rec.Cautions)
	}
	if _, err := b.Reg.MarkCondition(b.Ctx, register.MarkConditionParams{
		Designation: "TC-0415", Condition: "good", ObservedOn: day.AddDate(0, 1, 0), RecordedBy: "P. Oduya",
	}); err != nil {
		t.Fatal(err)
	}
	v, err := b.Reg.Run(b.Ctx, rec.Run.ID)
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range v.Marks {
		if m.Designation == "TC-0415" && (m.Condition == nil || m.Condition.ID != c.ID) {
			t.Errorf("TC-0415 linked to %+v, want report %d", m.Condition, c.ID)
		}
		if m.Designation != "TC-0415" && m.Condition != nil {
			t.Errorf("%s linked to %+v, want none", m.Designation, m.Condition)
		}
	}
	if len(v.Cautions) != 1 {
		t.Errorf("cautions of the stored run %q", v.Cautions)
	}
}

// Runs, sightings, sections and their mark links cannot be changed or
// removed, by anyone.
func TestRunsAreAppendOnly(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	if _, err := b.Reg.Record(b.Ctx, params("harbour.csv", []byte(loopBook))); err != nil {
		t.Fatal(err)
	}
	before := b.Counts(t)
	for _, q := range []string{
		"UPDATE run SET name = 'other'",
		"DELETE FROM run",
		"TRUNCATE run CASCADE",
		"UPDATE sighting SET middle = middle + 0.001",
		"DELETE FROM sighting",
		"TRUNCATE sighting",
		"UPDATE section SET dh_m = 0",
		"DELETE FROM section",
		"TRUNCATE section",
		"UPDATE run_mark SET created = true",
		"DELETE FROM run_mark",
		"TRUNCATE run_mark",
	} {
		_, err := b.DB.Pool.Exec(b.Ctx, q)
		if err == nil || !strings.Contains(err.Error(), "append-only") {
			t.Errorf("%s: %v, want refused", q, err)
		}
	}
	b.AssertCounts(t, map[string]int64{"run": 1, "sighting": 8, "section": 3, "run_mark": 3})
	b.AssertNothingWritten(t, before)
}

// Runs are listed by the marks they touched and by date.
func TestRunList(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	harbour, err := b.Reg.Record(b.Ctx, params("harbour.csv", []byte(loopBook)))
	if err != nil {
		t.Fatal(err)
	}
	p := params("long.csv", booktest.Loop{Setups: 40, MarkEvery: 10}.Book())
	p.NewMarks = true
	long, err := b.Reg.Record(b.Ctx, p)
	if err != nil {
		t.Fatal(err)
	}
	ids := func(p register.RunListParams) []int64 {
		t.Helper()
		runs, err := b.Reg.RunList(b.Ctx, p)
		if err != nil {
			t.Fatal(err)
		}
		var out []int64
		for _, r := range runs {
			out = append(out, r.ID)
		}
		return out
	}
	day := func(s string) *time.Time {
		d, _ := time.Parse("2006-01-02", s)
		return &d
	}
	for _, c := range []struct {
		p    register.RunListParams
		want []int64
	}{
		{register.RunListParams{}, []int64{harbour.Run.ID, long.Run.ID}},
		{register.RunListParams{Mark: "TC-0415"}, []int64{harbour.Run.ID}},
		{register.RunListParams{Mark: "TC-1003"}, []int64{long.Run.ID}},
		{register.RunListParams{Since: day("2026-03-11")}, []int64{long.Run.ID}},
		{register.RunListParams{Since: day("2026-04-15")}, nil},
	} {
		if got := ids(c.p); !slicesEqual(got, c.want) {
			t.Errorf("%+v: runs %v, want %v", c.p, got, c.want)
		}
	}
	if _, err := b.Reg.RunList(b.Ctx, register.RunListParams{Mark: "TC-O415"}); err == nil || !strings.Contains(err.Error(), "did you mean TC-0415") {
		t.Errorf("misspelt mark: %v", err)
	}
	if _, err := b.Reg.Sections(b.Ctx, []int64{harbour.Run.ID, 999}); err == nil || !strings.Contains(err.Error(), "no run 999") {
		t.Errorf("unknown run: %v", err)
	}
}

func slicesEqual(a, b []int64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// BenchmarkRecordNewMarks records a generated loop of 1,000 setups with a
// mark at every setup (2,000 sightings, 1,000 sections), every mark new
// to the register and created with the run (NewMarks), as each loop of
// BenchmarkAuditVerifyScaled is. Each iteration records a loop of marks
// of its own.
func BenchmarkRecordNewMarks(b *testing.B) {
	fx := registertest.Setup(b)
	i := 0
	for b.Loop() {
		l := booktest.Loop{Setups: 1000, MarkEvery: 1, FirstMark: 1001 + 1000*i, Seed: uint64(i + 1)}
		i++
		p := register.RecordParams{Path: fmt.Sprintf("loop-%d.csv", i), Book: l.Book(), By: "bench", NewMarks: true}
		if _, err := fx.Reg.Record(fx.Ctx, p); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkRecord20kSetups records a generated loop of 20,000 setups
// (40,000 sightings, 400 sections over marks already in the register):
// parse, reduce and the one transaction. Each iteration records a
// different file (an x- key numbers it).
func BenchmarkRecord20kSetups(b *testing.B) {
	l := booktest.Loop{Setups: 20000, Seed: 1}
	book := l.Book()
	fx := registertest.Setup(b)
	fx.Marks(b, l.Marks()...)
	reg, ctx := fx.Reg, fx.Ctx
	b.SetBytes(int64(len(book)))
	i := 0
	for b.Loop() {
		i++
		p := register.RecordParams{Path: "loop-20k.csv", Book: registertest.SideShot(b, append([]byte(fmt.Sprintf("# x-copy: %d\n", i)), book...), fmt.Sprint(i)), By: "bench"}
		if _, err := reg.Record(ctx, p); err != nil {
			b.Fatal(err)
		}
	}
}

// The database itself refuses a run whose SHA-256 is not that of its book,
// and failed checks without a reason.
func TestRunConstraints(t *testing.T) {
	t.Parallel()
	b := runSetup(t)
	before := b.Counts(t)
	book := []byte(loopBook)
	sum := sha256.Sum256(book)
	other := sha256.Sum256(append(book, '\n'))
	for _, c := range []struct {
		p    store.RunInsertParams
		want string
	}{
		{store.RunInsertParams{Unit: "m", FileName: "a.csv", Book: book, BookSHA256: other[:], RecordedBy: "t"}, "run_book_sha256"},
		{store.RunInsertParams{Unit: "m", FileName: "a.csv", Book: book, BookSHA256: sum[:], RecordedBy: "t", ChecksFailed: 2}, "run_failed_checks_accepted"},
		{store.RunInsertParams{Unit: "m", FileName: "a.csv", Book: book, BookSHA256: sum[:], RecordedBy: "t", AcceptedReason: "why"}, "run_failed_checks_accepted"},
		{store.RunInsertParams{Unit: "yd", FileName: "a.csv", Book: book, BookSHA256: sum[:], RecordedBy: "t"}, "run_unit_check"},
	} {
		if _, err := store.RunInsert(b.Ctx, b.DB.Pool, c.p); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v", c.want, err)
		}
	}
	b.AssertNothingWritten(t, before)
	if _, err := store.RunInsert(b.Ctx, b.DB.Pool, store.RunInsertParams{Unit: "m", FileName: "a.csv", Book: book, BookSHA256: sum[:], RecordedBy: "t"}); err != nil {
		t.Errorf("a consistent run: %v", err)
	}
}

// The heights a run was reduced from are kept, the version held from the
// register with them, and cannot be changed or removed.
func TestRunHeldIsKeptAndAppendOnly(t *testing.T) {
	t.Parallel()
	b := runSetup(t, loopMarks...)
	h := b.Height(t, registertest.HeightOpts{Designation: "TC-0412", Value: "10.250", Unit: "m"})
	p := params("harbour.csv", []byte(loopBook))
	p.HoldCurrent = []string{"TC-0412"}
	p.Hold = map[string]float64{"TC-0415": 11.5}
	p.AcceptFailedChecks, p.Reason = true, "the typed height is invented; only what is kept is tested"
	rec, err := b.Reg.Record(b.Ctx, p)
	if err != nil {
		t.Fatal(err)
	}
	if len(rec.Held) != 2 || rec.Held[0].Designation != "TC-0412" || rec.Held[0].HeightID == nil || *rec.Held[0].HeightID != h.ID ||
		rec.Held[0].Value != "10.250000000" || rec.Held[1].Designation != "TC-0415" || rec.Held[1].HeightID != nil || rec.Held[1].Value != "11.5" {
		t.Errorf("held %+v", rec.Held)
	}
	v, err := b.Reg.Run(b.Ctx, rec.Run.ID)
	if err != nil || len(v.Held) != 2 || *v.Held[0].Version != h.Version || *v.Held[0].DatumCode != "NAVD88" {
		t.Fatalf("run view held %+v, %v", v, err)
	}
	before := b.Counts(t)
	for _, q := range []string{"UPDATE run_held SET value_in_book_unit = 0", "DELETE FROM run_held", "TRUNCATE run_held"} {
		if _, err := b.DB.Pool.Exec(b.Ctx, q); err == nil || !strings.Contains(err.Error(), "append-only") {
			t.Errorf("%s: %v, want refused", q, err)
		}
	}
	b.AssertNothingWritten(t, before)
}

// BenchmarkRecordLargestBook records one generated loop near the largest
// book cairn reads (levelbook.MaxBookBytes, 32 MiB): about 300,000
// setups, 600,000 sightings, over marks already in the register, one run
// an iteration. peak-MB is the process's peak resident memory during the
// recordings alone (VmHWM, reset after the register is built).
func BenchmarkRecordLargestBook(b *testing.B) {
	l := booktest.Loop{Setups: 20000, Seed: 1}
	for len(l.Book()) < levelbook.MaxBookBytes*9/10 {
		l.Setups += 20000
	}
	size := len(l.Book())
	fx := registertest.Setup(b)
	fx.Marks(b, l.Marks()...)
	reg, ctx := fx.Reg, fx.Ctx
	copyOf := func(i int) []byte {
		return registertest.SideShot(b, append([]byte(fmt.Sprintf("# x-copy: %d\n", i)), l.Book()...), fmt.Sprint(i))
	}
	// The first iteration's copy is made before the peak is reset (the
	// benchmark runs one iteration at the default -benchtime), and no
	// other copy of the book is kept: what is measured is the recording
	// of one book, not the making of it.
	next := copyOf(1)
	runtime.GC()
	debug.FreeOSMemory()
	if err := os.WriteFile("/proc/self/clear_refs", []byte("5"), 0); err != nil {
		b.Fatalf("reset the peak resident memory: %v", err)
	}
	b.SetBytes(int64(size))
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		i++
		if next == nil {
			next = copyOf(i)
		}
		p := register.RecordParams{Path: "loop-largest.csv", Book: next, By: "bench"}
		next = nil
		if _, err := reg.Record(ctx, p); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(l.Setups), "setups")
	b.ReportMetric(peakMB(b), "peak-MB")
}

// A mark named like a turning point of the book is warned of at the
// turning point's first line, however many turning points come before it
// (they are looked up some thousands at a time), once, and in the order
// of the marks' designations.
func TestTurningPointsNamedLikeMarksPastABatch(t *testing.T) {
	t.Parallel()
	l := booktest.Loop{Setups: 12000, MarkEvery: 4000, Seed: 5}
	data := l.Book()
	b := runSetup(t, append(l.Marks(), "TP8000", "TP20")...)
	// The lines, found in the bytes: the first row naming each.
	lineOf := func(point string) int {
		for i, row := range strings.Split(string(data), "\n") {
			if strings.HasPrefix(row, point+",") {
				return i + 1
			}
		}
		t.Fatalf("%s not in the book", point)
		return 0
	}
	rec, err := b.Reg.Record(b.Ctx, params("long.csv", data))
	if err != nil {
		t.Fatal(err)
	}
	want := []string{
		fmt.Sprintf("WARNING: long.csv: line %d: TP20 is a mark", lineOf("TP20")),
		fmt.Sprintf("WARNING: long.csv: line %d: TP8000 is a mark", lineOf("TP8000")),
	}
	if len(rec.Warnings) != len(want) {
		t.Fatalf("warnings %q, want %d", rec.Warnings, len(want))
	}
	for i, w := range want {
		if !strings.HasPrefix(rec.Warnings[i], w) {
			t.Errorf("warning %d: %s, want %s...", i+1, rec.Warnings[i], w)
		}
	}
}
