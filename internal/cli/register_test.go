package cli

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"cairn/internal/geojson/geojsontest"
	"cairn/internal/pgtest"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// run executes cairn with args on the database at url, with fresh streams
// and a factory (and so a connection pool) of its own.
func run(t *testing.T, url string, args ...string) (stdout, stderr string, status int) {
	t.Helper()
	ios, _, out, errOut := TestStreams(false)
	f := NewFactory(ios, "test")
	defer f.Close()
	err := Execute(context.Background(), f, append([]string{"--db", url}, args...))
	if err != nil {
		fmt.Fprintln(errOut, "cairn: "+err.Error())
	}
	return out.String(), errOut.String(), exitCode(err)
}

// mustRun is run that fails the test on a non-zero exit status.
func mustRun(t *testing.T, url string, args ...string) string {
	t.Helper()
	out, errOut, status := run(t, url, args...)
	if status != 0 {
		t.Fatalf("cairn %s: exit %d: %s", strings.Join(args, " "), status, errOut)
	}
	return out
}

// seed adds datum NAVD88 and mark TC-0412.
func seed(t *testing.T, url string) {
	t.Helper()
	mustRun(t, url, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988")
	mustRun(t, url, "mark", "add", "TC-0412", "--lat", "41.6205", "--lon", "-97.9586", "--type", "bronze disk")
}

func setArgs(value, reason string) []string {
	return []string{"height", "set", "--in-force-from", inForceNow(), "TC-0412", value, "--unit", "usft", "--datum", "NAVD88",
		"--source", "Tallis County Benchmark Book (invented)", "--reason", reason, "--by", "tester"}
}

// Twenty writers at once, each with its own connection, leave one chain of
// twenty versions with one current version; the audit passes; a version
// changed behind cairn's back is then reported.
func TestConcurrentHeightSetAndAudit(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seed(t, db.URL)
	const n = 20
	var wg sync.WaitGroup
	status := make([]int, n)
	stderr := make([]string, n)
	for i := range n {
		wg.Add(1)
		go func() {
			defer wg.Done()
			_, stderr[i], status[i] = run(t, db.URL, setArgs(fmt.Sprintf("769.%02d", 80+i), fmt.Sprintf("writer %d", i))...)
		}()
	}
	wg.Wait()
	ok := 0
	for i := range n {
		switch status[i] {
		case 0:
			ok++
		case ExitConflict:
			if !strings.Contains(stderr[i], "changed meanwhile") {
				t.Errorf("writer %d: conflict without a clear message: %s", i, stderr[i])
			}
		default:
			t.Errorf("writer %d: exit %d: %s", i, status[i], stderr[i])
		}
	}
	ctx := context.Background()
	var versions, current, maxVersion int
	err := db.Pool.QueryRow(ctx, `SELECT count(*), count(*) FILTER (WHERE NOT EXISTS (SELECT 1 FROM height s WHERE s.supersedes = h.id)),
		max(version) FROM height h`).Scan(&versions, &current, &maxVersion)
	if err != nil {
		t.Fatal(err)
	}
	if versions != ok || maxVersion != ok || current != 1 {
		t.Fatalf("%d writers succeeded; %d versions, highest %d, %d current (want %d, %d, 1)", ok, versions, maxVersion, current, ok, ok)
	}
	if ok != n {
		t.Logf("%d of %d writers met a conflict", n-ok, n)
	}
	out, errOut, st := run(t, db.URL, "audit", "verify", "-o", "json")
	if st != 0 {
		t.Fatalf("audit verify on an untouched register: exit %d: %s%s", st, out, errOut)
	}

	// A superuser changes version 7 with the triggers off.
	for _, sql := range []string{
		"ALTER TABLE height DISABLE TRIGGER USER",
		"UPDATE height SET value = value + 0.01 WHERE version = 7",
		"ALTER TABLE height ENABLE TRIGGER USER",
	} {
		if _, err := db.Pool.Exec(ctx, sql); err != nil {
			t.Fatalf("%s: %v", sql, err)
		}
	}
	var stored string
	if err := db.Pool.QueryRow(ctx, "SELECT encode(hash, 'hex') FROM height WHERE version = 7").Scan(&stored); err != nil {
		t.Fatal(err)
	}
	out, _, st = run(t, db.URL, "audit", "verify", "-o", "json")
	if st != ExitChecks {
		t.Fatalf("audit verify after tampering: exit %d, want %d", st, ExitChecks)
	}
	var rep struct {
		Breaks []struct {
			Mark     string `json:"mark"`
			Version  int    `json:"version"`
			Expected string `json:"expected"`
			Stored   string `json:"stored"`
		} `json:"breaks"`
	}
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatalf("audit json: %v\n%s", err, out)
	}
	if len(rep.Breaks) != 1 {
		t.Fatalf("audit found %d breaks, want 1: %s", len(rep.Breaks), out)
	}
	b := rep.Breaks[0]
	if b.Mark != "TC-0412" || b.Version != 7 || b.Stored != stored || b.Expected == "" || b.Expected == stored {
		t.Fatalf("break %+v, want TC-0412 version 7 with stored hash %s and a different expected one", b, stored)
	}
}

