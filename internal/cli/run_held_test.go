package cli

import (
	"bytes"
	"encoding/json"
	"math"
	"math/big"
	"os"
	"regexp"
	"strings"
	"testing"
	"time"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// usftBook is a line in US survey feet on NAVD 88 from TC-0420 to end.
func usftBook(t *testing.T, name, end string) string {
	t.Helper()
	return writeBook(t, name, []byte(`# Tallis County, Orrin Bay: invented demo data.
# run: Orrin Bay levee line
# date: 2024-06-03
# units: usft
# datum: NAVD 88
# class: third
point,sight,middle,distance
TC-0420,BS,5.000,100.0
TP1,FS,2.000,100.0
TP1,BS,4.500,100.0
`+end+`,FS,2.277,100.0
`))
}

// usftOf converts a height in metres, as published, to US survey feet by
// the exact definition 1 usft = 1200/3937 m (NIST/NGS, Federal Register
// notice of 2022, docs/references.md), rounded half up to 9 places.
func usftOf(t *testing.T, metres string) string {
	t.Helper()
	v, ok := new(big.Rat).SetString(metres)
	if !ok {
		t.Fatal(metres)
	}
	v.Mul(v, big.NewRat(3937, 1200))
	v.Add(v, big.NewRat(5, 10_000_000_000)) // positive: half up is half away from zero
	s := v.FloatString(10)
	return s[:len(s)-1]
}

// run check --hold MARK reduces a book in usft from heights published in
// metres, converted exactly; run record keeps the versions held and run
// show shows them. A mark without a height, a mark in doubt and a choice
// of datums are refused, through the binary, with nothing written.
func TestRunHoldFromRegister(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	b := registertest.On(t, db)
	b.Datum(t, registertest.DatumOpts{Code: "NAVD88"})
	b.Marks(t, "TC-0420", "TC-0423", "TC-0425", "TC-0427")
	h20 := b.Height(t, registertest.HeightOpts{Designation: "TC-0420", Value: "3.512", Unit: "m"})
	h27 := b.Height(t, registertest.HeightOpts{Designation: "TC-0427", Value: "5.104", Unit: "m"})
	b.Height(t, registertest.HeightOpts{Designation: "TC-0425", Value: "5.104", Unit: "m"})
	b.Condition(t, registertest.ConditionOpts{Designation: "TC-0425", Condition: "disturbed", Note: "post struck by a mower",
		ObservedOn: time.Date(2024, 5, 20, 0, 0, 0, 0, time.UTC)})
	line := usftBook(t, "levee.csv", "TC-0427")

	// 3.512 m = 11.522286667 usft and 5.104 m = 16.745373333 usft.
	want20, want27 := usftOf(t, "3.512"), usftOf(t, "5.104")
	if want20 != "11.522286667" || want27 != "16.745373333" {
		t.Fatalf("reference conversion %s, %s", want20, want27)
	}
	before := b.Counts(t)
	out, errOut, st := binRun(t, db.URL, "run", "check", line, "--hold", "TC-0420", "--hold", "TC-0427", "-o", "json")
	if st != ExitOK {
		t.Fatalf("run check: exit %d: %s", st, errOut)
	}
	var j struct {
		Passed bool               `json:"passed"`
		HeldM  map[string]float64 `json:"held_m"`
		Held   []struct {
			Mark           string `json:"mark"`
			Height         string `json:"height"`
			Unit           string `json:"unit"`
			From           string `json:"from"`
			HeightID       *int64 `json:"height_id"`
			Version        *int   `json:"version"`
			Datum          string `json:"datum"`
			PublishedValue string `json:"published_value"`
		} `json:"held"`
		Misclosures []struct {
			KnownM float64 `json:"known_m"`
		} `json:"misclosures"`
	}
	if err := json.Unmarshal([]byte(out), &j); err != nil {
		t.Fatal(err)
	}
	if !j.Passed || len(j.Held) != 2 || j.Held[0].Mark != "TC-0420" || j.Held[0].Height != want20 || j.Held[0].Unit != "usft" ||
		j.Held[0].From != "register" || j.Held[0].HeightID == nil || *j.Held[0].HeightID != h20.ID || j.Held[0].Datum != "NAVD88" ||
		j.Held[0].PublishedValue != "3.512" || j.Held[1].Height != want27 || *j.Held[1].HeightID != h27.ID {
		t.Errorf("held %+v", j.Held)
	}
	// The reduction holds the exact published values in metres.
	if j.HeldM["TC-0420"] != 3.512 || j.HeldM["TC-0427"] != 5.104 || len(j.Misclosures) != 1 || math.Abs(j.Misclosures[0].KnownM-1.592) > 1e-12 {
		t.Errorf("held_m %v, misclosures %+v", j.HeldM, j.Misclosures)
	}
	out, _, _ = binRun(t, db.URL, "run", "check", line, "--hold", "TC-0420", "--held-height", "TC-0427")
	if !strings.Contains(out, "Held (usft): TC-0420 = 11.522 (register NAVD88 v1: 3.512 m), TC-0427 = 16.745 (register NAVD88 v1: 5.104 m)") {
		t.Errorf("report lacks the held heights:\n%s", out)
	}
	b.AssertNothingWritten(t, before)

	out, errOut, st = binRun(t, db.URL, "run", "record", line, "--hold", "TC-0420", "--hold", "TC-0427", "--by", "A. Moreau", "-o", "json")
	if st != ExitOK {
		t.Fatalf("run record: exit %d: %s", st, errOut)
	}
	var rec struct {
		Run struct {
			ID int64 `json:"run_id"`
		} `json:"run"`
		Held []struct {
			Mark     string `json:"mark"`
			Height   string `json:"height"`
			HeightID *int64 `json:"height_id"`
		} `json:"held"`
	}
	if err := json.Unmarshal([]byte(out), &rec); err != nil {
		t.Fatal(err)
	}
	if len(rec.Held) != 2 || rec.Held[0].Height != want20 || *rec.Held[0].HeightID != h20.ID {
		t.Errorf("recorded held %+v", rec.Held)
	}
	b.AssertWrote(t, before, map[string]int64{"run": 1, "sighting": 4, "section": 1, "run_mark": 2, "run_held": 2, "check_connection": 1, "register_commit": 1})
	id := jsonID(rec.Run.ID)
	show, _, _ := binRun(t, db.URL, "run", "show", id)
	for _, want := range []string{
		"Held heights\nMARK     HELD (usft)  FROM      DATUM   VERSION  AS PUBLISHED  CONDITION REASON\n" +
			"TC-0420  11.522       register  NAVD88  1        3.512 m       -\n" +
			"TC-0427  16.745       register  NAVD88  1        5.104 m       -\n",
	} {
		if !strings.Contains(show, want) {
			t.Errorf("run show lacks %q:\n%s", want, show)
		}
	}
	showJSON, _, _ := binRun(t, db.URL, "run", "show", id, "-o", "json")
	if !strings.Contains(showJSON, `"height": "`+want20+`"`) || !strings.Contains(showJSON, `"from": "register"`) {
		t.Errorf("run show -o json lacks the held version:\n%s", showJSON)
	}

	// Refusals: exit 2, the exact message, nothing written.
	noHeight := usftBook(t, "to-0423.csv", "TC-0423")
	doubt := usftBook(t, "to-0425.csv", "TC-0425")
	before = b.Counts(t)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{noHeight, "--hold", "TC-0420", "--hold", "TC-0423"},
			"cairn: --hold: TC-0423 has no height on NAVD88 to hold: give its height with its value (MARK=HEIGHT)"},
		{[]string{doubt, "--hold", "TC-0420", "--held-height", "TC-0425"},
			"cairn: --hold: the latest condition report of TC-0425 (disturbed, reported 2024-05-20) puts it in doubt: verify it in the field, or allow the condition and give the reason to hold it anyway"},
		{[]string{doubt, "--hold", "TP1"}, "cairn: --hold: cannot hold TP1: it is a turning point"},
	} {
		for _, cmd := range []string{"check", "record"} {
			args := append([]string{"run", cmd}, c.args...)
			if cmd == "record" {
				args = append(args, "--by", "A. Moreau")
			}
			out, errOut, st := binRun(t, db.URL, args...)
			if st != ExitBadInput || strings.TrimSpace(errOut) != c.want || out != "" {
				t.Errorf("%v: exit %d, stderr %q, want 2 and %q", args, st, errOut, c.want)
			}
		}
	}
	b.AssertNothingWritten(t, before)

	// Allowed on purpose, with a reason: recorded, and the reason kept.
	out, errOut, st = binRun(t, db.URL, "run", "record", doubt, "--hold", "TC-0420", "--hold", "TC-0425", "--by", "A. Moreau",
		"--allow-condition", "--condition-reason", "post reset and checked from TC-0427 on 2024-05-28")
	if st != ExitOK || !strings.Contains(errOut, "WARNING: mark TC-0425 was reported DISTURBED on 2024-05-20") {
		t.Fatalf("record allowed: exit %d: %s", st, errOut)
	}
	id = recordedRun.FindStringSubmatch(out)[1]
	show, _, _ = binRun(t, db.URL, "run", "show", id)
	if !strings.Contains(show, "TC-0425  16.745       register  NAVD88  1        5.104 m       post reset and checked from TC-0427 on 2024-05-28") {
		t.Errorf("run show lacks the reason:\n%s", show)
	}

	// Heights on two datums, and a book that names none: refused.
	b.Datum(t, registertest.DatumOpts{Code: "OBLD61"})
	b.Height(t, registertest.HeightOpts{Designation: "TC-0420", Datum: "OBLD61", Value: "3.400", Unit: "m"})
	data, err := os.ReadFile(line)
	if err != nil {
		t.Fatal(err)
	}
	noDatum := writeBook(t, "no-datum.csv", bytes.Replace(data, []byte("# datum: NAVD 88\n"), nil, 1))
	_, errOut, st = binRun(t, db.URL, "run", "check", noDatum, "--hold", "TC-0420")
	if want := "cairn: --hold: the held marks have current heights on NAVD88 and OBLD61 and the book names no datum: say which in the book (# datum: ...)"; st != ExitBadInput || strings.TrimSpace(errOut) != want {
		t.Errorf("two datums: exit %d, %q, want %q", st, errOut, want)
	}
}

