package cli

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// adjust --marks-file reads the marks one a line (blank lines, # comments
// and surrounding spaces skipped) and adjusts the runs through them; a bad
// line, a mark the register does not hold and a file that names none are
// refused naming the file and line, and write nothing.
func TestAdjustMarksFile(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 1)
	dir := t.TempDir()
	write := func(name, text string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	good := write("marks.txt", "\uFEFF# marks of the Mere River line (invented)\n\nBM3\n  BM4  \n")
	var rep adjustmentJSON
	out := mustRun(t, db.URL, "adjust", "--marks-file", good, "--hold", "BM1", "--dry-run", "-o", "json")
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if len(rep.Runs) != 1 || rep.Runs[0].RunID != runs[0] {
		t.Errorf("adjust --marks-file: runs %+v, want run %d", rep.Runs, runs[0])
	}
	cases := []struct{ name, text, want string }{
		{"comma.txt", "BM3\nBM4,BM5\n", "marks-file: " + filepath.Join(dir, "comma.txt") + ":2: \"BM4,BM5\": one mark a line"},
		{"unknown.txt", "BM3\n# next\nBM9X\n", "marks-file: " + filepath.Join(dir, "unknown.txt") + ":3: no mark \"BM9X\" in the register"},
		{"empty.txt", "# nothing\n\n", "marks-file: " + filepath.Join(dir, "empty.txt") + " names no mark"},
		{"latin1.txt", "BM3\nB\xe9M4\n", "marks-file: " + filepath.Join(dir, "latin1.txt") + ":2: not UTF-8 text"},
	}
	for _, c := range cases {
		p := write(c.name, c.text)
		before := registertest.Counts(t, db.Pool)
		_, errOut, status := run(t, db.URL, "adjust", "--marks-file", p, "--hold", "BM1", "--by", "tester")
		if status != ExitBadInput || !strings.Contains(errOut, c.want) {
			t.Errorf("%s: exit %d, %q, want %q", c.name, status, errOut, c.want)
		}
		registertest.AssertNothingWritten(t, db.Pool, before)
	}
	if _, errOut, status := run(t, db.URL, "adjust", "--marks-file", filepath.Join(dir, "none.txt"), "--hold", "BM1"); status != ExitBadInput ||
		!strings.Contains(errOut, "marks-file") || !strings.Contains(errOut, "none.txt") {
		t.Errorf("a missing file: exit %d, %s", status, errOut)
	}
}

// adjust --runs-file reads run numbers one a line, as --marks-file reads
// marks, adding them to the runs named as arguments; a line that is not a
// run number, a run the register does not hold, a run named twice and a
// file that names none are refused naming the file and line, and write
// nothing.
func TestAdjustRunsFile(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 1)
	dir := t.TempDir()
	write := func(name, text string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	id := strconv.FormatInt(runs[0], 10)
	good := write("runs.txt", "# the Mere River line (invented)\n\n  "+id+"  \n")
	var rep adjustmentJSON
	out := mustRun(t, db.URL, "adjust", "--runs-file", good, "--hold", "BM1", "--dry-run", "-o", "json")
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if len(rep.Runs) != 1 || rep.Runs[0].RunID != runs[0] {
		t.Errorf("adjust --runs-file: runs %+v, want run %d", rep.Runs, runs[0])
	}
	cases := []struct {
		name, text string
		args       []string
		want       string
	}{
		{"word.txt", id + "\nBM3\n", nil, "runs-file: " + filepath.Join(dir, "word.txt") + ":2: \"BM3\" is not a run number"},
		{"comma.txt", id + "," + id + "\n", nil, "runs-file: " + filepath.Join(dir, "comma.txt") + ":1: \"" + id + "," + id + "\": one run a line"},
		{"unknown.txt", id + "\n# next\n999999\n", nil, "runs-file: " + filepath.Join(dir, "unknown.txt") + ":3: no run 999999 in the register"},
		{"twice.txt", "\n" + id + "\n", []string{id}, "runs-file: run " + id + " is named twice (the command line and " + filepath.Join(dir, "twice.txt") + ":2)"},
		{"empty.txt", "# nothing\n\n", nil, "runs-file: " + filepath.Join(dir, "empty.txt") + " names no run"},
	}
	for _, c := range cases {
		p := write(c.name, c.text)
		before := registertest.Counts(t, db.Pool)
		args := append([]string{"adjust", "--runs-file", p, "--hold", "BM1", "--by", "tester"}, c.args...)
		_, errOut, status := run(t, db.URL, args...)
		if status != ExitBadInput || !strings.Contains(errOut, c.want) {
			t.Errorf("%s: exit %d, %q, want %q", c.name, status, errOut, c.want)
		}
		registertest.AssertNothingWritten(t, db.Pool, before)
	}
}
