package cli

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"

	"cairn/internal/demo"
	"cairn/internal/pgtest"
	"cairn/internal/register"
)

// demoRegister is a fresh register holding the invented Tallis County demo
// (marks in every condition, heights in three units, two recorded runs,
// published adjustments), with the levee line's run voided so that stale
// has rows.
func demoRegister(t *testing.T) string {
	t.Helper()
	db := pgtest.New(t)
	if err := demo.Build(context.Background(), register.New(db.Pool)); err != nil {
		t.Fatal(err)
	}
	if out, errOut, st := binRun(t, db.URL, "run", "void", "2", "--reason", "rod bubble out of adjustment (invented)", "--by", "tester", "--yes"); st != 0 {
		t.Fatalf("run void 2: exit %d\n%s%s", st, out, errOut)
	}
	return db.URL
}

// unitSuffix is the end of a machine header that names a unit: metres,
// kilometres, millimetres, the two feet, degrees, or the row's UNIT column.
var unitSuffix = regexp.MustCompile(`_(m|km|mm|ft|usft|deg|in_unit)$`)

// lengthWord is a header word that says the column holds a length or a
// height (or a difference, correction or deviation of one).
var lengthWord = regexp.MustCompile(`^(height|length|distance|difference|change|correction|computed|adjusted|sigma|sd|held|misclosure|allowable|current|new|publish|hi|bs|is|fs|dist)(_|$)`)

// decimal is a cell holding a number with a fraction: a length, a height,
// a coordinate.
var decimal = regexp.MustCompile(`^[+-]?[0-9]+\.[0-9]+$`)

// assertPipedTable checks what a table command printed on a pipe: one
// header line of snake_case machine headers, then rows with as many
// tab-separated cells as there are headers, no blank or separator line,
// no second header line, nothing but the table; a header of a length or
// height, and of any column of decimal numbers, ends with its unit (an
// "_in_unit" column having a unit column beside it). It returns the rows.
func assertPipedTable(t *testing.T, what, out string) (headers []string, rows [][]string) {
	t.Helper()
	if out == "" || !strings.HasSuffix(out, "\n") {
		t.Fatalf("%s: piped output %q does not end in a line end", what, out)
	}
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	headers = strings.Split(lines[0], "\t")
	for _, h := range headers {
		if !regexp.MustCompile(`^[a-z#][a-z0-9_#]*$`).MatchString(h) {
			t.Fatalf("%s: header line %q: %q is not a machine header", what, lines[0], h)
		}
		if lengthWord.MatchString(h) && !unitSuffix.MatchString(h) {
			t.Errorf("%s: header %q holds a length or height but names no unit", what, h)
		}
		if strings.HasSuffix(h, "_in_unit") && !slices.Contains(headers, "unit") {
			t.Errorf("%s: header %q refers to a unit column the table lacks: %q", what, h, lines[0])
		}
	}
	for i, line := range lines[1:] {
		if strings.TrimSpace(line) == "" || regexp.MustCompile(`^[-=+| \t]+$`).MatchString(line) {
			t.Errorf("%s: line %d is blank or a separator: %q", what, i+2, line)
		}
		if line == lines[0] {
			t.Errorf("%s: line %d repeats the header line", what, i+2)
		}
		cells := strings.Split(line, "\t")
		if len(cells) != len(headers) {
			t.Errorf("%s: line %d has %d cells, the header %d: %q", what, i+2, len(cells), len(headers), line)
			continue
		}
		rows = append(rows, cells)
	}
	for c, h := range headers {
		for _, r := range rows {
			if decimal.MatchString(r[c]) && !unitSuffix.MatchString(h) && h != "value" {
				t.Errorf("%s: column %q holds the number %s but names no unit", what, h, r[c])
				break
			}
		}
	}
	for _, word := range []string{"WARNING", "!!!!", "Cautions", "licensed surveyor", "deprecated"} {
		if strings.Contains(out, word) {
			t.Errorf("%s: stdout holds %q, which is not the table's:\n%s", what, word, out)
		}
	}
	return headers, rows
}

