package cli

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"syscall"
	"testing"
	"time"

	"cairn/internal/booktest"
	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// writeBook writes data to a file named name in a fresh folder and returns
// its path.
func writeBook(t *testing.T, name string, data []byte) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// addMarks adds marks (no position) to the register at db.
func addMarks(t *testing.T, db *pgtest.DB, marks ...string) {
	t.Helper()
	registertest.On(t, db).Marks(t, marks...)
}

// noRuns are the counts of a register with no run.
var noRuns = map[string]int64{"run": 0, "sighting": 0, "section": 0, "run_mark": 0}

var recordedRun = regexp.MustCompile(`Recorded run (\d+) from `)

// The north loop demo book, saved with a byte-order mark and CRLF line
// ends, is recorded, listed, shown with the mark, and given back byte for
// byte by run show --book.
func TestRunRecordShowBookRoundTrip(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	orig, err := os.ReadFile("../../testdata/books/tallis-north-loop.csv")
	if err != nil {
		t.Fatal(err)
	}
	book := append([]byte("\ufeff"), bytes.ReplaceAll(orig, []byte("\n"), []byte("\r\n"))...)
	path := writeBook(t, "north-loop.csv", book)

	out, errOut, st := run(t, db.URL, "run", "record", path, "--by", "R. Okafor", "--new-marks")
	if st != 0 {
		t.Fatalf("exit %d: %s", st, errOut)
	}
	m := recordedRun.FindStringSubmatch(out)
	if m == nil {
		t.Fatalf("no run number in:\n%s", out)
	}
	id := m[1]
	sum := sha256.Sum256(book)
	for _, want := range []string{hex.EncodeToString(sum[:]), "Created marks (unverified, no height): TC-0412, TC-0413, TC-0415",
		"Reduced notes", "Sections", "Misclosure", "All checks passed.", "licensed surveyor"} {
		if !strings.Contains(out, want) {
			t.Errorf("record output lacks %q:\n%s", want, out)
		}
	}

	got, errOut, st := run(t, db.URL, "run", "show", id, "--book")
	if st != 0 {
		t.Fatalf("show --book: exit %d: %s", st, errOut)
	}
	if got != string(book) {
		t.Fatalf("run show --book differs from the file:\n%q\n%q", got, book)
	}
	if s := sha256.Sum256([]byte(got)); s != sum {
		t.Fatal("sha256 of the exported book differs")
	}

	show := mustRun(t, db.URL, "run", "show", id)
	for _, want := range []string{"Orrin Bay north loop", "2024-05-14", "usft", "TC-0412  TC-0413", "unverified", "all passed"} {
		if !strings.Contains(show, want) {
			t.Errorf("run show lacks %q:\n%s", want, show)
		}
	}
	var j struct {
		ID       int64 `json:"run_id"`
		Sections []struct {
			From        string  `json:"from"`
			DifferenceM float64 `json:"difference_m"`
		} `json:"sections"`
		Marks []struct {
			Designation string `json:"mark"`
		} `json:"marks"`
	}
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "run", "show", id, "-o", "json")), &j); err != nil {
		t.Fatal(err)
	}
	if len(j.Sections) != 3 || j.Sections[0].From != "TC-0412" || len(j.Marks) != 3 {
		t.Errorf("json %+v", j)
	}

	if list := pipedRows(t, mustRun(t, db.URL, "run", "list", "--mark", "TC-0413")); len(list) != 1 || !strings.HasPrefix(list[0], id+"\t2024-05-14\tOrrin Bay north loop\tnorth-loop.csv") {
		t.Errorf("run list --mark TC-0413:\n%s", list)
	}
	if list := pipedRows(t, mustRun(t, db.URL, "run", "list", "--since", "2024-05-15")); len(list) != 0 {
		t.Errorf("run list --since 2024-05-15:\n%s", list)
	}
	if ms := mustRun(t, db.URL, "mark", "show", "TC-0415"); !strings.Contains(ms, "run\t"+id+" 2024-05-14 Orrin Bay north loop (north-loop.csv)") {
		t.Errorf("mark show lacks the run:\n%s", ms)
	}

	// Again: refused, naming the run.
	before := registertest.Counts(t, db.Pool)
	_, errOut, st = run(t, db.URL, "run", "record", path)
	if st != ExitBadInput || !strings.Contains(errOut, "is already recorded as run "+id+" ") {
		t.Errorf("second record: exit %d: %s", st, errOut)
	}
	registertest.AssertCounts(t, db.Pool, map[string]int64{"run": 1})
	registertest.AssertNothingWritten(t, db.Pool, before)
}