// 769.83 usft is read back as 769.83 usft; in metres it is 234.645 m.
// Source: 1 usft = 1200/3937 m (Federal Register Vol. 85 No. 193, 5 Oct
// 2020, NIST and NOAA/NGS): 769.83 × 1200/3937 = 234.64465... → 234.645 m.
func TestHeightShowUnitRoundTrip(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seed(t, db.URL)
	mustRun(t, db.URL, setArgs("769.83", "from the book")...)
	out := mustRun(t, db.URL, "height", "show", "TC-0412", "--in", "m", "-o", "json")
	var v struct {
		Heights []struct {
			Value     string `json:"value"`
			Unit      string `json:"unit"`
			Converted struct {
				Value string `json:"value"`
				Unit  string `json:"unit"`
			} `json:"converted"`
		} `json:"heights"`
	}
	if err := json.Unmarshal([]byte(out), &v); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	if len(v.Heights) != 1 {
		t.Fatalf("%d heights: %s", len(v.Heights), out)
	}
	h := v.Heights[0]
	if h.Value != "769.83" || h.Unit != "usft" || h.Converted.Value != "234.645" || h.Converted.Unit != "m" {
		t.Fatalf("got %s %s = %s %s, want 769.83 usft = 234.645 m", h.Value, h.Unit, h.Converted.Value, h.Converted.Unit)
	}
	table := mustRun(t, db.URL, "height", "show", "TC-0412", "--in", "m")
	if !strings.Contains(table, "769.83\tusft") || !strings.Contains(table, "234.645") {
		t.Fatalf("table output lacks 769.83 usft and 234.645:\n%s", table)
	}
}

// The latest condition report drives a loud warning on stderr and a field
// in json.
func TestConditionWarnings(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seed(t, db.URL)
	mustRun(t, db.URL, setArgs("769.83", "from the book")...)
	mustRun(t, db.URL, "mark", "condition", "TC-0412", "good", "--on", "2023-04-11")
	mustRun(t, db.URL, "mark", "condition", "TC-0412", "disturbed", "--note", "wingwall cracked", "--on", "2024-05-14")
	// An older report recorded later does not hide the newer observation.
	mustRun(t, db.URL, "mark", "condition", "TC-0412", "good", "--on", "2022-01-10")
	for _, args := range [][]string{
		{"height", "show", "TC-0412", "-o", "json"},
		{"mark", "list", "-o", "json"},
		{"mark", "list", "--near", "41.62,-97.96", "--within", "2km", "-o", "json"},
	} {
		out, errOut, st := run(t, db.URL, args...)
		if st != 0 {
			t.Fatalf("%v: exit %d: %s", args, st, errOut)
		}
		if !strings.Contains(errOut, "WARNING: mark TC-0412 was reported DISTURBED on 2024-05-14") {
			t.Errorf("%v: no warning on stderr: %q", args, errOut)
		}
		if !strings.Contains(out, `"condition": "disturbed"`) || !strings.Contains(out, `"warning": "WARNING`) {
			t.Errorf("%v: json lacks the condition and warning:\n%s", args, out)
		}
	}
	mustRun(t, db.URL, "mark", "condition", "TC-0412", "good", "--on", "2024-06-01")
	if _, errOut, _ := run(t, db.URL, "height", "show", "TC-0412"); strings.Contains(errOut, "WARNING") {
		t.Errorf("warning after a newer good report: %s", errOut)
	}
}

