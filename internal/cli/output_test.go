package cli

import (
	"strings"
	"testing"
)

// onStreams runs cairn on the register at url with test streams whose
// terminal flags (IsTerminal and ErrIsTerminal) are terminal, and fails the
// test on any exit status but 0.
func onStreams(t *testing.T, url string, terminal bool, args ...string) (stdout, stderr string) {
	t.Helper()
	ios, _, out, errOut := TestStreams(terminal)
	ios.ErrIsTerminal = terminal
	if code := mainWith(ios, append([]string{"--db", url}, args...)); code != ExitOK {
		t.Fatalf("cairn %s: exit %d: %s", strings.Join(args, " "), code, errOut)
	}
	return out.String(), errOut.String()
}

// anyCell stands for a cell whose value the test does not fix.
const anyCell = "\x00"

// assertAligned checks table output for a terminal: a header line with
// headers, then one line per row, each cell starting in the column of its
// header (cells equal to anyCell are only checked to be there).
func assertAligned(t *testing.T, what, out string, headers []string, rows [][]string) {
	t.Helper()
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if len(lines) != len(rows)+1 {
		t.Fatalf("%s: %d lines, want a header and %d rows:\n%s", what, len(lines), len(rows), out)
	}
	starts := make([]int, len(headers))
	at := 0
	for i, h := range headers {
		j := strings.Index(lines[0][at:], h)
		if j < 0 || (i > 0 && !strings.HasSuffix(lines[0][:at+j], "  ")) {
			t.Fatalf("%s: header line %q lacks %q in its place", what, lines[0], h)
		}
		starts[i], at = at+j, at+j+len(h)
	}
	if starts[0] != 0 {
		t.Fatalf("%s: header line %q does not start with %q", what, lines[0], headers[0])
	}
	for r, row := range rows {
		line := lines[r+1]
		for i, cell := range row {
			s := starts[i]
			if len(line) < s || i > 0 && line[s-1] != ' ' {
				t.Errorf("%s: row %d, column %s does not start under its header:\n%s\n%s", what, r, headers[i], lines[0], line)
				break
			}
			if cell != anyCell && !strings.HasPrefix(line[s:], cell) {
				t.Errorf("%s: row %d, column %s: %q, want %q:\n%s\n%s", what, r, headers[i], line[s:], cell, lines[0], line)
			}
			if cell == anyCell && (len(line) == s || line[s] == ' ') {
				t.Errorf("%s: row %d, column %s is empty:\n%s\n%s", what, r, headers[i], lines[0], line)
			}
		}
	}
}

// pipedRows checks that piped table output starts with one line of
// machine headers (snake_case, no spaces) and returns the lines after it.
func pipedRows(t *testing.T, out string) []string {
	t.Helper()
	if !strings.HasSuffix(out, "\n") {
		t.Fatalf("piped table does not end its last line: %q", out)
	}
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	for _, h := range strings.Split(lines[0], "\t") {
		if h == "" || h != machineHeader(h) {
			t.Fatalf("piped table: the first line %q is not a line of headers", lines[0])
		}
	}
	return lines[1:]
}

// assertTabSeparated checks table output when piped: one header line (the
// machine forms of headers), one line per row, cells separated by tabs.
func assertTabSeparated(t *testing.T, what, out string, headers []string, rows [][]string) {
	t.Helper()
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if len(lines) != len(rows)+1 {
		t.Fatalf("%s: %d lines, want a header line and %d rows:\n%s", what, len(lines), len(rows), out)
	}
	if want := strings.Join(machineHeaders(headers), "\t"); lines[0] != want {
		t.Errorf("%s: header line %q, want %q", what, lines[0], want)
	}
	lines = lines[1:]
	for r, row := range rows {
		cells := strings.Split(lines[r], "\t")
		if len(cells) != len(row) {
			t.Errorf("%s: row %d has %d tab-separated cells, want %d: %q", what, r, len(cells), len(row), lines[r])
			continue
		}
		for i, want := range row {
			if want != anyCell && cells[i] != want || want == anyCell && cells[i] == "" {
				t.Errorf("%s: row %d cell %d is %q, want %q: %q", what, r, i, cells[i], want, lines[r])
			}
		}
	}
}

