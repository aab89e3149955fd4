package cli

import (
	"fmt"
	"strings"
	"testing"

	"cairn/internal/pgtest"
)

// spurBook writes a second-II book in metres along marks, each section two
// setups of four 62.5 m sights (250 m one way, K = 0.25 km), rising by
// rises[i] metres; header adds metadata lines.
func spurBook(header string, marks []string, rises []float64) []byte {
	var sb strings.Builder
	sb.WriteString("# units: m\n# class: second-II\n# datum: NAVD88\n" + header + "point,sight,middle,distance\n")
	tp := 0
	for i, rise := range rises {
		tp++
		fmt.Fprintf(&sb, "%s,BS,1.5000,62.5\nTP%d,FS,1.5000,62.5\n", marks[i], tp)
		fmt.Fprintf(&sb, "TP%d,BS,%.4f,62.5\n%s,FS,1.5000,62.5\n", tp, 1.5+rise, marks[i+1])
	}
	return []byte(sb.String())
}

// squash writes every run of spaces as one, so that a test does not
// depend on the widths of aligned columns.
func squash(s string) string { return strings.Join(strings.Fields(s), " ") }

// A run out and back, A→B→C→B→A, through the built binary: run check
// shows its two double-run sections against the section tolerance
// (second-II, 8 mm·√K with K the one-way length: FGCC 1984 §3.5, table from
// memory, docs/references.md#accuracy-classes; derived: K = 0.25 km gives
// 4.0 mm), fails the one whose closure is 4.1 mm, and run record keeps the
// comparison, which run show prints.
func TestDoubleRunInOneBook(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	marks := []string{"TC-A", "TC-B", "TC-C", "TC-B", "TC-A"}
	path := writeBook(t, "spur.csv", spurBook("", marks, []float64{0.3, 0.5, -0.5041, -0.3}))

	out, errOut, st := binRun(t, db.URL, "run", "check", path)
	if st != ExitChecks {
		t.Fatalf("run check exit %d, want %d: %s\n%s", st, ExitChecks, errOut, out)
	}
	for _, want := range []string{
		"Double-run sections (forward + backward)",
		"TC-B  TC-C  section 2, lines 9-12   section 3, lines 13-16  +0.5000        -0.5041         -0.0041        250.0          0.0040           FAIL",
		"TC-A  TC-B  section 1, lines 5-8    section 4, lines 17-20  +0.3000        -0.3000         +0.0000        250.0          0.0040           pass",
		"double_run         2        1       forward + backward within 8 mm·√K, K the one-way length in km (second-II)",
		"forward 0.5000 m and backward -0.5041 m (section 3) close by -0.0041 m, more than the allowable 0.0040 m over 250.0 m one way",
	} {
		if !strings.Contains(squash(out), squash(want)) {
			t.Errorf("run check lacks %q:\n%s", want, out)
		}
	}
	mustRun(t, db.URL, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988")
	out, errOut, st = binRun(t, db.URL, "run", "record", path, "--by", "tester", "--new-marks", "--accept-failed-checks", "--reason", "spur to be releveled")
	if st != 0 {
		t.Fatalf("run record exit %d: %s", st, errOut)
	}
	id := recordedRun.FindStringSubmatch(out)[1]
	show, errOut, st := binRun(t, db.URL, "run", "show", id)
	if st != 0 {
		t.Fatalf("run show exit %d: %s", st, errOut)
	}
	for _, want := range []string{"Double-run sections (forward + backward)", "-0.0041        250.0          0.0040           FAIL", "double_run"} {
		if !strings.Contains(squash(show), squash(want)) {
			t.Errorf("run show lacks %q:\n%s", want, show)
		}
	}
}

// publish sets mark's height (metres, on NAVD88).
func publish(t *testing.T, url, mark, value string) {
	t.Helper()
	mustRun(t, url, "height", "set", "--in-force-from", inForceNow(), mark, value, "--unit", "m", "--datum", "NAVD88",
		"--source", "Tallis County Benchmark Book (invented)", "--reason", "test control", "--by", "tester")
}

// Check connections through the built binary. Three published marks on a
// line, TC-B published 12 mm below what the line gives (it moved):
// second-II, the loop constant over the length between the marks
// (standards.CheckConnectionAllowableM, 8 mm·√E: FGCC 1984 §3.5 from
// memory; the connections themselves: FGCC 1984 leveling network
// geometry, read in POB's "The GPS Observer"). Derived: 0.5 km gives
// 5.7 mm, 1 km 8.0 mm. run check, given the register, fails A–B and B–C
// and passes A–C; run record --check-only keeps the connections and makes
// TC-B suspect, which height show warns of until a condition report;
// adjust refuses the check run.
func TestCheckConnectionsMakeSuspect(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	mustRun(t, db.URL, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988")
	mustRun(t, db.URL, "mark", "add", "TC-A")
	mustRun(t, db.URL, "mark", "add", "TC-B")
	mustRun(t, db.URL, "mark", "add", "TC-C")
	publish(t, db.URL, "TC-A", "10.000")
	publish(t, db.URL, "TC-B", "10.288")
	publish(t, db.URL, "TC-C", "11.000")
	marks := []string{"TC-A", "TC-X", "TC-B", "TC-Y", "TC-C"}
	path := writeBook(t, "check.csv", spurBook("", marks, []float64{0.1, 0.2, 0.3, 0.4}))

	out, errOut, st := binRun(t, db.URL, "run", "check", path)
	if st != ExitChecks {
		t.Fatalf("run check exit %d: %s\n%s", st, errOut, out)
	}
	for _, want := range []string{
		"Check connections (marks of known height)",
		"TC-A TC-B 5-12 500.0 +0.3000 +0.2880 +0.0120 0.0057 FAIL",
		"TC-A TC-C 5-20 1000.0 +1.0000 +1.0000 +0.0000 0.0080 pass",
		"TC-B TC-C 12-20 500.0 +0.7000 +0.7120 -0.0120 0.0057 FAIL",
		"check_connection 3 2",
	} {
		if !strings.Contains(squash(out), squash(want)) {
			t.Errorf("run check lacks %q:\n%s", want, out)
		}
	}

	out, errOut, st = binRun(t, db.URL, "run", "record", path, "--by", "tester", "--new-marks", "--check-only",
		"--accept-failed-checks", "--reason", "crew check before the levee job")
	if st != 0 {
		t.Fatalf("run record exit %d: %s", st, errOut)
	}
	id := recordedRun.FindStringSubmatch(out)[1]
	for _, want := range []string{"Recorded as a check run: it adjusts nothing", "mark TC-B is now SUSPECT"} {
		if !strings.Contains(out, want) {
			t.Errorf("run record lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, "mark TC-A is now SUSPECT") || strings.Contains(out, "mark TC-C is now SUSPECT") {
		t.Errorf("only TC-B is suspect:\n%s", out)
	}
	show := mustRun(t, db.URL, "run", "show", id)
	for _, want := range []string{"is a check run: it adjusts nothing", "Check connections (marks of known height)", "+0.0120 0.0057 FAIL"} {
		if !strings.Contains(squash(show), squash(want)) {
			t.Errorf("run show lacks %q:\n%s", want, show)
		}
	}
	hs, errOut, st := binRun(t, db.URL, "height", "show", "TC-B")
	if !strings.Contains(hs+errOut, "TC-B is SUSPECT: its check connections in run "+id) || !strings.Contains(hs+errOut, "levelled from TC-A it is +12.0 mm from its published height (allowable 5.7 mm); levelled from TC-C it is +12.0 mm") {
		t.Errorf("height show TC-B (exit %d) does not warn of the suspect mark:\n%s\n%s", st, hs, errOut)
	}
	if hs, errOut, _ := binRun(t, db.URL, "height", "show", "TC-A"); strings.Contains(hs+errOut, "SUSPECT") {
		t.Errorf("TC-A is not suspect:\n%s%s", hs, errOut)
	}
	_, errOut, st = binRun(t, db.URL, "adjust", id, "--hold", "TC-A", "--hold", "TC-C", "--dry-run")
	if st != ExitBadInput || !strings.Contains(errOut, "is a check run (recorded with --check-only): it adjusts nothing") {
		t.Errorf("adjust of a check run: exit %d, %s", st, errOut)
	}
	// A condition report after the run clears it.
	mustRun(t, db.URL, "mark", "condition", "TC-B", "good", "--note", "found firm; resurvey ordered")
	if hs, errOut, _ := binRun(t, db.URL, "height", "show", "TC-B"); strings.Contains(hs+errOut, "SUSPECT") {
		t.Errorf("a condition report clears the suspect mark:\n%s%s", hs, errOut)
	}
}

// Two runs, out and back, through the built binary. Run 1 levels TC-A to
// TC-B with an intermediate sight on mark TC-S (booked nowhere else); run
// 2 levels TC-B back to TC-A 3 mm short. Recording run 2 compares its
// section with run 1's (second-II section constant 8 mm·√K, FGCC 1984 §3.5
// from memory; derived: K = 0.25 km, 4 mm: within). adjust by least
// squares sees both runs, says the same comparison, and gives TC-S a
// height carried from the adjusted section. Worked by hand: B = 10 +
// (0.3000 + 0.2970)/2 = 10.2985 m (two equal weights); section 1's
// correction −0.0015 m; TC-S stands 187.5 of 250 m along it: 10 + 0.8 −
// 0.75 × 0.0015 = 10.798875 m.
func TestDoubleRunTwoRunsAndSideShot(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	mustRun(t, db.URL, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988")
	mustRun(t, db.URL, "mark", "add", "TC-A")
	publish(t, db.URL, "TC-A", "10.000")
	head := "# units: m\n# class: second-II\n# datum: NAVD88\npoint,sight,middle,distance\n"
	run1 := head + "TC-A,BS,1.5000,62.5\nTP1,FS,1.5000,62.5\nTP1,BS,1.8000,62.5\nTC-S,IS,1.0000,20\nTC-B,FS,1.5000,62.5\n"
	run2 := head + "TC-B,BS,1.5000,62.5\nTP1,FS,1.5000,62.5\nTP1,BS,1.2000,62.5\nTC-A,FS,1.4970,62.5\n"
	p1, p2 := writeBook(t, "out.csv", []byte(run1)), writeBook(t, "back.csv", []byte(run2))
	if _, errOut, st := binRun(t, db.URL, "run", "record", p1, "--by", "tester", "--new-marks", "--accept-failed-checks", "--reason", "a line, closed by the run back"); st != 0 {
		t.Fatalf("record run 1: exit %d: %s", st, errOut)
	}
	out, errOut, st := binRun(t, db.URL, "run", "record", p2, "--by", "tester", "--accept-failed-checks", "--reason", "a line, closed by the run out")
	if st != 0 {
		t.Fatalf("record run 2: exit %d: %s", st, errOut)
	}
	for _, want := range []string{"Double-run sections (forward + backward)", "TC-B TC-A section 1, lines 5-8 run 1 section 1, lines 5-9 -0.2970 +0.3000 +0.0030 250.0 0.0040 pass"} {
		if !strings.Contains(squash(out), squash(want)) {
			t.Errorf("run record lacks %q:\n%s", want, out)
		}
	}
	if show := mustRun(t, db.URL, "run", "show", "2"); !strings.Contains(squash(show), squash("run 1 section 1, lines 5-9 -0.2970 +0.3000 +0.0030 250.0 0.0040 pass")) {
		t.Errorf("run show 2 lacks the double run:\n%s", show)
	}
	adj, errOut, st := binRun(t, db.URL, "adjust", "1", "2", "--hold", "TC-A", "--method", "least-squares", "--dry-run")
	if st != 0 && st != ExitChecks {
		t.Fatalf("adjust: exit %d: %s\n%s", st, errOut, adj)
	}
	for _, want := range []string{
		"Double-run section TC-A to TC-B, run 1 section 1 and back in run 2 section 1: +0.0030 m over 0.250 km one way; allowable 0.0040 m (second-II): within",
		"TC-S: from an intermediate sight (run 1, book line 8), carried from TC-A",
		"10.2985",
		"10.7989",
	} {
		if !strings.Contains(squash(adj), squash(want)) {
			t.Errorf("adjust lacks %q:\n%s", want, adj)
		}
	}
}
