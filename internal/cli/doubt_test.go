package cli

import (
	"encoding/json"
	"fmt"
	"slices"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/register"
	"cairn/internal/registertest"
)

// doubtKinds are the kinds of doubts, in order.
func doubtKinds(ds register.Doubts) []string {
	var out []string
	for _, d := range ds {
		out = append(out, d.Kind)
	}
	return out
}

// hasKinds says whether ds holds exactly the kinds want, in any order.
func hasKinds(ds register.Doubts, want ...string) bool {
	got := doubtKinds(ds)
	slices.Sort(got)
	want = slices.Clone(want)
	slices.Sort(want)
	return slices.Equal(got, want)
}

// pipedRow returns the tab-separated row of a piped table whose first
// cell is first (nil if none), skipping a header line.
func pipedRow(out, first string) []string {
	for _, line := range strings.Split(strings.TrimRight(out, "\n"), "\n") {
		cells := strings.Split(line, "\t")
		if cells[0] == first {
			return cells
		}
	}
	return nil
}

// The doubts of a mark, each kind made as a practitioner would meet it,
// are shown by every command that reads a height, through the built
// binary: in JSON a "doubts" list on every height, in tables a DOUBT
// column, on stderr the loud warning.
//
// The worked circuit (registertest) is recorded twice. Adjustment 1 of run
// 1 holds BM1 and is published. BM1 is then reported disturbed: run 1
// touched it before the report, so adjustment 1's heights are stale, and
// BM1 itself is in doubt by its condition. Run 2 is adjusted holding BM1
// (allowed, with a reason) and published with its failed check (the held
// mark in doubt) accepted; run 2 is then voided. BM4's current height,
// from adjustment 2, has three doubts: accepted failures, a voided run,
// and stale; its earlier version none that still applies to a superseded
// version (it is not current).
func TestDoubtShownEverywhere(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 2)
	run1, run2 := fmt.Sprint(runs[0]), fmt.Sprint(runs[1])
	a1 := adjustmentID(t, binMustRun(t, db.URL, "adjust", run1, "--hold", "BM1", "--by", "adjuster", "-o", "json"))
	binMustRun(t, db.URL, "publish", a1, "--reason", "circuit of May 2024", "--by", "reviewer", "--yes")
	binMustRun(t, db.URL, "mark", "condition", "BM1", "disturbed", "--note", "struck by a grader", "--by", "crew")
	out, _ := mustBin(t, db, 0, "adjust", run2, "--hold", "BM1", "--allow-condition", "--reason", "no other control near",
		"--by", "adjuster", "-o", "json")
	a2 := adjustmentID(t, out)
	binMustRun(t, db.URL, "publish", a2, "--reason", "second running", "--by", "reviewer", "--yes",
		"--accept-failed-checks", "--accept-reason", "BM1 checked by tape from its witness marks")
	binMustRun(t, db.URL, "run", "void", run2, "--reason", "rod not plumb", "--by", "P. Senior", "--yes")

	current := []string{register.DoubtAcceptedFailures, register.DoubtVoidedRun, register.DoubtStale}

	// height show: JSON, table and the loud warning.
	var hs struct {
		Doubts  register.Doubts `json:"doubts"`
		Heights []heightJSON    `json:"heights"`
	}
	out, errOut := mustBin(t, db, 0, "height", "show", "BM4", "-o", "json")
	if err := json.Unmarshal([]byte(out), &hs); err != nil {
		t.Fatal(err)
	}
	if !hasKinds(hs.Doubts, current...) || len(hs.Heights) != 1 || !hasKinds(hs.Heights[0].Doubts, current...) {
		t.Errorf("height show BM4 -o json: doubts %v, heights %+v; want %v", doubtKinds(hs.Doubts), hs.Heights, current)
	}
	for _, want := range []string{
		"WARNING: BM4 on NAVD88, version 2: adjustment " + a2 + " was PUBLISHED WITH FAILED CHECKS ACCEPTED by reviewer on ",
		"(BM1 checked by tape from its witness marks); accepted held-mark-condition: held mark BM1 was reported disturbed on ",
		"WARNING: BM4 on NAVD88, version 2: adjustment " + a2 + " used run " + run2 + ", voided ",
		" by P. Senior: rod not plumb; adjust it again without that run before relying on it",
		"WARNING: BM4 on NAVD88, version 2: stale: run " + run2 + " of adjustment " + a2 + " touched BM1, reported disturbed on ",
	} {
		if !strings.Contains(errOut, want) {
			t.Errorf("height show BM4: stderr lacks %q:\n%s", want, errOut)
		}
	}
	out, _ = mustBin(t, db, 0, "height", "show", "BM4")
	if row := pipedRow(out, "NAVD88"); row == nil || row[len(row)-1] != "accepted-failures,voided-run,stale" {
		t.Errorf("height show BM4 piped: row %q, want the DOUBT cell last", row)
	}
	_, errOut = mustBin(t, db, 0, "height", "show", "BM1")
	if !strings.Contains(errOut, "WARNING: mark BM1 was reported DISTURBED on ") || !strings.Contains(errOut, "(struck by a grader)") {
		t.Errorf("height show BM1: no warning of its condition:\n%s", errOut)
	}

	// height list: a column, and a count on stderr.
	out, errOut = mustBin(t, db, 0, "height", "list")
	for mark, want := range map[string]string{"BM1": "disturbed", "BM4": "accepted-failures,voided-run,stale"} {
		if row := pipedRow(out, mark); row == nil || row[len(row)-1] != want {
			t.Errorf("height list: %s row %q, want DOUBT %q", mark, row, want)
		}
	}
	if !strings.Contains(errOut, "WARNING: 6 of the 6 heights listed are in doubt") {
		t.Errorf("height list: stderr %q", errOut)
	}
	var hl []heightJSON
	out, _ = mustBin(t, db, 0, "height", "list", "-o", "json")
	if err := json.Unmarshal([]byte(out), &hl); err != nil || len(hl) != 6 {
		t.Fatalf("height list -o json: %v %s", err, out)
	}
	if !hasKinds(hl[0].Doubts, register.DoubtCondition) || !hasKinds(hl[3].Doubts, current...) {
		t.Errorf("height list -o json: BM1 %v, BM4 %v", doubtKinds(hl[0].Doubts), doubtKinds(hl[3].Doubts))
	}

	// history: the current version's doubts; the superseded one's none.
	var hist []heightJSON
	out, errOut = mustBin(t, db, 0, "history", "BM4", "-o", "json")
	if err := json.Unmarshal([]byte(out), &hist); err != nil || len(hist) != 2 {
		t.Fatalf("history BM4 -o json: %v %s", err, out)
	}
	if !hasKinds(hist[0].Doubts, current...) || hist[1].Doubts == nil || len(hist[1].Doubts) != 0 {
		t.Errorf("history BM4: version 2 %v, version 1 %v; want %v and an empty list", doubtKinds(hist[0].Doubts), hist[1].Doubts, current)
	}
	if !strings.Contains(errOut, "WARNING: BM4 on NAVD88, version 2: adjustment "+a2+" used run "+run2) {
		t.Errorf("history BM4: no loud warning:\n%s", errOut)
	}
	out, _ = mustBin(t, db, 0, "history", "BM4")
	if row := pipedRow(out, "NAVD88"); row == nil || row[len(row)-1] != "accepted-failures,voided-run,stale" {
		t.Errorf("history BM4 piped: first row %q", row)
	}

	// mark list and mark show.
	var ml []markJSON
	out, _ = mustBin(t, db, 0, "mark", "list", "-o", "json")
	if err := json.Unmarshal([]byte(out), &ml); err != nil || len(ml) != 6 {
		t.Fatalf("mark list -o json: %v %s", err, out)
	}
	if !hasKinds(ml[0].Doubts, register.DoubtCondition) || !hasKinds(ml[3].Doubts, current...) {
		t.Errorf("mark list -o json: BM1 %v, BM4 %v", doubtKinds(ml[0].Doubts), doubtKinds(ml[3].Doubts))
	}
	out, _ = mustBin(t, db, 0, "mark", "list")
	if row := pipedRow(out, "BM4"); row == nil || row[len(row)-1] != "accepted-failures,voided-run,stale" {
		t.Errorf("mark list piped: BM4 row %q", row)
	}
	var ms markJSON
	out, errOut = mustBin(t, db, 0, "mark", "show", "BM4", "-o", "json")
	if err := json.Unmarshal([]byte(out), &ms); err != nil {
		t.Fatal(err)
	}
	if !hasKinds(ms.Doubts, current...) || len(ms.Heights) != 1 || !hasKinds(ms.Heights[0].Doubts, current...) {
		t.Errorf("mark show BM4 -o json: %v", doubtKinds(ms.Doubts))
	}
	if !strings.Contains(errOut, "WARNING: BM4 on NAVD88, version 2: stale: ") {
		t.Errorf("mark show BM4: no loud warning:\n%s", errOut)
	}
	out, _ = mustBin(t, db, 0, "mark", "show", "BM4")
	if !strings.Contains(out, "DOUBT\tBM4 on NAVD88, version 2: adjustment "+a2+" used run "+run2+", voided ") {
		t.Errorf("mark show BM4 piped: no DOUBT row:\n%s", out)
	}

	// trace: each node with its own, the held BM1 with its condition.
	var tr traceJSON
	out, errOut = mustBin(t, db, 0, "trace", "BM4", "-o", "json")
	if err := json.Unmarshal([]byte(out), &tr); err != nil {
		t.Fatal(err)
	}
	if len(tr.Versions) != 1 || !hasKinds(tr.Doubts, current...) || !hasKinds(tr.Versions[0].Doubts, current...) {
		t.Fatalf("trace BM4 -o json: %v", doubtKinds(tr.Doubts))
	}
	if held := tr.Versions[0].Adjustment.Held; len(held) != 1 || held[0].Mark != "BM1" || !hasKinds(held[0].Doubts, register.DoubtCondition) {
		t.Errorf("trace BM4: held %+v, want BM1 with its condition doubt", held)
	}
	if !strings.Contains(errOut, "WARNING: BM4 on NAVD88, version 2: adjustment "+a2+" used run "+run2) {
		t.Errorf("trace BM4: no loud warning:\n%s", errOut)
	}
	out, _ = mustBin(t, db, 0, "trace", "BM4")
	for _, want := range []string{"    !! DOUBT: BM4 on NAVD88, version 2: stale: ", "!! DOUBT: BM1 was reported DISTURBED on "} {
		if !strings.Contains(out, want) {
			t.Errorf("trace BM4 lacks %q:\n%s", want, out)
		}
	}

	// adjust: the held marks' doubts in its report.
	var rep adjustmentJSON
	hold := []string{"adjust", run1, "--hold", "BM1", "--hold", "BM4", "--allow-condition", "--reason", "tape check", "--by", "adjuster", "--dry-run"}
	out, errOut = mustBin(t, db, 0, append(hold, "-o", "json")...)
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if len(rep.Held) != 2 || !hasKinds(rep.Held[0].Doubts, register.DoubtCondition) || !hasKinds(rep.Held[1].Doubts, current...) {
		t.Errorf("adjust holding BM1 and BM4: held %+v", rep.Held)
	}
	out, errOut = mustBin(t, db, 0, hold...)
	if !strings.Contains(errOut, "WARNING: BM4 on NAVD88, version 2: adjustment "+a2+" used run "+run2) {
		t.Errorf("adjust holding BM4: no loud warning:\n%s", errOut)
	}
	if !strings.Contains(out+errOut, "    !! DOUBT: BM4 on NAVD88, version 2: stale: ") {
		t.Errorf("adjust holding BM4: the held marks lack the doubt:\n%s", out+errOut)
	}
}

