package cli

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// Names are one name however they are typed, through the built binary:
// a designation in another case, in fullwidth letters (the same after
// NFKC: UnicodeData.txt, U+FF34 <wide> 0054, U+FF23 <wide> 0043), or
// written with Cyrillic letters that look Latin (U+0422, U+0421:
// Scripts.txt, Cyrillic) is refused with exit status 2 and nothing
// written; did you mean finds the folded form.
func TestNamesRefusedThroughBinary(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	mustBin(t, db, 0, "mark", "add", "TC-0412", "--by", "test")
	mustBin(t, db, 0, "datum", "add", "TCVD", "--name", "Tallis County Vertical Datum", "--by", "test")
	before := registertest.Counts(t, db.Pool)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"mark", "add", "tc-0412"}, `cairn: designation: mark TC-0412 is already in the register: "tc-0412" is the same name in another case`},
		{[]string{"mark", "add", "\u0422\u0421-0412"}, `cairn: designation: "ТС-0412" is not a designation: it mixes scripts, Т (U+0422 CYRILLIC CAPITAL LETTER TE, Cyrillic) and С (U+0421 CYRILLIC CAPITAL LETTER ES, Cyrillic) are not Latin; a designation is written in Latin letters, digits and punctuation, and a letter of another script can look exactly like a Latin one`},
		{[]string{"mark", "add", "T\u0421-0499"}, `cairn: designation: "TС-0499" is not a designation: it mixes scripts, С (U+0421 CYRILLIC CAPITAL LETTER ES, Cyrillic) is not Latin; a designation is written in Latin letters, digits and punctuation, and a letter of another script can look exactly like a Latin one`},
		{[]string{"mark", "add", "\uFF34\uFF23-0412"}, `cairn: designation: mark TC-0412 is already in the register: "ＴＣ-0412" is the same name once its characters are normalised (NFKC) and case folded`},
		{[]string{"mark", "add", "\uFF34\uFF23-0499"}, `cairn: designation: "ＴＣ-0499" is written with compatibility characters (fullwidth or other forms, NFKC): write it as TC-0499`},
		{[]string{"mark", "add", " TC-0413"}, `cairn: designation: " TC-0413" is not a designation: it begins or ends with white space (write it without)`},
		{[]string{"mark", "add", "TC-0413 "}, `cairn: designation: "TC-0413 " is not a designation: it begins or ends with white space (write it without)`},
		{[]string{"datum", "add", "tcvd", "--name", "again"}, `cairn: code: datum TCVD is already in the register: "tcvd" is the same name in another case`},
		{[]string{"mark", "show", "tc0412"}, `cairn: designation: no mark "tc0412" in the register (did you mean TC-0412?)`},
		{[]string{"mark", "show", "\uFF54\uFF43-0412"}, `cairn: designation: no mark "ｔｃ-0412" in the register (did you mean TC-0412?)`},
	} {
		args := c.args
		if args[1] == "add" {
			args = append(args, "--by", "test")
		}
		_, errOut := mustBin(t, db, 2, args...)
		if strings.TrimSpace(errOut) != c.want {
			t.Errorf("cairn %s:\n got %s\nwant %s", strings.Join(args, " "), strings.TrimSpace(errOut), c.want)
		}
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}