// Refused books exit 2 and write nothing; a reason makes a failing book
// recordable and is kept.
func TestRunRecordRefusals(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	orig, err := os.ReadFile("../../testdata/books/tallis-north-loop.csv")
	if err != nil {
		t.Fatal(err)
	}
	path := writeBook(t, "north-loop.csv", orig)
	empty := registertest.Counts(t, db.Pool)
	_, errOut, st := run(t, db.URL, "run", "record", path)
	if st != ExitBadInput || !strings.Contains(errOut, "3 marks are not in the register: TC-0412 (line 16), TC-0413 (line 21), TC-0415 (line 25)") {
		t.Errorf("unknown marks: exit %d: %s", st, errOut)
	}
	registertest.AssertNothingWritten(t, db.Pool, empty)
	addMarks(t, db, "TC-0412", "TC-0413", "TC-0415")
	before := registertest.Counts(t, db.Pool)

	// The loop's sights of 160-220 ft are longer than first-I's 50 m.
	tight := []string{"run", "record", path, "--class", "first-I"}
	_, errOut, st = run(t, db.URL, tight...)
	if st != ExitBadInput || !strings.Contains(errOut, "check(s) failed, nothing was recorded") || !strings.Contains(errOut, "--accept-failed-checks") {
		t.Errorf("failing checks: exit %d: %s", st, errOut)
	}
	if _, errOut, st = run(t, db.URL, append(tight, "--accept-failed-checks")...); st != ExitBadInput || !strings.Contains(errOut, "needs --reason") {
		t.Errorf("no reason: exit %d: %s", st, errOut)
	}
	if _, errOut, st = run(t, db.URL, append(tight, "--reason", "why")...); st != ExitBadInput {
		t.Errorf("reason alone: exit %d: %s", st, errOut)
	}
	if _, errOut, st = run(t, db.URL, "run", "record", filepath.Join(t.TempDir(), "missing.csv")); st != ExitBadInput || !strings.Contains(errOut, "missing.csv: cannot read the book") {
		t.Errorf("missing file: exit %d: %s", st, errOut)
	}
	if !registertest.AssertCounts(t, db.Pool, noRuns) || !registertest.AssertNothingWritten(t, db.Pool, before) {
		t.Fatal("refused books left rows")
	}
	reason := "first-order sight lengths not kept; recorded for the section differences"
	out := mustRun(t, db.URL, append(tight, "--accept-failed-checks", "--reason", reason)...)
	if !strings.Contains(out, "accepted: "+reason) {
		t.Errorf("output lacks the reason:\n%s", out)
	}
	id := recordedRun.FindStringSubmatch(out)[1]
	if show := mustRun(t, db.URL, "run", "show", id); !strings.Contains(show, "failed, accepted: "+reason) || !strings.Contains(show, "Failed checks") {
		t.Errorf("run show:\n%s", show)
	}
}

// waitFor polls cond until it holds, failing the test after a minute.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(time.Minute)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// holdSections takes a lock that makes any writer of sections wait
// (readers pass), and returns the function that releases it.
func holdSections(t *testing.T, db *pgtest.DB) func() {
	t.Helper()
	ctx := context.Background()
	tx, err := db.Pool.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tx.Exec(ctx, "LOCK TABLE section IN SHARE MODE"); err != nil {
		t.Fatal(err)
	}
	released := false
	release := func() {
		if !released {
			released = true
			_ = tx.Rollback(ctx)
		}
	}
	t.Cleanup(release)
	return release
}