// mark list, height list and history: headers and aligned columns on a
// terminal, tab-separated rows when piped; warnings and cautions on
// stderr, never among the data.
func TestTablesOnATerminalAndPiped(t *testing.T) {
	t.Parallel()
	db := newTestDB(t)
	cairn(t, db, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988")
	cairn(t, db, "mark", "add", "TC-0412", "--type", "bronze disk", "--lat", "41.6205", "--lon", "-97.9586")
	cairn(t, db, "mark", "add", "TC-0413", "--type", "brass rod")
	cairn(t, db, "mark", "condition", "TC-0412", "disturbed", "--on", "2024-05-14", "--note", "post tilted", "--by", "tester")
	set := func(value, kind, source, reason string) {
		cairn(t, db, "height", "set", "--in-force-from", inForceNow(), "TC-0412", value, "--unit", "usft", "--datum", "NAVD88", "--kind", kind,
			"--source", source, "--reason", reason, "--by", "tester")
	}
	set("769.83", "authority", "Tallis County Benchmark Book (invented)", "entered from the book")
	set("769.88", "correction", "errata sheet 3 (invented)", "769.83 was a transcription error")
	const warning = "WARNING: mark TC-0412 was reported DISTURBED on 2024-05-14"
	by := "tester (login " + loginOf(t, db) + ")"

	for _, c := range []struct {
		args     []string
		headers  []string
		rows     [][]string
		warns    bool // the disturbed mark is warned of on stderr
		cautions bool // the cautions follow on a terminal
	}{
		{[]string{"mark", "list"}, []string{"DESIGNATION", "TYPE", "CONDITION", "LAT (deg)", "LON (deg)", "ALIASES", "DOUBT"}, [][]string{
			{"TC-0412", "bronze disk", "!! DISTURBED", "41.62050", "-97.95860", "", anyCell},
			{"TC-0413", "brass rod", "unknown", "", "", "", ""},
		}, true, false},
		{[]string{"height", "list"}, []string{"MARK", "DATUM", "VERSION", "HEIGHT (in UNIT)", "UNIT", "CLASS", "SOURCE", "DOUBT"}, [][]string{
			{"TC-0412", "NAVD88", "2", "769.88", "usft", "", "errata sheet 3 (invented)", anyCell},
		}, false, false},
		{[]string{"history", "TC-0412"}, []string{"DATUM", "VERSION", "IN FORCE FROM (UTC)", "RECORDED (UTC)", "HEIGHT (in UNIT)", "UNIT", "CHANGE (in UNIT)", "KIND", "REASON", "SOURCE", "BY", "DOUBT"}, [][]string{
			{"NAVD88", "2", anyCell, anyCell, "769.88", "usft", anyCell, "correction", "769.83 was a transcription error", "errata sheet 3 (invented)", by, anyCell},
			{"NAVD88", "1", anyCell, anyCell, "769.83", "usft", "", "authority", "entered from the book", "Tallis County Benchmark Book (invented)", by, anyCell},
		}, true, true},
	} {
		what := strings.Join(c.args, " ")
		out, errOut := onStreams(t, db, true, c.args...)
		assertAligned(t, what+" on a terminal", out, c.headers, c.rows)
		if strings.Contains(errOut, warning) != c.warns || strings.Contains(out, "WARNING") {
			t.Errorf("%s on a terminal: warning on stderr %v (want %v), stdout %q", what, strings.Contains(errOut, warning), c.warns, out)
		}
		if strings.Contains(errOut, "Cautions:") != c.cautions || strings.Contains(out, "Cautions:") {
			t.Errorf("%s on a terminal: cautions on stderr %v (want %v), stdout %q", what, strings.Contains(errOut, "Cautions:"), c.cautions, out)
		}

		out, errOut = onStreams(t, db, false, c.args...)
		assertTabSeparated(t, what+" piped", out, c.headers, c.rows)
		if strings.Contains(errOut, warning) != c.warns || strings.Contains(out, "WARNING") {
			t.Errorf("%s piped: warning on stderr %v (want %v), stdout %q", what, strings.Contains(errOut, warning), c.warns, out)
		}
		if strings.Contains(errOut, "Cautions:") || strings.Contains(out, "Cautions:") {
			t.Errorf("%s piped: cautions printed: %q %q", what, out, errOut)
		}
	}
}

// run list: the same two layouts; run record's messages go to stderr and
// its report to stdout.
func TestRunListOnATerminalAndPiped(t *testing.T) {
	t.Parallel()
	db := newTestDB(t)
	out, _ := onStreams(t, db, false, "run", "record", testBooks+"tallis-north-loop.csv", "--new-marks", "--by", "tester")
	if !strings.HasPrefix(out, "Recorded run 1 from tallis-north-loop.csv") {
		t.Fatalf("run record: %q", out)
	}
	headers := []string{"RUN", "OBSERVED", "NAME", "FILE", "UNIT", "CLASS", "SECTIONS", "LENGTH (km)", "CHECKS", "RECORDED", "BY", "VOIDED"}
	rows := [][]string{{"1", "2024-05-14", "Orrin Bay north loop", "tallis-north-loop.csv", "usft", "second-II", anyCell, anyCell, "passed", anyCell, "tester", "no"}}
	out, errOut := onStreams(t, db, true, "run", "list")
	assertAligned(t, "run list on a terminal", out, headers, rows)
	if errOut != "" {
		t.Errorf("run list on a terminal: stderr %q", errOut)
	}
	out, errOut = onStreams(t, db, false, "run", "list")
	assertTabSeparated(t, "run list piped", out, headers, rows)
	if errOut != "" {
		t.Errorf("run list piped: stderr %q", errOut)
	}
	// CSV has its header row whether or not on a terminal.
	for _, terminal := range []bool{true, false} {
		out, _ := onStreams(t, db, terminal, "run", "list", "-o", "csv")
		if !strings.HasPrefix(out, "run,observed,name,file,") || strings.Count(out, "\n") != 2 {
			t.Errorf("run list -o csv (terminal %v): %q", terminal, out)
		}
	}
}
