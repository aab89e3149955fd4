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