// waiting returns the process ids and queries of the sessions on db's
// database that wait for a lock.
func waiting(t *testing.T, db *pgtest.DB) map[int]string {
	t.Helper()
	rows, err := db.Pool.Query(context.Background(), `SELECT pid, query FROM pg_stat_activity
		WHERE datname = current_database() AND wait_event_type = 'Lock' AND pid <> pg_backend_pid()`)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	out := map[int]string{}
	for rows.Next() {
		var pid int
		var q string
		if err := rows.Scan(&pid, &q); err != nil {
			t.Fatal(err)
		}
		out[pid] = q
	}
	return out
}

// A cairn process killed with SIGKILL in the middle of recording a book of
// 20,000 setups — its 40,000 sightings written, its sections being written
// — leaves no run, sighting or section; the book can then be recorded.
//
// To kill it at that point every time, the test holds a lock on the
// section table: the process writes the run and every sighting, then waits
// for the lock, and is killed while it waits, its transaction open.
func TestRunRecordKilledLeavesNothing(t *testing.T) {
	t.Parallel()
	bin := cairnBinary(t)
	db := pgtest.New(t)
	loop := booktest.Loop{Setups: 20000, Seed: 3}
	addMarks(t, db, loop.Marks()...)
	before := registertest.Counts(t, db.Pool)
	path := writeBook(t, "loop-20k.csv", loop.Book())
	release := holdSections(t, db)

	var stderr bytes.Buffer
	cmd := exec.Command(bin, "--db", db.URL, "run", "record", path, "--by", "test")
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	exited := make(chan error, 1)
	go func() { exited <- cmd.Wait() }()
	var pid int
	waitFor(t, "the recording to reach the sections", func() bool {
		select {
		case err := <-exited:
			t.Fatalf("cairn ended before it was killed: %v: %s", err, stderr.String())
		default:
		}
		for p, q := range waiting(t, db) {
			if strings.Contains(q, `"section"`) {
				pid = p
				return true
			}
		}
		return false
	})
	// The sightings are in the table's pages, not yet committed.
	var size int64
	if err := db.Pool.QueryRow(context.Background(), "SELECT pg_relation_size('sighting')").Scan(&size); err != nil {
		t.Fatal(err)
	}
	if size < 1<<20 {
		t.Fatalf("sighting table is %d bytes while its writer waits: the sightings were not written", size)
	}

	if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	err := <-exited
	var ee *exec.ExitError
	if !errors.As(err, &ee) || ee.Sys().(syscall.WaitStatus).Signal() != syscall.SIGKILL {
		t.Fatalf("cairn ended with %v, want killed by SIGKILL", err)
	}
	release()
	waitFor(t, "the killed session to end", func() bool {
		var n int
		if err := db.Pool.QueryRow(context.Background(), "SELECT count(*) FROM pg_stat_activity WHERE pid = $1", pid).Scan(&n); err != nil {
			t.Fatal(err)
		}
		return n == 0
	})
	if !registertest.AssertCounts(t, db.Pool, noRuns) || !registertest.AssertNothingWritten(t, db.Pool, before) {
		t.Fatal("killed recording left rows")
	}
	out := mustRun(t, db.URL, "run", "record", path, "--by", "test")
	if !strings.Contains(out, "Recorded run ") {
		t.Fatalf("recording after the kill:\n%s", out)
	}
	if !registertest.AssertCounts(t, db.Pool, map[string]int64{"run": 1, "sighting": 40000, "section": int64(loop.Sections())}) {
		t.Fatal("after recording again")
	}
}