// A new height does not clear the doubt a condition report cast: only a
// report does, which publish writes when asked (--report-condition), dated
// by the run that levelled the mark; a mark reported in doubt after that
// run is refused, exit 2, nothing written.
func TestPublishReportsCondition(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 3)
	// Reported disturbed in 2020, before the runs of 2024-05-14.
	binMustRun(t, db.URL, "mark", "condition", "BM3", "disturbed", "--on", "2020-03-01", "--note", "kerb rebuilt", "--by", "crew")

	a1 := adjustmentID(t, binMustRun(t, db.URL, "adjust", fmt.Sprint(runs[0]), "--hold", "BM1", "--by", "adjuster", "-o", "json"))
	var pub publishJSON
	if err := json.Unmarshal([]byte(binMustRun(t, db.URL, "publish", a1, "--reason", "first", "--by", "reviewer", "--yes", "-o", "json")), &pub); err != nil {
		t.Fatal(err)
	}
	if len(pub.StillInDoubt) != 1 || pub.StillInDoubt[0].Mark != "BM3" || len(pub.ConditionsReported) != 0 {
		t.Errorf("publish without --report-condition: still in doubt %+v, reported %+v", pub.StillInDoubt, pub.ConditionsReported)
	}
	var hs struct {
		Doubts register.Doubts `json:"doubts"`
	}
	if err := json.Unmarshal([]byte(binMustRun(t, db.URL, "height", "show", "BM3", "-o", "json")), &hs); err != nil || !hasKinds(hs.Doubts, register.DoubtCondition) {
		t.Errorf("BM3 after a new height, no report: doubts %v (%v); want its condition", doubtKinds(hs.Doubts), err)
	}

	// The note is required with the condition.
	a2 := adjustmentID(t, binMustRun(t, db.URL, "adjust", fmt.Sprint(runs[1]), "--hold", "BM1", "--by", "adjuster", "-o", "json"))
	if _, errOut, st := binRun(t, db.URL, "publish", a2, "--reason", "second", "--yes", "--report-condition", "good"); st != ExitBadInput ||
		!strings.Contains(errOut, "--report-condition needs --condition-note") {
		t.Errorf("--report-condition without a note: exit %d, %s", st, errOut)
	}
	if _, errOut, st := binRun(t, db.URL, "publish", a2, "--reason", "second", "--yes", "--report-condition", "fine", "--condition-note", "x"); st != ExitBadInput ||
		!strings.Contains(errOut, `"fine" is not a condition that clears a doubt (want good or reset)`) {
		t.Errorf("--report-condition fine: exit %d, %s", st, errOut)
	}
	if err := json.Unmarshal([]byte(binMustRun(t, db.URL, "publish", a2, "--reason", "second", "--by", "reviewer", "--yes", "-o", "json",
		"--report-condition", "good", "--condition-note", "kerb and mark sound, levelled through")), &pub); err != nil {
		t.Fatal(err)
	}
	if len(pub.ConditionsReported) != 1 || pub.ConditionsReported[0].Mark != "BM3" || pub.ConditionsReported[0].Condition != "good" ||
		pub.ConditionsReported[0].ObservedOn != "2024-05-14" || len(pub.StillInDoubt) != 0 ||
		pub.ConditionsReported[0].Note != "kerb and mark sound, levelled through (reported with the publication of adjustment "+a2+", which levelled the mark)" {
		t.Errorf("publish --report-condition good: reported %+v, still in doubt %+v", pub.ConditionsReported, pub.StillInDoubt)
	}
	if err := json.Unmarshal([]byte(binMustRun(t, db.URL, "height", "show", "BM3", "-o", "json")), &hs); err != nil || len(hs.Doubts) != 0 {
		t.Errorf("BM3 after the report: doubts %v (%v); want none", doubtKinds(hs.Doubts), err)
	}

	// Reported disturbed today, after the runs: the publication cannot
	// speak for it.
	binMustRun(t, db.URL, "mark", "condition", "BM5", "disturbed", "--note", "trench dug beside it", "--by", "crew")
	a3 := adjustmentID(t, binMustRun(t, db.URL, "adjust", fmt.Sprint(runs[2]), "--hold", "BM1", "--by", "adjuster", "-o", "json"))
	before := registertest.Counts(t, db.Pool)
	_, errOut, st := binRun(t, db.URL, "publish", a3, "--reason", "third", "--by", "reviewer", "--yes",
		"--report-condition", "reset", "--condition-note", "re-set")
	if want := "after the last run of adjustment " + a3 + " that levelled it (2024-05-14): that run cannot speak for the mark since"; st != ExitBadInput || !strings.Contains(errOut, "BM5 was reported disturbed on ") || !strings.Contains(errOut, want) {
		t.Errorf("publish --report-condition over a later report: exit %d, %s", st, errOut)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}