// Every command that prints a table, through the built binary with stdout
// piped: one header line with units, the rows, nothing else; warnings and
// cautions on stderr only.
func TestPipedTablesOfEveryCommand(t *testing.T) {
	t.Parallel()
	url := demoRegister(t)
	for _, c := range []struct {
		args    []string
		rows    int    // the least number of rows
		column  string // a header the table has
		errWant string // on stderr ("" for nothing)
	}{
		{[]string{"mark", "list"}, 11, "condition", "WARNING: mark TC-0415 was reported DISTURBED"},
		{[]string{"mark", "list", "--near", "41.62,-97.95", "--within", "50km"}, 1, "distance_km", "DISTURBED"},
		{[]string{"mark", "show", "TC-0415"}, 5, "value", "DISTURBED"},
		{[]string{"height", "list"}, 10, "height_in_unit", "heights listed are in doubt (the DOUBT column)"},
		{[]string{"height", "show", "TC-0412"}, 2, "height_in_unit", ""},
		{[]string{"height", "show", "TC-0412", "--in", "ft"}, 2, "height_ft", ""},
		{[]string{"history", "TC-0412"}, 4, "change_in_unit", ""},
		{[]string{"run", "list"}, 2, "length_km", ""},
		{[]string{"stale"}, 1, "height_in_unit", ""},
		{[]string{"adjustment", "list"}, 2, "made_utc", ""},
		{[]string{"audit", "verify"}, 0, "expected_hash", "audit: "},
		{[]string{"datum", "list"}, 2, "code", ""},
	} {
		what := strings.Join(c.args, " ")
		out, errOut, st := binRun(t, url, c.args...)
		if st != 0 {
			t.Errorf("%s: exit %d\n%s", what, st, errOut)
			continue
		}
		headers, rows := assertPipedTable(t, what+" piped", out)
		if len(rows) < c.rows || !slices.Contains(headers, c.column) {
			t.Errorf("%s piped: %d rows (want at least %d), headers %q (want %q among them)", what, len(rows), c.rows, headers, c.column)
		}
		if c.errWant == "" && errOut != "" || !strings.Contains(errOut, c.errWant) {
			t.Errorf("%s piped: stderr %q, want %q", what, errOut, c.errWant)
		}
		// CSV has the same header row.
		if csv, _, _ := binRun(t, url, append(c.args, "-o", "csv")...); !strings.HasPrefix(csv, strings.Join(headers, ",")+"\n") {
			t.Errorf("%s -o csv: header row differs from the piped header line %q:\n%s", what, strings.Join(headers, "\t"), csv)
		}
	}
	// trace -o csv is a table too.
	out, _, st := binRun(t, url, "trace", demo.TraceMark, "-o", "csv")
	if st != 0 || !strings.HasPrefix(out, "depth,node,mark,datum,version,height_in_unit,unit,") {
		t.Errorf("trace -o csv: exit %d\n%s", st, out)
	}
}

// A cell holding a tab or a line end stays in its column and on its line
// when piped.
func TestPipedCellsStayInPlace(t *testing.T) {
	ios, _, out, _ := TestStreams(false)
	tb := Table{Headers: []string{"MARK", "REASON", "HEIGHT (m)"}}
	tb.AddRow("BM1", "two\tcolumns\nand two lines \\ here", "1.000")
	if err := writeTable(ios, FormatTable, tb); err != nil {
		t.Fatal(err)
	}
	if want := "mark\treason\theight_m\nBM1\ttwo\\tcolumns\\nand two lines \\\\ here\t1.000\n"; out.String() != want {
		t.Errorf("piped:\n%q\nwant\n%q", out.String(), want)
	}
}

