package cli

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os/exec"
	"strings"
	"sync"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// workedCircuit is worked example 1 of docs/references.md as a level book (see
// the file's comments): BM1 held at 728.730 m, adjusted heights derived
// there at +0.008 m/km.
const workedCircuit = "../../testdata/adjust/worked-circuit.csv"

// seedWorked adds NAVD88, marks BM1 to BM6 and BM1's outside height, and
// records the worked circuit (copies > 1 get a line of their own) as runs;
// it returns the run identifiers and the books' bytes.
func seedWorked(t *testing.T, db *pgtest.DB, copies int) ([]int64, [][]byte) {
	t.Helper()
	runs := registertest.On(t, db).WorkedCircuit(t, registertest.WorkedCircuitOpts{Copies: copies,
		Source: "Outside control sheet 1 (invented citation)", Reason: "held control", By: "tester"})
	var books [][]byte
	for c := 1; c <= copies; c++ {
		books = append(books, registertest.WorkedBook(t, c))
	}
	return runs, books
}

// End to end through the commands: adjust, publish (refused off a
// terminal without --yes), height show, history and trace.
func TestAdjustPublishTraceCommands(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, books := seedWorked(t, db, 1)
	runID := fmt.Sprint(runs[0])

	var rep adjustmentJSON
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "adjust", runID, "--hold", "BM1", "--by", "tester", "-o", "json")), &rep); err != nil {
		t.Fatal(err)
	}
	if rep.AdjustmentID == nil || rep.Status != "draft" || len(rep.Results) != 6 || rep.Cautions == "" {
		t.Fatalf("adjust report: %+v", rep)
	}
	if r := rep.Results[3]; r.Mark != "BM4" || deref(r.Value) != "843.337" || deref(r.ReplacesVersion) != 0 {
		t.Fatalf("BM4 result %+v, want 843.337 replacing nothing", r)
	}
	id := fmt.Sprint(*rep.AdjustmentID)

	// Off a terminal, publishing without --yes asks nothing and does nothing.
	if _, errOut, status := run(t, db.URL, "publish", id, "--reason", "reviewed"); status != ExitBadInput || !strings.Contains(errOut, "--yes") {
		t.Fatalf("publish without --yes: exit %d, %s", status, errOut)
	}
	if _, errOut, status := run(t, db.URL, "publish", id, "--yes"); status != ExitBadInput || !strings.Contains(errOut, "reason") {
		t.Fatalf("publish without a reason: exit %d, %s", status, errOut)
	}
	mustRun(t, db.URL, "publish", id, "--reason", "worked circuit, reviewed", "--by", "reviewer", "--yes")

	var shown struct {
		Heights []heightJSON `json:"heights"`
	}
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "height", "show", "BM4", "-o", "json")), &shown); err != nil {
		t.Fatal(err)
	}
	if h := shown.Heights; len(h) != 1 || deref(h[0].Value) != "843.337" || h[0].SourceKind != "adjustment" {
		t.Fatalf("height show BM4: %+v", h)
	}

	// A new outside value for BM2, then a second adjustment: history shows
	// all three versions with their reasons.
	mustRun(t, db.URL, "height", "set", "--in-force-from", inForceNow(), "BM2", "783.250", "--unit", "m", "--datum", "NAVD88",
		"--source", "Outside check (invented citation)", "--reason", "outside check", "--by", "tester")
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "adjust", runID, "--hold", "BM1", "-o", "json")), &rep); err != nil {
		t.Fatal(err)
	}
	mustRun(t, db.URL, "publish", fmt.Sprint(*rep.AdjustmentID), "--reason", "re-adjusted", "--yes")
	var hist []heightJSON
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "history", "BM2", "-o", "json")), &hist); err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, h := range hist {
		got = append(got, deref(h.Value)+" "+h.Reason)
	}
	if want := "783.255 re-adjusted; 783.250 outside check; 783.255 worked circuit, reviewed"; strings.Join(got, "; ") != want {
		t.Fatalf("history BM2: %q, want %q", strings.Join(got, "; "), want)
	}

	// The trace reaches the book's SHA-256, computed here from the file,
	// and the outside citation.
	sum := sha256.Sum256(books[0])
	var tr traceJSON
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "trace", "BM4", "-o", "json")), &tr); err != nil {
		t.Fatal(err)
	}
	v := tr.Versions[0]
	if v.Adjustment == nil || len(v.Adjustment.Runs) != 1 || v.Adjustment.Runs[0].BookSHA256 != hex.EncodeToString(sum[:]) {
		t.Fatalf("trace BM4 does not reach the book's sha256 %x: %+v", sum, v.Adjustment)
	}
	if h := v.Adjustment.Held; len(h) != 1 || h[0].Mark != "BM1" || h[0].Source != "Outside control sheet 1 (invented citation)" {
		t.Fatalf("trace BM4 does not end at BM1's citation: %+v", h)
	}
	text := mustRun(t, db.URL, "trace", "BM4")
	for _, want := range []string{"sha256 " + hex.EncodeToString(sum[:]), "source: Outside control sheet 1 (invented citation)", "from adjustment 2 (proportional)"} {
		if !strings.Contains(text, want) {
			t.Errorf("trace BM4 table lacks %q:\n%s", want, text)
		}
	}
}

