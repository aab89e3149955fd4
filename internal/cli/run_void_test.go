package cli

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// binMustRun is binRun for a command that must succeed; it returns stdout.
func binMustRun(t *testing.T, url string, args ...string) string {
	t.Helper()
	out, errOut, st := binRun(t, url, args...)
	if st != 0 {
		t.Fatalf("cairn %s: exit %d: %s", strings.Join(args, " "), st, errOut)
	}
	return out
}

// runShown is the part of `run show -o json` these tests read.
type runShown struct {
	ID                 int64     `json:"run_id"`
	FileName           string    `json:"file_name"`
	RecordedBy         string    `json:"recorded_by"`
	RecordedAt         time.Time `json:"recorded_at"`
	ObservationsSHA256 string    `json:"observations_sha256"`
	Voided             *voidJSON `json:"voided"`
}

func showRun(t *testing.T, url string, id int64) runShown {
	t.Helper()
	var r runShown
	if err := json.Unmarshal([]byte(binMustRun(t, url, "run", "show", fmt.Sprint(id), "-o", "json")), &r); err != nil {
		t.Fatal(err)
	}
	return r
}

// reorderColumns writes the rows of a book's CSV part in the column order
// order (indices of the header's columns); comment lines stay as they are.
func reorderColumns(book string, order []int) string {
	var b strings.Builder
	for _, line := range strings.SplitAfter(book, "\n") {
		body := strings.TrimSuffix(line, "\n")
		if body == "" || strings.HasPrefix(body, "#") {
			b.WriteString(line)
			continue
		}
		cells := strings.Split(body, ",")
		out := make([]string, len(order))
		for i, k := range order {
			out[i] = cells[k]
		}
		b.WriteString(strings.Join(out, ",") + "\n")
	}
	return b.String()
}

// The same observations saved as another file (CRLF line ends, an extra
// comment, the columns in another order, trailing spaces) are refused
// through the binary with one message naming the run that holds them, exit
// 2 and nothing written; a book that differs by one reading is recorded.
func TestRunRecordSameObservationsRefused(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	orig := string(registertest.Testdata(t, "books/tallis-north-loop.csv"))
	path := writeBook(t, "north-loop.csv", []byte(orig))
	binMustRun(t, db.URL, "run", "record", path, "--by", "R. Okafor", "--new-marks")
	held := showRun(t, db.URL, 1)
	if len(held.ObservationsSHA256) != 64 {
		t.Fatalf("run 1 keeps no observations fingerprint: %+v", held)
	}

	copies := []struct{ name, book string }{
		{"crlf.csv", strings.ReplaceAll(orig, "\n", "\r\n")},
		{"commented.csv", "# copied from the field book, page 12\n" +
			strings.Replace(orig, "TP3,FS", "# rod B from here\nTP3,FS", 1)},
		// point,sight,upper,middle,lower,note as note,lower,middle,upper,sight,point
		{"reordered.csv", reorderColumns(orig, []int{5, 4, 3, 2, 1, 0})},
		{"trailing-spaces.csv", strings.ReplaceAll(orig, "\n", "   \n")},
	}
	for _, c := range copies {
		if c.book == orig {
			t.Fatalf("%s: the copy is the same file", c.name)
		}
		p := writeBook(t, c.name, []byte(c.book))
		before := registertest.Counts(t, db.Pool)
		_, errOut, st := binRun(t, db.URL, "run", "record", p, "--by", "D. Lindqvist")
		want := fmt.Sprintf("cairn: %s holds the same observations as run 1 (from north-loop.csv, recorded %s by R. Okafor): "+
			"the same field work is recorded once, whatever the file looks like; if run 1 is wrong, void it first "+
			"(cairn run void 1 --reason ...); nothing was written\n", p, timeText(held.RecordedAt))
		if st != ExitBadInput || errOut != want {
			t.Errorf("%s: exit %d, stderr\n%q\nwant exit 2 and\n%q", c.name, st, errOut, want)
		}
		registertest.AssertNothingWritten(t, db.Pool, before)
	}

	// One reading more on TP3 (all three wires, so every check still
	// passes) is other observations.
	other := strings.Replace(orig, "TP3,FS,4.421,3.427,2.433", "TP3,FS,4.422,3.428,2.434", 1)
	if other == orig {
		t.Fatal("the reading to change is not in the book")
	}
	out := binMustRun(t, db.URL, "run", "record", writeBook(t, "north-loop-rerun.csv", []byte(other)), "--by", "D. Lindqvist")
	if !strings.HasPrefix(out, "Recorded run 2 from north-loop-rerun.csv") {
		t.Errorf("the book with one reading changed: %s", out)
	}
	registertest.AssertCounts(t, db.Pool, map[string]int64{"run": 2})
}