var (
	buildOnce sync.Once
	binary    string
	buildErr  error
)

// binRun runs the built binary on the database at url: what it wrote and
// its exit status.
func binRun(t *testing.T, url string, args ...string) (stdout, stderr string, status int) {
	t.Helper()
	cmd := exec.Command(cairnBinary(t), append([]string{"--db", url}, args...)...)
	var out, errOut bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errOut
	err := cmd.Run()
	if err != nil && cmd.ProcessState == nil {
		t.Fatalf("cairn %s: %v", strings.Join(args, " "), err)
	}
	return out.String(), errOut.String(), cmd.ProcessState.ExitCode()
}

// cairnBinary builds cmd/cairn once for the tests that run it as a process.
func cairnBinary(t *testing.T) string {
	t.Helper()
	buildOnce.Do(func() {
		dir, err := os.MkdirTemp("", "cairn-bin-")
		if err != nil {
			buildErr = err
			return
		}
		binary = filepath.Join(dir, "cairn")
		out, err := exec.Command("go", "build", "-o", binary, "cairn/cmd/cairn").CombinedOutput()
		if err != nil {
			buildErr = fmt.Errorf("go build: %v\n%s", err, out)
		}
	})
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return binary
}

func TestMain(m *testing.M) {
	// The audit's cache of the reference schema: the tests' own.
	cache, err := os.MkdirTemp("", "cairn-cache-")
	if err != nil {
		panic(err)
	}
	os.Setenv("CAIRN_CACHE_DIR", cache)
	code := m.Run()
	os.RemoveAll(cache)
	if binary != "" {
		os.RemoveAll(filepath.Dir(binary))
	}
	os.Exit(code)
}