// Two processes record the same file at the same moment: exactly one
// succeeds, and the other names the run that won.
//
// The test makes them overlap every time: a lock on the section table stops
// the first inside its transaction, the second waits on the first's run,
// and only then is the lock released.
func TestRunRecordTwoProcessesOneWins(t *testing.T) {
	t.Parallel()
	bin := cairnBinary(t)
	db := pgtest.New(t)
	loop := booktest.Loop{Setups: 200, MarkEvery: 20, Seed: 5}
	addMarks(t, db, loop.Marks()...)
	path := writeBook(t, "loop.csv", loop.Book())
	release := holdSections(t, db)

	type result struct {
		out, err bytes.Buffer
		status   int
	}
	res := make([]*result, 2)
	done := make(chan struct{}, 2)
	for i := range res {
		r := &result{}
		res[i] = r
		cmd := exec.Command(bin, "--db", db.URL, "run", "record", path, "--by", "test")
		cmd.Stdout, cmd.Stderr = &r.out, &r.err
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		go func() {
			_ = cmd.Wait()
			r.status = cmd.ProcessState.ExitCode()
			done <- struct{}{}
		}()
	}
	waitFor(t, "both recordings to wait", func() bool { return len(waiting(t, db)) == 2 })
	release()
	<-done
	<-done

	var won, lost *result
	for _, r := range res {
		switch r.status {
		case 0:
			won = r
		case ExitBadInput:
			lost = r
		}
	}
	if won == nil || lost == nil {
		t.Fatalf("exit statuses %d and %d, want 0 and 2:\n%s\n%s", res[0].status, res[1].status, res[0].err.String(), res[1].err.String())
	}
	m := recordedRun.FindStringSubmatch(won.out.String())
	if m == nil || !strings.Contains(lost.err.String(), "is already recorded as run "+m[1]+" ") {
		t.Fatalf("winner:\n%s\nloser:\n%s", won.out.String(), lost.err.String())
	}
	if !registertest.AssertCounts(t, db.Pool, map[string]int64{"run": 1, "sighting": 400}) {
		t.FailNow()
	}
}

// Two processes record the same observations from two different files at
// once (one with CRLF line ends): one wins, the other waits for it on the
// fingerprint's unique key, is refused naming the winner's run, exit 2,
// and writes nothing.
func TestRunRecordTwoProcessesSameObservations(t *testing.T) {
	t.Parallel()
	bin := cairnBinary(t)
	db := pgtest.New(t)
	loop := booktest.Loop{Setups: 200, MarkEvery: 20, Seed: 5}
	addMarks(t, db, loop.Marks()...)
	paths := []string{
		writeBook(t, "loop.csv", loop.Book()),
		writeBook(t, "loop-crlf.csv", bytes.ReplaceAll(loop.Book(), []byte("\n"), []byte("\r\n"))),
	}
	release := holdSections(t, db)

	type result struct {
		out, err bytes.Buffer
		status   int
	}
	res := make([]*result, 2)
	done := make(chan struct{}, 2)
	for i := range res {
		r := &result{}
		res[i] = r
		cmd := exec.Command(bin, "--db", db.URL, "run", "record", paths[i], "--by", "test")
		cmd.Stdout, cmd.Stderr = &r.out, &r.err
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		go func() {
			_ = cmd.Wait()
			r.status = cmd.ProcessState.ExitCode()
			done <- struct{}{}
		}()
	}
	waitFor(t, "both recordings to wait", func() bool { return len(waiting(t, db)) == 2 })
	release()
	<-done
	<-done

	var won, lost *result
	for _, r := range res {
		switch r.status {
		case 0:
			won = r
		case ExitBadInput:
			lost = r
		}
	}
	if won == nil || lost == nil {
		t.Fatalf("exit statuses %d and %d, want 0 and 2:\n%s\n%s", res[0].status, res[1].status, res[0].err.String(), res[1].err.String())
	}
	m := recordedRun.FindStringSubmatch(won.out.String())
	if m == nil || !strings.Contains(lost.err.String(), " holds the same observations as run "+m[1]+" ") {
		t.Fatalf("winner:\n%s\nloser:\n%s", won.out.String(), lost.err.String())
	}
	if !registertest.AssertCounts(t, db.Pool, map[string]int64{"run": 1, "sighting": 400}) {
		t.FailNow()
	}
}