// Text from the register is shown with its control characters made
// visible: an escape sequence in a condition note that would move the
// cursor up and erase the DESTROYED line (ESC [1A ESC [2K) cannot, on
// stderr or in a table; JSON gives the note back exactly.
func TestEscapesInNotesMadeVisible(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seedWorked(t, db, 1)
	note := "gone\x1b[1A\x1b[2K\rall good \u202eevil"
	binMustRun(t, db.URL, "mark", "condition", "BM2", "destroyed", "--note", note, "--by", "crew")
	_, errOut := mustBin(t, db, 0, "height", "show", "BM2")
	want := `WARNING: mark BM2 was reported DESTROYED on `
	shown := `(gone\u001b[1A\u001b[2K\u000dall good \u202eevil)`
	if !strings.Contains(errOut, want) || !strings.Contains(errOut, shown) || strings.ContainsAny(errOut, "\x1b\r\u202e") {
		t.Errorf("height show BM2: stderr %q; want %q with %q and no raw controls", errOut, want, shown)
	}
	out, _ := mustBin(t, db, 0, "mark", "show", "BM2")
	if strings.ContainsAny(out, "\x1b\r") || !strings.Contains(out, `destroyed by crew: gone\u001b[1A`) {
		t.Errorf("mark show BM2 piped: %q", out)
	}
	var ms markJSON
	if err := json.Unmarshal([]byte(binMustRun(t, db.URL, "mark", "show", "BM2", "-o", "json")), &ms); err != nil ||
		len(ms.Conditions) == 0 || ms.Conditions[0].Note != note {
		t.Errorf("mark show -o json does not give the note back exactly: %+v (%v)", ms.Conditions, err)
	}
	// On a terminal, all of it (in process, with the terminal flag on).
	out, errOut = onStreams(t, db.URL, true, "mark", "show", "BM2")
	if strings.ContainsAny(out+errOut, "\x1b\r\u202e") || !strings.Contains(out, `gone\u001b[1A`) {
		t.Errorf("mark show BM2 on a terminal: %q %q", out, errOut)
	}
}