// Every bad input, run through the built binary: one line on stderr naming
// the field, exit status 2, and nothing written.
func TestBadInputChangesNothing(t *testing.T) {
	t.Parallel()
	bin := cairnBinary(t)
	db := pgtest.New(t)
	seed(t, db.URL)
	mustRun(t, db.URL, setArgs("769.83", "from the book")...)
	before := registertest.Counts(t, db.Pool)
	hs := func(value, unit, datum, reason string) []string {
		return []string{"height", "set", "--in-force-from", inForceNow(), "TC-0412", value, "--unit", unit, "--datum", datum, "--source", "book", "--reason", reason}
	}
	for _, c := range []struct {
		name  string
		args  []string
		field string
	}{
		{"unknown mark", []string{"height", "set", "--in-force-from", inForceNow(), "TC-0421", "769.90", "--unit", "usft", "--datum", "NAVD88", "--source", "book", "--reason", "r"}, "designation"},
		{"unknown datum", hs("769.90", "usft", "NAVD89", "r"), "datum"},
		{"misspelt unit", hs("769.90", "usf", "NAVD88", "r"), "unit"},
		{"non-numeric height", hs("769.9O", "usft", "NAVD88", "r"), "value"},
		{"empty reason", hs("769.90", "usft", "NAVD88", "  "), "reason"},
		{"unknown class", append(hs("769.90", "usft", "NAVD88", "r"), "--class", "fourth"), "class"},
		{"more decimals than published", append(hs("769.905", "usft", "NAVD88", "r"), "--decimals", "2"), "decimals"},
		{"latitude 95", []string{"mark", "add", "TC-0500", "--lat", "95", "--lon", "-97.9"}, "lat"},
		{"latitude not a number", []string{"mark", "add", "TC-0500", "--lat", "north", "--lon", "-97.9"}, "lat"},
		{"duplicate designation", []string{"mark", "add", "TC-0412", "--lat", "41.6", "--lon", "-97.9"}, "designation"},
		{"duplicate datum", []string{"datum", "add", "NAVD88", "--name", "again"}, "code"},
		{"unknown condition", []string{"mark", "condition", "TC-0412", "tilted"}, "condition"},
		{"condition on unknown mark", []string{"mark", "condition", "TC-0421", "good"}, "designation"},
		{"bad as-of", []string{"height", "show", "TC-0412", "--as-of", "yesterday"}, "as-of"},
		{"bad near", []string{"mark", "list", "--near", "41.6"}, "near"},
	} {
		cmd := exec.Command(bin, append([]string{"--db", db.URL}, c.args...)...)
		var stdout, stderr bytes.Buffer
		cmd.Stdout, cmd.Stderr = &stdout, &stderr
		err := cmd.Run()
		status := cmd.ProcessState.ExitCode()
		if err != nil && status < 0 {
			t.Fatalf("%s: %v", c.name, err)
		}
		msg := strings.TrimRight(stderr.String(), "\n")
		if status != ExitBadInput {
			t.Errorf("%s: exit %d, want %d (stderr %q)", c.name, status, ExitBadInput, msg)
		}
		if strings.Contains(msg, "\n") || !strings.HasPrefix(msg, "cairn: ") {
			t.Errorf("%s: want one line starting \"cairn: \", got %q", c.name, msg)
		}
		if !strings.Contains(msg, c.field) {
			t.Errorf("%s: message does not name %s: %q", c.name, c.field, msg)
		}
	}
	if !registertest.AssertNothingWritten(t, db.Pool, before) {
		t.Errorf("bad input changed the register")
	}
}

// cairn demo builds its register and can be run again.
func TestDemoRunsTwice(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	name := "cairn_demo_" + strings.TrimPrefix(currentDatabase(t, db), "cairn_test_")
	server, err := store.WithDatabase(db.URL, "postgres")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _, _ = db.Pool.Exec(context.Background(), "DROP DATABASE IF EXISTS "+name+" WITH (FORCE)") })
	pack := filepath.Join(t.TempDir(), "demo-pack.zip")
	for i := range 2 {
		out := mustRun(t, server, "demo", "--name", name, "--pack", pack)
		for _, want := range []string{"cairn pack --near", pack + " holds:", "marks.geojson", "datasheets.pdf", "sheets/TC-0412.html", "TC-0412", "234.662", "769.83", "correction", "DISTURBED",
			"licensed surveyor", "two marks", "condition", "regulations govern", "--db", name, "invented", "Mere River levee line", "Marks touched", "as it stood on 2020-06-01"} {
			if !strings.Contains(out, want) {
				t.Fatalf("run %d: demo output lacks %q:\n%s", i+1, want, out)
			}
		}
	}
	demoURL, err := store.WithDatabase(db.URL, name)
	if err != nil {
		t.Fatal(err)
	}
	pool, err := store.Open(context.Background(), demoURL)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	n := registertest.Counts(t, pool)
	// 10 marks, and 1 created by the field books; 16 heights from outside
	// sources and 3 published from the adjustments of the two runs.
	if n.Rows("datum") != 2 || n.Rows("mark") != 12 || n.Rows("height") != 19 {
		t.Fatalf("demo register after two runs: %v, want 2 datums, 12 marks, 19 versions", n)
	}
	if _, errOut, st := run(t, demoURL, "audit", "verify"); st != 0 {
		t.Fatalf("audit of the demo: exit %d: %s", st, errOut)
	}
	// The demo's pack: the marks within 1 km of the bridge, its GeoJSON
	// RFC 7946 (geojsontest.Check), TC-0412 among them.
	data, err := os.ReadFile(pack)
	if err != nil {
		t.Fatal(err)
	}
	files, _ := readZip(t, data)
	fs := geojsontest.Check(t, files["marks.geojson"])
	if len(fs) < 2 || !strings.Contains(string(files["marks.csv"]), "TC-0412,") || !strings.Contains(string(files["README.txt"]), "licensed surveyor") {
		t.Errorf("the demo's pack: %d features, marks.csv %q", len(fs), files["marks.csv"])
	}
	if _, _, st := run(t, server, "demo", "--name", "postgres"); st != ExitBadInput {
		t.Fatalf("demo --name postgres: exit %d, want %d (it must never drop other databases)", st, ExitBadInput)
	}
}