// Two cairn processes publish drafts over the same marks at once: one
// wins; the other exits 4 naming a mark and writes nothing.
func TestPublishRaceProcesses(t *testing.T) {
	t.Parallel()
	bin := cairnBinary(t)
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 2)
	var ids []string
	for _, r := range runs {
		var rep adjustmentJSON
		if err := json.Unmarshal([]byte(mustRun(t, db.URL, "adjust", fmt.Sprint(r), "--hold", "BM1", "-o", "json")), &rep); err != nil {
			t.Fatal(err)
		}
		ids = append(ids, fmt.Sprint(*rep.AdjustmentID))
	}
	before := registertest.Counts(t, db.Pool)
	var wg sync.WaitGroup
	status := make([]int, 2)
	stderr := make([]string, 2)
	for i, id := range ids {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var errOut bytes.Buffer
			cmd := exec.Command(bin, "--db", db.URL, "publish", id, "--reason", "race "+id, "--yes")
			cmd.Stderr = &errOut
			err := cmd.Run()
			stderr[i] = errOut.String()
			if ee, ok := err.(*exec.ExitError); ok {
				status[i] = ee.ExitCode()
			} else if err != nil {
				status[i] = -1
			}
		}()
	}
	wg.Wait()
	wins, conflicts := 0, 0
	for i := range status {
		switch status[i] {
		case 0:
			wins++
		case ExitConflict:
			conflicts++
			if !strings.Contains(stderr[i], "BM2 on NAVD88 changed since adjustment") {
				t.Errorf("conflict does not name the mark: %s", stderr[i])
			}
		default:
			t.Errorf("exit %d: %s", status[i], stderr[i])
		}
	}
	if wins != 1 || conflicts != 1 {
		t.Fatalf("%d won, %d conflicted: %v %q", wins, conflicts, status, stderr)
	}
	var n int
	if err := db.Pool.QueryRow(context.Background(), "SELECT count(*) FROM height WHERE adjustment_id IS NOT NULL").Scan(&n); err != nil {
		t.Fatal(err)
	}
	if n != 5 {
		t.Fatalf("%d versions from adjustments, want the winner's 5", n)
	}
	// The winner wrote its event and its versions; the loser nothing.
	registertest.AssertWrote(t, db.Pool, before, map[string]int64{"adjustment_event": 1, "height": 5, "register_commit": 1})
	var list []adjustmentRowJSON
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "adjustment", "list", "--status", "draft", "-o", "json")), &list); err != nil {
		t.Fatal(err)
	}
	if len(list) != 1 {
		t.Fatalf("drafts after the race: %+v, want the loser's one", list)
	}
}