func jsonID(id int64) string { return strings.TrimSpace(string(must(json.Marshal(id)))) }

func must[T any](v T, err error) T {
	if err != nil {
		panic(err)
	}
	return v
}

// A book with spot heights: reduced and reported, never created as marks
// by run record --new-marks; the intermediate sight on the held mark is
// checked (worked values in internal/reduce/spot_test.go: FL-1 9.4000 m,
// INV-3 8.6450 m, TC-0420 sighted at 9.9990 m, within 2.1 mm; read 1.7030
// it gives 9.9970 m and fails).
func TestRunSpotHeights(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	b := registertest.On(t, db)
	book := "../../testdata/books/orrin-bay-spot-heights.csv"
	out, errOut, st := binRun(t, db.URL, "run", "check", book, "--held-height", "TC-0420=10", "-o", "json")
	if st != ExitOK {
		t.Fatalf("run check: exit %d: %s", st, errOut)
	}
	var j struct {
		Spots []struct {
			Point   string  `json:"point"`
			Line    int     `json:"line"`
			HeightM float64 `json:"height_m"`
		} `json:"spot_heights"`
		HeldSights []struct {
			DifferenceM float64 `json:"difference_m"`
			Pass        bool    `json:"pass"`
		} `json:"held_sights"`
		Summary string `json:"summary"`
	}
	if err := json.Unmarshal([]byte(out), &j); err != nil {
		t.Fatal(err)
	}
	if len(j.Spots) != 2 || j.Spots[0].Point != "FL-1" || math.Abs(j.Spots[0].HeightM-9.4) > 1e-9 || j.Spots[1].Point != "INV-3" ||
		math.Abs(j.Spots[1].HeightM-8.645) > 1e-9 || len(j.HeldSights) != 1 || !j.HeldSights[0].Pass || j.Summary != "All checks passed." {
		t.Errorf("json %+v", j)
	}
	out, _, _ = binRun(t, db.URL, "run", "check", book, "--held-height", "TC-0420=10")
	for _, want := range []string{
		"Spot heights (not marks)\nLINE  POINT  SETUP  HEIGHT (m)  NOTE\n13    FL-1   1      9.4000      finished floor level\n16    INV-3  2      8.6450      drain invert at manhole 3\n",
		"Intermediate sights on held marks\nLINE  MARK     HEIGHT (m)  HELD (m)  DIFFERENCE (m)  LENGTH (m)  ALLOWABLE (m)  RESULT\n17    TC-0420  9.9990      10.0000   -0.0010         120.0       0.0021         pass\n",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("report lacks %q:\n%s", want, out)
		}
	}

	// Read 1.7030 on TC-0420, the check fails: exit 3.
	data, err := os.ReadFile(book)
	if err != nil {
		t.Fatal(err)
	}
	bad := writeBook(t, "misread.csv", bytes.Replace(data, []byte("TC-0420,,IS,1.7010,"), []byte("TC-0420,,IS,1.7030,"), 1))
	out, _, st = binRun(t, db.URL, "run", "check", bad, "--held-height", "TC-0420=10")
	if st != ExitChecks || !strings.Contains(out, "17    held_sight  TC-0420  intermediate sight gives 9.9970 m, -0.0030 m from the held height 10.0000 m: more than the allowable 0.0021 m over 120.0 m") {
		t.Errorf("exit %d:\n%s", st, out)
	}

	// A spot height is not a mark: not held, not looked up, not created.
	_, errOut, st = binRun(t, db.URL, "run", "check", book, "--hold", "FL-1")
	if st != ExitBadInput || strings.TrimSpace(errOut) != "cairn: --hold: cannot hold FL-1: it is a spot height (line 13), not a mark" {
		t.Errorf("hold a spot: exit %d, %q", st, errOut)
	}
	before := b.Counts(t)
	out, errOut, st = binRun(t, db.URL, "run", "record", book, "--held-height", "TC-0420=10", "--new-marks", "--by", "A. Moreau")
	if st != ExitOK || !strings.Contains(out, "Created marks (unverified, no height): TC-0420\n") {
		t.Fatalf("record: exit %d: %s\n%s", st, errOut, out)
	}
	b.AssertWrote(t, before, map[string]int64{"run": 1, "sighting": 7, "section": 1, "run_mark": 1, "run_held": 1, "mark": 1, "mark_condition": 1, "register_commit": 1})
	if _, _, st := binRun(t, db.URL, "mark", "show", "FL-1"); st != ExitBadInput {
		t.Errorf("mark show FL-1: exit %d, want 2 (no such mark)", st)
	}
	id := recordedRun.FindStringSubmatch(out)[1]
	show, _, _ := binRun(t, db.URL, "run", "show", id, "-o", "json")
	if !strings.Contains(show, `"mark": "TC-0420"`) || !strings.Contains(show, `"from": "typed"`) || !strings.Contains(show, `"height": "10"`) {
		t.Errorf("run show lacks the typed held height:\n%s", show)
	}
}