// A voided run: refused by number in adjust, left out with a warning when
// --marks or --area choose it (and the draft keeps which), its heights in
// stale, its void in trace, run list and run show; voiding it again is
// refused. All through the binary.
func TestRunVoid(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	b := registertest.On(t, db)
	for i := 1; i <= 6; i++ {
		b.Mark(t, registertest.MarkOpts{Designation: fmt.Sprintf("BM%d", i)}) // at 41.62+0.01k, -97.95
	}
	b.Height(t, registertest.HeightOpts{Designation: "BM1", Value: "728.730", Unit: "m",
		Source: "Outside control, sheet 1 (invented citation)", Reason: "outside control"})
	r1 := b.Run(t, registertest.RunOpts{Path: "worked-circuit.csv", Book: registertest.WorkedBook(t, 1)}).Run.ID
	r2 := b.Run(t, registertest.RunOpts{Path: "worked-circuit-2.csv", Book: registertest.WorkedBook(t, 2)}).Run.ID
	run1, run2 := fmt.Sprint(r1), fmt.Sprint(r2)

	var rep adjustmentJSON
	if err := json.Unmarshal([]byte(binMustRun(t, db.URL, "adjust", run1, "--hold", "BM1", "--by", "tester", "-o", "json")), &rep); err != nil {
		t.Fatal(err)
	}
	draft := fmt.Sprint(*rep.AdjustmentID)
	binMustRun(t, db.URL, "publish", draft, "--reason", "reviewed", "--by", "tester", "--yes")
	if out := binMustRun(t, db.URL, "stale", "-o", "json"); out != "[]\n" {
		t.Fatalf("stale before the void: %s", out)
	}

	// Void run 1.
	const why = "rod constant wrong in the book"
	before := registertest.Counts(t, db.Pool)
	_, errOut, st := binRun(t, db.URL, "run", "void", run1, "--reason", why, "--by", "P. Senior", "--yes")
	if st != 0 {
		t.Fatalf("run void: exit %d: %s", st, errOut)
	}
	registertest.AssertWrote(t, db.Pool, before, map[string]int64{"run_event": 1, "register_commit": 1})
	v := showRun(t, db.URL, r1).Voided
	if v == nil || v.VoidedBy != "P. Senior" || v.Reason != why {
		t.Fatalf("run show -o json: voided %+v", v)
	}
	at := timeText(v.VoidedAt)
	voided := fmt.Sprintf("%s by P. Senior: %s", at, why)
	if want := fmt.Sprintf("Run %d (worked-circuit.csv) voided %s\n", r1, voided); !strings.HasPrefix(errOut, want) {
		t.Errorf("run void said %q, want it to begin %q", errOut, want)
	}

	refused := func(want string, args ...string) {
		t.Helper()
		before := registertest.Counts(t, db.Pool)
		_, errOut, st := binRun(t, db.URL, args...)
		if st != ExitBadInput || errOut != want {
			t.Errorf("cairn %s: exit %d, stderr\n%q\nwant exit 2 and\n%q", strings.Join(args, " "), st, errOut, want)
		}
		registertest.AssertNothingWritten(t, db.Pool, before)
	}
	// Twice: refused.
	refused(fmt.Sprintf("cairn: run: run %d is voided already (%s); a run is voided once\n", r1, voided),
		"run", "void", run1, "--reason", "again", "--by", "P. Senior", "--yes")
	// Named in an adjustment: refused, saying when, by whom and why.
	refused(fmt.Sprintf("cairn: adjust: run %d was voided %s; a voided run is left out of adjustments (see cairn run show %d)\n", r1, voided, r1),
		"adjust", run1, "--hold", "BM1", "--by", "tester")
	refused(fmt.Sprintf("cairn: adjust: run %d was voided %s; a voided run is left out of adjustments (see cairn run show %d)\n", r1, voided, r1),
		"adjust", run2, run1, "--hold", "BM1", "--dry-run")

	// Chosen by marks or by area: left out, with a warning and in the
	// report; the stored draft keeps which.
	warning := fmt.Sprintf("warning: run %d \"Worked circuit\" is left out of the adjustment: voided %s\n", r1, voided)
	for _, args := range [][]string{
		{"adjust", "--marks", "BM2", "--hold", "BM1", "--by", "tester", "-o", "json"},
		{"adjust", "--area", "41.62,-97.95", "--within", "1km", "--hold", "BM1", "--dry-run", "-o", "json"},
	} {
		out, errOut, st := binRun(t, db.URL, args...)
		if st != 0 {
			t.Fatalf("cairn %s: exit %d: %s", strings.Join(args, " "), st, errOut)
		}
		if !strings.Contains(errOut, warning) {
			t.Errorf("cairn %s: stderr %q lacks %q", strings.Join(args, " "), errOut, warning)
		}
		var j adjustmentJSON
		if err := json.Unmarshal([]byte(out), &j); err != nil {
			t.Fatal(err)
		}
		if len(j.Runs) != 1 || j.Runs[0].RunID != r2 || len(j.RunsLeftOut) != 1 || j.RunsLeftOut[0].RunID != r1 ||
			j.RunsLeftOut[0].Voided == nil || j.RunsLeftOut[0].Voided.Reason != why ||
			len(j.Parameters.RunsLeftOut) != 1 || j.Parameters.RunsLeftOut[0] != r1 {
			t.Errorf("cairn %s: runs %+v, left out %+v, parameters %+v", strings.Join(args, " "), j.Runs, j.RunsLeftOut, j.Parameters.RunsLeftOut)
		}
		if j.AdjustmentID != nil {
			var shown adjustmentJSON
			if err := json.Unmarshal([]byte(binMustRun(t, db.URL, "adjustment", "show", fmt.Sprint(*j.AdjustmentID), "-o", "json")), &shown); err != nil {
				t.Fatal(err)
			}
			if len(shown.Parameters.RunsLeftOut) != 1 || shown.Parameters.RunsLeftOut[0] != r1 {
				t.Errorf("the stored draft's parameters: runs left out %v, want [%d]", shown.Parameters.RunsLeftOut, r1)
			}
		}
	}

	// Stale: every current height of the adjustment that used it.
	var stale []staleJSON
	if err := json.Unmarshal([]byte(binMustRun(t, db.URL, "stale", "-o", "json")), &stale); err != nil {
		t.Fatal(err)
	}
	if len(stale) != 5 {
		t.Fatalf("stale: %d heights, want BM2 to BM6: %+v", len(stale), stale)
	}
	wantReason := fmt.Sprintf("run %d of adjustment %s was voided %s", r1, draft, voided)
	for _, h := range stale {
		if len(h.Reasons) != 1 || h.Reasons[0].Kind != "voided-run" || h.Reasons[0].Run != r1 || h.Reasons[0].Text != wantReason {
			t.Errorf("stale %s: reasons %+v, want one voided-run: %q", h.Mark, h.Reasons, wantReason)
		}
	}
	if out := binMustRun(t, db.URL, "stale"); !strings.Contains(out, "voided-run\t"+wantReason) {
		t.Errorf("stale:\n%s", out)
	}
	// stale --datum and --limit: two of the five, and a word that there
	// are more; --area: the five near the circuit, none at 0,0.
	if out, errOut, status := binRun(t, db.URL, "stale", "--datum", "NAVD88", "--limit", "2", "-o", "json"); status != ExitOK ||
		json.Unmarshal([]byte(out), &stale) != nil || len(stale) != 2 || !strings.Contains(errOut, "more heights are stale than the 2 listed") {
		t.Errorf("stale --limit 2: exit %d, %s, stderr %q", status, out, errOut)
	}
	if err := json.Unmarshal([]byte(binMustRun(t, db.URL, "stale", "--area", "41.62,-97.95", "--within", "10km", "-o", "json")), &stale); err != nil || len(stale) != 5 {
		t.Errorf("stale --area of the circuit: %d heights, %v", len(stale), err)
	}
	if out := binMustRun(t, db.URL, "stale", "--area", "0,0", "--within", "10km", "-o", "json"); out != "[]\n" {
		t.Errorf("stale --area 0,0: %s", out)
	}
	for _, bad := range [][]string{{"--area", "north"}, {"--limit", "-1"}, {"--datum", "NAVD89"}, {"--area", "91,0"}} {
		if _, errOut, status := binRun(t, db.URL, append([]string{"stale"}, bad...)...); status != ExitBadInput || !strings.Contains(errOut, strings.TrimPrefix(bad[0], "--")) {
			t.Errorf("stale %v: exit %d, %s", bad, status, errOut)
		}
	}

	// Trace shows the void on the run.
	tr := binMustRun(t, db.URL, "trace", "BM3")
	if want := fmt.Sprintf("run %d \"Worked circuit\" (observed 2024-05-14, class not booked): book worked-circuit.csv", r1); !strings.Contains(tr, want) ||
		!strings.Contains(tr, "VOIDED "+voided+"\n") {
		t.Errorf("trace BM3 lacks the void:\n%s", tr)
	}

	// run list: a column; run show: a field and a warning.
	list := binMustRun(t, db.URL, "run", "list")
	rows := pipedRows(t, list)
	if len(rows) != 2 || !strings.HasPrefix(rows[0], run1+"\t") || !strings.HasSuffix(rows[0], "\tvoided "+voided) ||
		!strings.HasSuffix(rows[1], "\tno") {
		t.Errorf("run list:\n%s", list)
	}
	out, errOut, st := binRun(t, db.URL, "run", "show", run1)
	if st != 0 || !regexp.MustCompile(`\nVOIDED +`+regexp.QuoteMeta(voided+" (left out of adjustments)")+"\n").MatchString(out) ||
		!strings.Contains(errOut, fmt.Sprintf("Run %d is VOIDED (%s)", r1, voided)) {
		t.Errorf("run show %d: exit %d\n%s\n%s", r1, st, out, errOut)
	}
	if out := binMustRun(t, db.URL, "run", "show", run2); !regexp.MustCompile(`\nvoided +no\n`).MatchString(out) {
		t.Errorf("run show %d:\n%s", r2, out)
	}

	// With every run it chooses voided, --marks leaves nothing to adjust.
	binMustRun(t, db.URL, "run", "void", run2, "--reason", "copy of the same circuit", "--by", "P. Senior", "--yes")
	refused(fmt.Sprintf("cairn: adjust: --marks: every run chosen is voided (runs %d, %d): nothing is left to adjust\n", r1, r2),
		"adjust", "--marks", "BM2", "--hold", "BM1", "--by", "tester")
}