// Flags are checked before any database is opened.
func TestAdjustPublishFlags(t *testing.T) {
	t.Parallel()
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"adjust", "1"}, "hold:"},
		{[]string{"adjust", "one", "--hold", "TC-0412"}, "run:"},
		{[]string{"adjust", "1", "--hold", "TC-0412", "--distribute", "sideways"}, "distribute:"},
		{[]string{"adjust", "1", "--hold", "TC-0412", "--reason", "x"}, "reason:"},
		{[]string{"publish", "0", "--reason", "x"}, "adjustment:"},
		{[]string{"publish", "3"}, "reason:"},
		{[]string{"discard", "3"}, "reason:"},
		{[]string{"trace", "TC-0412", "--as-of", "yesterday"}, "as-of:"},
	}
	for _, c := range cases {
		// No server: a database opened would fail with another message.
		ios, _, _, _ := TestStreams(false)
		f := NewFactory(ios, "test")
		f.DatabaseURL = "postgres://nobody@127.0.0.1:1/none"
		err := Execute(context.Background(), f, c.args)
		if exitCode(err) != ExitBadInput || !strings.Contains(err.Error(), c.want) {
			t.Errorf("cairn %s: %v (exit %d), want bad input on %s", strings.Join(c.args, " "), err, exitCode(err), c.want)
		}
	}
}

// The help of adjust and publish carries the cautions.
func TestAdjustPublishHelpCautions(t *testing.T) {
	t.Parallel()
	for _, cmd := range []string{"adjust", "publish", "adjustment show"} {
		ios, _, out, _ := TestStreams(false)
		f := NewFactory(ios, "test")
		if err := Execute(context.Background(), f, append(strings.Fields(cmd), "--help")); err != nil {
			t.Fatal(err)
		}
		for _, want := range []string{"licensed surveyor", "two", "condition", "regulations govern"} {
			if !strings.Contains(out.String(), want) {
				t.Errorf("cairn %s --help lacks %q", cmd, want)
			}
		}
	}
}

// An adjusted mark last reported destroyed is named in the report: loudly
// on stderr, and under marks_in_doubt in JSON, both when the draft is made
// and when it is shown again. A held mark in doubt is refused outright
// (tested with the register); an adjusted one is the reviewer's call, so
// it is warned about, not refused.
func TestAdjustWarnsOfAdjustedMarksInDoubt(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seedWorked(t, db, 1)
	mustRun(t, db.URL, "mark", "condition", "BM4", "destroyed", "--on", "2025-02-01", "--note", "culvert replaced", "--by", "tester")

	_, errOut, st := run(t, db.URL, "adjust", "1", "--hold", "BM1", "--by", "tester")
	if st != 0 || !strings.Contains(errOut, "WARNING: BM4 was last reported DESTROYED on 2025-02-01 (culvert replaced)") {
		t.Fatalf("adjust: exit %d, stderr %q", st, errOut)
	}
	if strings.Contains(errOut, "BM5 was last reported") {
		t.Fatalf("a mark in good standing is warned about: %q", errOut)
	}
	var j struct {
		MarksInDoubt []struct {
			Mark      string `json:"mark"`
			Condition string `json:"condition"`
		} `json:"marks_in_doubt"`
	}
	out := mustRun(t, db.URL, "adjustment", "show", "1", "-o", "json")
	if err := json.Unmarshal([]byte(out), &j); err != nil {
		t.Fatal(err)
	}
	if len(j.MarksInDoubt) != 1 || j.MarksInDoubt[0].Mark != "BM4" || j.MarksInDoubt[0].Condition != "destroyed" {
		t.Fatalf("marks_in_doubt = %+v, want BM4 destroyed", j.MarksInDoubt)
	}
}