// A book with no class never ends "All checks passed": the summary names
// the checks not made, in run check and run record, and in their JSON.
func TestRunSummaryNoClass(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	data, err := os.ReadFile("../../testdata/books/orrin-bay-spot-heights.csv")
	if err != nil {
		t.Fatal(err)
	}
	book := writeBook(t, "no-class.csv", bytes.Replace(data, []byte("# class: second-I\n"), nil, 1))
	const want = "1 check made and passed; not made: distances booked, sight lengths, setup imbalance, section imbalance, misclosure (no class)."
	out, _, st := binRun(t, db.URL, "run", "check", book)
	if st != ExitOK || strings.Contains(out, "All checks passed") || !strings.Contains(out, "\n"+want+"\n") {
		t.Errorf("run check: exit %d:\n%s", st, out)
	}
	if !strings.Contains(lineWith(out, "misclosure  "), "-        -       not made: no accuracy class") {
		t.Errorf("checks table lacks the check not made:\n%s", out)
	}
	out, _, _ = binRun(t, db.URL, "run", "check", book, "-o", "json")
	var j struct {
		Summary       string `json:"summary"`
		AllChecksMade bool   `json:"all_checks_made"`
		Passed        bool   `json:"passed"`
	}
	if err := json.Unmarshal([]byte(out), &j); err != nil {
		t.Fatal(err)
	}
	if j.Summary != want || j.AllChecksMade || !j.Passed {
		t.Errorf("json %+v", j)
	}
	out, errOut, st := binRun(t, db.URL, "run", "record", book, "--new-marks", "--by", "A. Moreau")
	if st != ExitOK || strings.Contains(out, "All checks passed") || !strings.Contains(out, "\n"+want+"\n") {
		t.Errorf("run record: exit %d: %s\n%s", st, errOut, out)
	}
	id := recordedRun.FindStringSubmatch(out)[1]
	show, _, _ := binRun(t, db.URL, "run", "show", id)
	if strings.Contains(show, "all passed") || !regexp.MustCompile(`\bchecks +`+regexp.QuoteMeta(strings.TrimSuffix(want, "."))).MatchString(show) {
		t.Errorf("run show:\n%s", show)
	}
}