// assertReport checks a report command's output, through the built binary
// with stdout piped: every part of the report (wants) and its cautions on
// stdout; on stderr only messages (errWants) and the report's warnings
// repeated, never a part of the report.
func assertReport(t *testing.T, what, out, errOut string, wants, errWants []string) {
	t.Helper()
	for _, w := range append(wants, "licensed surveyor") {
		if !strings.Contains(out, w) {
			t.Errorf("%s: stdout lacks %q:\n%s", what, w, out)
		}
		if strings.Contains(errOut, w) && !slices.Contains(errWants, w) {
			t.Errorf("%s: stderr holds %q, a part of the report:\n%s", what, w, errOut)
		}
	}
	for _, w := range errWants {
		if !strings.Contains(errOut, w) {
			t.Errorf("%s: stderr lacks %q:\n%s", what, w, errOut)
		}
	}
}

// Report commands give the whole report on stdout, cautions and warnings
// included, terminal or not; stderr has the messages, deprecation notices
// and the warnings repeated for the person at the terminal.
func TestReportsGoWholeToStdout(t *testing.T) {
	t.Parallel()
	url := demoRegister(t)
	loop := testBooks + "tallis-north-loop.csv"
	const doubt = "TC-0415 was reported DISTURBED"

	t.Run("run check", func(t *testing.T) {
		out, errOut, st := binRun(t, url, "run", "check", loop, "--hold", "TC-0412", "--hold", "TC-0415",
			"--allow-condition", "--condition-reason", "tilt checked, height unchanged (invented)")
		if st != 0 && st != ExitChecks {
			t.Fatalf("exit %d: %s", st, errOut)
		}
		assertReport(t, "run check", out, errOut, []string{"Level book ", "Held (usft): TC-0412 = ",
			"held in doubt: tilt checked", "Misclosure", "Checks", doubt}, []string{doubt})
		// A deprecation notice is a message: stderr only.
		out, errOut, _ = binRun(t, url, "run", "check", loop, "--hold", "TC-0412=769.880")
		assertReport(t, "run check --hold MARK=HEIGHT", out, errOut, []string{"Held (usft): TC-0412 = 769.880", "Misclosure"}, []string{"deprecated"})
		if strings.Contains(out, "deprecated") {
			t.Errorf("the deprecation notice is in the report:\n%s", out)
		}
	})
	t.Run("run record and run show", func(t *testing.T) {
		book := copyBook(t, loop, "# the loop re-observed (invented)\n", "TC-0412,BS,6.029,5.119,4.210,", "TC-0412,BS,6.030,5.120,4.210,")
		out, errOut, st := binRun(t, url, "run", "record", book, "--by", "tester", "--hold", "TC-0412")
		if st != 0 {
			t.Fatalf("run record: exit %d: %s", st, errOut)
		}
		assertReport(t, "run record", out, errOut, []string{"Recorded run 3 from", "Held", "Misclosure", "Checks", "Caution"}, nil)
		out, errOut, st = binRun(t, url, "run", "show", "2")
		if st != 0 {
			t.Fatalf("run show: exit %d: %s", st, errOut)
		}
		assertReport(t, "run show", out, errOut, []string{"Run 2 is VOIDED", "Held heights", "Misclosure", "Checks when recorded", "Marks touched", "Cautions:"}, []string{"Run 2 is VOIDED"})
	})
	t.Run("adjust, adjustment show and publish", func(t *testing.T) {
		out, errOut, st := binRun(t, url, "adjust", "1", "--hold", "TC-0412", "--made-by", "tester")
		if st != 0 {
			t.Fatalf("adjust: exit %d: %s", st, errOut)
		}
		// TC-0415, adjusted, is in doubt: the report warns, and the
		// warning is repeated on stderr, stdout being piped.
		const inDoubt = "WARNING: TC-0415 was last reported DISTURBED"
		wants := []string{"(draft): proportional", "run 1 \"Orrin Bay north loop\"", "held TC-0412 on NAVD88, version", inDoubt,
			"ADJUSTED (m)", "PUBLISH (in UNIT)", "Misclosure, run 1", "Cautions:", "cairn publish"}
		assertReport(t, "adjust", out, errOut, wants, []string{"--made-by is deprecated", inDoubt})
		id := regexp.MustCompile(`Adjustment (\d+) \(draft\)`).FindStringSubmatch(out)
		if id == nil {
			t.Fatalf("adjust: no adjustment number in\n%s", out)
		}
		out, errOut, _ = binRun(t, url, "adjustment", "show", id[1])
		assertReport(t, "adjustment show", out, errOut, wants, []string{inDoubt})
		if strings.Contains(errOut, "deprecated") {
			t.Errorf("adjustment show: stderr %q", errOut)
		}
		out, errOut, st = binRun(t, url, "publish", id[1], "--reason", "reviewed (invented)", "--by", "reviewer", "--yes")
		if st != 0 {
			t.Fatalf("publish: exit %d: %s", st, errOut)
		}
		assertReport(t, "publish", out, errOut, []string{"Published adjustment " + id[1] + ":", "by reviewer: reviewed (invented)", "NEW (in UNIT)", "Cautions:"}, nil)
	})
	t.Run("trace", func(t *testing.T) {
		out, errOut, st := binRun(t, url, "trace", demo.TraceMark)
		if st != 0 || !strings.HasPrefix(out, demo.TraceMark+" on NAVD88, version ") || strings.Contains(out, "WARNING") || !strings.Contains(errOut, doubt) {
			t.Errorf("trace: exit %d\nstdout\n%s\nstderr\n%s", st, out, errOut)
		}
	})
}