// run void checks its own flags before it opens the register, and asks
// before voiding unless --yes.
func TestRunVoidFlags(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"run", "void", "1", "--by", "x", "--yes"}, "cairn: --reason: say why the run is voided\n"},
		{[]string{"run", "void", "1", "--reason", "  ", "--yes"}, "cairn: --reason: say why the run is voided\n"},
		{[]string{"run", "void", "1", "--reason", "r", "--by", " ", "--yes"}, "cairn: --by: say who voids the run\n"},
		{[]string{"run", "void", "x1", "--reason", "r", "--yes"}, "cairn: \"x1\" is not a run number (see cairn run list)\n"},
		{[]string{"run", "void", "1", "--reason", "r"}, "cairn: yes: not on a terminal, so nothing was asked and nothing was done; give --yes to go ahead\n"},
		{[]string{"run", "void", "7", "--reason", "r", "--yes"}, "cairn: run: no run 7 in the register (see cairn run list)\n"},
	} {
		_, errOut, st := run(t, db.URL, c.args...)
		if st != ExitBadInput || errOut != c.want {
			t.Errorf("cairn %s: exit %d, %q; want exit 2, %q", strings.Join(c.args, " "), st, errOut, c.want)
		}
	}
}

// Recording a book again after the run holding its observations is voided:
// another file of the same observations is recorded; the same file stays
// refused, saying the run is voided and how to record it again.
func TestRunRecordAfterVoid(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	orig := registertest.Testdata(t, "books/tallis-north-loop.csv")
	path := writeBook(t, "north-loop.csv", orig)
	mustRun(t, db.URL, "run", "record", path, "--by", "R. Okafor", "--new-marks")
	mustRun(t, db.URL, "run", "void", "1", "--reason", "recorded with the wrong corrections", "--by", "P. Senior", "--yes")
	_, errOut, st := run(t, db.URL, "run", "record", path, "--by", "R. Okafor")
	if st != ExitBadInput || !strings.Contains(errOut, "is already recorded as run 1 ") ||
		!strings.Contains(errOut, "run 1 is voided, and the register keeps each file once: to record its observations again, add a comment to the book saying why; nothing was written") {
		t.Errorf("the same file after the void: exit %d, %s", st, errOut)
	}
	again := filepath.Join(t.TempDir(), "north-loop-again.csv")
	if err := os.WriteFile(again, append([]byte("# recorded again: run 1 was voided\n"), orig...), 0o644); err != nil {
		t.Fatal(err)
	}
	if out := mustRun(t, db.URL, "run", "record", again, "--by", "R. Okafor", "--curvature-refraction"); !strings.HasPrefix(out, "Recorded run 2 ") {
		t.Errorf("recorded again: %s", out)
	}
	if a, b := showRun(t, db.URL, 1), showRun(t, db.URL, 2); a.ObservationsSHA256 != b.ObservationsSHA256 {
		t.Errorf("fingerprints %s and %s of the same observations", a.ObservationsSHA256, b.ObservationsSHA256)
	}
	// And while run 2 stands, a third copy is refused, naming run 2.
	third := writeBook(t, "north-loop-third.csv", append([]byte("# third\n"), orig...))
	if _, errOut, st := run(t, db.URL, "run", "record", third, "--by", "R. Okafor"); st != ExitBadInput ||
		!strings.Contains(errOut, "holds the same observations as run 2 ") {
		t.Errorf("a third copy: exit %d, %s", st, errOut)
	}
}