func currentDatabase(t *testing.T, db *pgtest.DB) string {
	t.Helper()
	var name string
	if err := db.Pool.QueryRow(context.Background(), "SELECT current_database()").Scan(&name); err != nil {
		t.Fatal(err)
	}
	return name
}

// A correction and a withdrawal are versions like any other: history lists
// them with their kinds, the current look-up has no height after the
// withdrawal, an as-of look-up before it still answers, and the chain
// verifies. A second withdrawal, or an adjustment's kind given by hand, is
// bad input that writes nothing.
func TestHeightCorrectionAndWithdrawal(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seed(t, db.URL)
	mustRun(t, db.URL, setArgs("769.83", "entered from the book")...)
	mustRun(t, db.URL, append(setArgs("769.88", "769.83 was a transcription error"), "--kind", "correction")...)
	mustRun(t, db.URL, "height", "withdraw", "--in-force-from", inForceNow(), "TC-0412", "--datum", "NAVD88", "--reason", "mark destroyed by roadworks", "--by", "tester")

	out := mustRun(t, db.URL, "history", "TC-0412")
	for _, want := range []string{"withdrawal\tmark destroyed by roadworks", "correction\t769.83 was a transcription error", "authority\tentered from the book"} {
		if !strings.Contains(out, want) {
			t.Errorf("history lacks %q:\n%s", want, out)
		}
	}
	if out := mustRun(t, db.URL, "height", "show", "TC-0412", "-o", "json"); strings.Contains(out, `"769.88"`) {
		t.Errorf("a withdrawn height is still shown as current:\n%s", out)
	}
	if out := mustRun(t, db.URL, "height", "show", "TC-0412", "--as-of", time.Now().Add(-time.Hour).UTC().Format(time.RFC3339)); strings.Contains(out, "769") {
		t.Errorf("an hour ago there was no height yet:\n%s", out)
	}
	before := registertest.Counts(t, db.Pool)
	for _, args := range [][]string{
		{"height", "withdraw", "--in-force-from", inForceNow(), "TC-0412", "--datum", "NAVD88", "--reason", "again"},
		append(setArgs("769.90", "by hand"), "--kind", "adjustment"),
	} {
		if _, errOut, st := run(t, db.URL, args...); st != ExitBadInput {
			t.Errorf("cairn %s: exit %d, want 2: %s", strings.Join(args, " "), st, errOut)
		}
	}
	if !registertest.AssertNothingWritten(t, db.Pool, before) {
		t.Fatal("refused writes changed the register")
	}
	mustRun(t, db.URL, "audit", "verify")
}

// inForceNow is --in-force-from for a height recorded by a test as in force
// from the moment it is recorded: the time of the call, which the version's
// write time follows.
func inForceNow() string { return time.Now().UTC().Format(time.RFC3339Nano) }