// mark list --condition takes every condition the register shows, in any
// case; an unknown one is refused with the list of those accepted.
func TestMarkListByCondition(t *testing.T) {
	t.Parallel()
	url := demoRegister(t)
	for _, c := range []struct {
		condition string
		marks     []string
	}{
		// The demo's books create TC-0413 (north loop) unverified; the
		// levee line's turning points are not marks.
		{"unverified", []string{"TC-0413"}},
		{"UNVERIFIED", []string{"TC-0413"}},
		{"DISTURBED", []string{"TC-0415"}},
		{"Disturbed,good", []string{"TC-0401", "TC-0412", "TC-0415", "TC-0420", "TC-0423", "TC-0427", "TC-0430"}},
		// TC-0419 reset after a flood; TC-0405 destroyed and replaced
		// by TC-0405A, which has no report yet.
		{"reset", []string{"TC-0419"}},
		{"destroyed", []string{"TC-0405"}},
		{"unknown", []string{"TC-0405A", "TC-0408"}},
		{"not found", nil},
	} {
		out, errOut, st := binRun(t, url, "mark", "list", "--condition", c.condition)
		if st != 0 {
			t.Errorf("--condition %s: exit %d: %s", c.condition, st, errOut)
			continue
		}
		_, rows := assertPipedTable(t, "mark list --condition "+c.condition, out)
		var got []string
		for _, r := range rows {
			got = append(got, r[0])
		}
		if !slices.Equal(got, c.marks) {
			t.Errorf("--condition %s: %q, want %q", c.condition, got, c.marks)
		}
	}
	out, errOut, st := binRun(t, url, "mark", "list", "--condition", "cracked")
	want := `cairn: --condition: unknown condition "cracked" (want one of good, disturbed, destroyed, not-found, reset, unverified, unknown)`
	if st != ExitBadInput || out != "" || strings.TrimSpace(errOut) != want {
		t.Errorf("--condition cracked: exit %d, stdout %q, stderr %q; want 2 and %q", st, out, errOut, want)
	}
	// A report's condition is taken in any case too, and kept as the word
	// the register prints.
	if _, errOut, st := binRun(t, url, "mark", "condition", "TC-0405", "NOT-FOUND", "--on", "2024-06-01", "--by", "tester"); st != 0 || !strings.Contains(errOut, "as not-found") {
		t.Errorf("mark condition NOT-FOUND: exit %d: %s", st, errOut)
	}
	// Help gives the spellings the register prints.
	help, _, _ := binRun(t, url, "mark", "list", "--help")
	if !strings.Contains(help, strings.Join(register.ShownConditions, ", ")) {
		t.Errorf("mark list --help lacks the conditions:\n%s", help)
	}
	for _, cmd := range [][]string{{"height", "set", "--in-force-from", inForceNow(), "--help"}, {"run", "check", "--help"}, {"run", "record", "--help"}} {
		help, _, _ := binRun(t, url, cmd...)
		if !strings.Contains(help, "first-I, first-II, second-I, second-II, third") || regexp.MustCompile(`1st|2nd|3rd`).MatchString(help) {
			t.Errorf("%s: the class flag does not list the register's spellings:\n%s", strings.Join(cmd, " "), help)
		}
	}
}