// bookDated writes testdata/books/mere-river-line.csv with its date
// replaced and its lines edited by replace (old, new pairs).
func bookDated(t *testing.T, date string, replace ...string) string {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "books", "mere-river-line.csv"))
	if err != nil {
		t.Fatal(err)
	}
	s := strings.Replace(string(b), "# date: 2024-06-03", "# date: "+date, 1)
	s = strings.NewReplacer(replace...).Replace(s)
	path := filepath.Join(t.TempDir(), "levee.csv")
	if err := os.WriteFile(path, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

var heldLevee = []string{"--held-height", "TC-0420=3.512", "--held-height", "TC-0427=5.104"}

// Dates after today (the machine's date) are refused, exit status 2 and
// nothing written: a book dated tomorrow by run check and run record, a
// condition report observed tomorrow by mark condition.
func TestFutureDatesRefusedThroughBinary(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	for _, m := range []string{"TC-0420", "TC-0423", "TC-0427"} {
		mustBin(t, db, 0, "mark", "add", m, "--by", "test")
	}
	before := registertest.Counts(t, db.Pool)
	today := time.Now()
	tomorrow := today.AddDate(0, 0, 1).Format(time.DateOnly)
	book := bookDated(t, tomorrow)
	wantBook := "cairn: " + book + `:7: field "date": the book is dated ` + tomorrow + ", after today (" + today.Format(time.DateOnly) + "): a book is dated the day it was observed; correct the date"
	for _, args := range [][]string{
		append([]string{"run", "check", book}, heldLevee...),
		append([]string{"run", "record", book, "--by", "test"}, heldLevee...),
	} {
		_, errOut := mustBin(t, db, 2, args...)
		if strings.TrimSpace(errOut) != wantBook {
			t.Errorf("cairn %s:\n got %s\nwant %s", strings.Join(args, " "), strings.TrimSpace(errOut), wantBook)
		}
	}
	_, errOut := mustBin(t, db, 2, "mark", "condition", "TC-0423", "good", "--on", tomorrow, "--by", "test")
	want := "cairn: --on: " + tomorrow + " is after today (" + today.Format(time.DateOnly) + "): a condition report is dated the day the mark was seen; nothing was written"
	if strings.TrimSpace(errOut) != want {
		t.Errorf("mark condition --on tomorrow:\n got %s\nwant %s", strings.TrimSpace(errOut), want)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
	// Today is accepted.
	mustBin(t, db, 0, "mark", "condition", "TC-0423", "good", "--on", today.Format(time.DateOnly), "--by", "test")
}

// A mark the book's turning-point pattern takes (TP-77 matches the
// default pattern TP*, levelbook.DefaultTurningPoints) is reported, and so
// is a book dated before a mark's earliest record; both are warnings in
// the report of run check and run record, which still succeed.
func TestBookWarningsThroughBinary(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	for _, m := range []string{"TC-0420", "TC-0423", "TC-0427", "TP-77"} {
		mustBin(t, db, 0, "mark", "add", m, "--by", "test")
	}
	mustBin(t, db, 0, "mark", "condition", "TC-0423", "good", "--on", "2025-01-01", "--by", "test")
	book := bookDated(t, "2024-06-03", "TP1,", "TP-77,")
	tp := "WARNING: " + book + `: line 17: TP-77 is a mark in the register, but this book takes it as a turning point (the name matches its turning-point pattern "TP*"): nothing is checked or recorded against mark TP-77; if the book means the mark, give it a "# turning-points:" pattern that TP-77 does not match`
	early := "WARNING: " + book + ": line 21: the book is dated 2024-06-03, before the register's earliest record of TC-0423 (2025-01-01): check the book's date, and that TC-0423 is the mark the book means"
	out, errOut := mustBin(t, db, 0, append([]string{"run", "check", book}, heldLevee...)...)
	for _, w := range []string{tp, early} {
		if !strings.Contains(out, w) || !strings.Contains(errOut, w) {
			t.Errorf("run check: report or stderr lacks %q:\n%s\n%s", w, out, errOut)
		}
	}
	before := registertest.Counts(t, db.Pool)
	out, errOut = mustBin(t, db, 0, append([]string{"run", "record", book, "--by", "test"}, heldLevee...)...)
	for _, w := range []string{tp, early} {
		if !strings.Contains(out, w) || !strings.Contains(errOut, w) {
			t.Errorf("run record: report or stderr lacks %q:\n%s\n%s", w, out, errOut)
		}
	}
	registertest.AssertWrote(t, db.Pool, before, map[string]int64{"run": 1, "sighting": 14, "section": 2, "run_mark": 3, "run_held": 2, "check_connection": 1, "register_commit": 1})
	// The book names the mark in another case: refused, naming it.
	before = registertest.Counts(t, db.Pool)
	other := bookDated(t, "2025-02-01", "TC-0423,", "tc-0423,")
	_, errOut = mustBin(t, db, 2, append([]string{"run", "record", other, "--by", "test", "--new-marks"}, heldLevee...)...)
	want := "cairn: " + other + `:21: field "point": "tc-0423" is not in the register, but mark TC-0423 is the same name written another way (case or character forms): write TC-0423`
	if strings.TrimSpace(errOut) != want {
		t.Errorf("book in another case:\n got %s\nwant %s", strings.TrimSpace(errOut), want)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}