// jsonKeys collects every key of a JSON document with the values found
// under it.
func jsonKeys(v any, into map[string][]any) {
	switch x := v.(type) {
	case map[string]any:
		for k, e := range x {
			into[k] = append(into[k], e)
			jsonKeys(e, into)
		}
	case []any:
		for _, e := range x {
			jsonKeys(e, into)
		}
	}
}

// One key for one thing on every command's -o json: a mark is "mark", a
// run "run_id", an adjustment "adjustment_id", a height version's row
// "height_id", a section's number "section" and its book lines
// "from_line"/"to_line" (the key of the check summaries each run keeps);
// a date observed is YYYY-MM-DD and a time RFC 3339 wherever it appears.
func TestJSONKeysAcrossCommands(t *testing.T) {
	t.Parallel()
	url := demoRegister(t)
	loop := testBooks + "tallis-north-loop.csv"
	book := copyBook(t, loop, "# the loop observed again (invented)\n", "TC-0412,BS,6.029,5.119,4.210,", "TC-0412,BS,6.030,5.120,4.210,")
	commands := []struct {
		what string
		args []string
	}{
		{"mark list", []string{"mark", "list"}}, {"mark show", []string{"mark", "show", "TC-0415"}},
		{"height list", []string{"height", "list"}}, {"height show", []string{"height", "show", "TC-0412"}},
		{"history", []string{"history", "TC-0412"}}, {"trace", []string{"trace", demo.TraceMark}},
		{"stale", []string{"stale"}}, {"audit verify", []string{"audit", "verify"}},
		{"run list", []string{"run", "list"}}, {"run show", []string{"run", "show", "1"}}, {"run show", []string{"run", "show", "2"}},
		{"run check", []string{"run", "check", loop, "--hold", "TC-0412"}},
		{"run record", []string{"run", "record", book, "--by", "tester", "--hold", "TC-0412"}},
		{"adjustment list", []string{"adjustment", "list"}}, {"adjustment show", []string{"adjustment", "show", "1"}},
		{"adjust 1", []string{"adjust", "1", "--hold", "TC-0412", "--by", "tester"}},
		{"adjust 1", []string{"adjust", "1", "--hold", "TC-0412", "--method", "least-squares", "--dry-run"}},
	}
	keys := map[string]map[string][]any{}
	for _, c := range commands {
		what, args := c.what, c.args
		out, errOut, st := binRun(t, url, append(args, "-o", "json")...)
		if st != 0 && st != ExitChecks {
			t.Fatalf("%s -o json: exit %d: %s", what, st, errOut)
		}
		var doc any
		if err := json.Unmarshal([]byte(out), &doc); err != nil {
			t.Fatalf("%s -o json: %v\n%s", what, err, out)
		}
		if keys[what] == nil {
			keys[what] = map[string][]any{}
		}
		jsonKeys(doc, keys[what])
	}
	// The draft just made, published.
	var draft struct {
		ID int64 `json:"adjustment_id"`
	}
	out, _, _ := binRun(t, url, "adjustment", "list", "--status", "draft", "-o", "json")
	var drafts []struct {
		ID int64 `json:"adjustment_id"`
	}
	if err := json.Unmarshal([]byte(out), &drafts); err != nil || len(drafts) != 1 {
		t.Fatalf("adjustment list --status draft: %v\n%s", err, out)
	}
	draft = drafts[0]
	out, errOut, st := binRun(t, url, "publish", strconv.FormatInt(draft.ID, 10), "--reason", "keys (invented)", "--by", "reviewer", "--yes", "-o", "json")
	var doc any
	if err := json.Unmarshal([]byte(out), &doc); st != 0 || err != nil {
		t.Fatalf("publish -o json: exit %d, %v: %s", st, err, errOut)
	}
	keys["publish"] = map[string][]any{}
	jsonKeys(doc, keys["publish"])

	// Where each concept appears, under its one key.
	for key, cmds := range map[string][]string{
		"mark":          {"mark list", "mark show", "height list", "height show", "history", "trace", "stale", "run show", "run check", "run record", "adjustment show", "adjust 1", "publish"},
		"run_id":        {"run list", "run show", "run record", "mark show", "trace", "stale", "adjustment show", "adjust 1"},
		"adjustment_id": {"adjustment list", "adjustment show", "adjust 1", "trace", "stale", "publish"},
		"height_id":     {"trace", "run show", "run check", "run record", "adjustment show"},
		"section":       {"run show", "run check", "run record", "adjust 1"},
		"from_line":     {"run show", "run check", "run record", "adjust 1"},
		"to_line":       {"run show", "run check", "run record", "adjust 1"},
		"status_reason": {"adjustment show", "trace", "publish"},
		"status_by":     {"adjustment show", "trace", "publish"},
		"status_at":     {"adjustment show", "trace", "publish"},
		"observed_on":   {"mark show", "run list", "run show", "trace", "adjustment show"},
		"created_at":    {"adjustment list", "adjustment show"},
	} {
		for _, c := range cmds {
			if len(keys[c][key]) == 0 {
				t.Errorf("%s -o json: no key %q", c, key)
			}
		}
	}
	// The other spellings of those things appear nowhere.
	for c, ks := range keys {
		for _, old := range []string{"designation", "id", "seq", "number", "first_line", "last_line", "published_by", "published_at"} {
			if len(ks[old]) > 0 {
				t.Errorf("%s -o json: key %q (want its one spelling)", c, old)
			}
		}
		for _, v := range ks["observed_on"] {
			if s, ok := v.(string); v != nil && (!ok || !regexp.MustCompile(`^\d{4}-\d{2}-\d{2}$`).MatchString(s)) {
				t.Errorf("%s -o json: observed_on %v is not YYYY-MM-DD", c, v)
			}
		}
		for _, k := range []string{"created_at", "recorded_at", "status_at", "voided_at", "at"} {
			for _, v := range ks[k] {
				if s, ok := v.(string); v != nil && (!ok || !regexp.MustCompile(`^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d+)?(Z|[+-]\d{2}:\d{2})$`).MatchString(s)) {
					t.Errorf("%s -o json: %s %v is not an RFC 3339 time", c, k, v)
				}
			}
		}
	}
}

// copyBook writes a copy of the book at path, with head before it and the
// line old changed to new (other observations, so that the register takes
// it as new field work), and returns the copy's path.
func copyBook(t *testing.T, path, head, old, new string) string {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(data), old) {
		t.Fatalf("%s lacks %q", path, old)
	}
	return writeBook(t, filepath.Base(path), []byte(head+strings.Replace(string(data), old, new, 1)))
}
