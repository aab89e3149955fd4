package cli

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"syscall"
	"testing"

	"cairn/internal/levelbook"
	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// Hostile text: SQL's own syntax, control characters, long text.
var hostile = []string{
	`Robert'); DROP TABLE height; --`,
	`x' OR '1'='1`,
	`$1 %s %d %% \N \\ "; COMMIT; DELETE FROM mark; --`,
	"line one\nline two\r\n\ttabbed \x1b[31mred\x1b[0m \x07bell \x7f del",
	"east of the \u202eevil\u202c mark, Orrin Bay \U0001F4CD",
	strings.Repeat("Ω long ", 8000) + "end", // 64,003 bytes, just under the cap
}

// Text the register cannot keep is refused with a clear error naming the
// field, exit status 2, and nothing written.
var refusedText = []struct{ value, want string }{
	{"caf\xe9 au lait", "not UTF-8"},
	{"a\x00b", "NUL"},
	{strings.Repeat("x", MaxTextBytes+1), "too long"},
}

// Every free-text field of every writing command keeps hostile text
// exactly, and gives it back exactly; text the register cannot keep, and
// hostile designations, are refused with exit status 2 and write nothing.
func TestHostileText(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 2)
	ctx := context.Background()
	for i, v := range hostile {
		who := fmt.Sprintf("%d %s", i, v)
		if len(who) > MaxTextBytes {
			who = who[:MaxTextBytes]
		}
		des := fmt.Sprintf("TC-%04d", 100+i)
		mustRun(t, db.URL, "mark", "add", des, "--type", v, "--setting", v, "--stamping", v, "--directions", v, "--by", who)
		mustRun(t, db.URL, "mark", "condition", des, "good", "--note", v, "--by", who)
		mustRun(t, db.URL, "datum", "add", fmt.Sprintf("D%d", i), "--name", v, "--note", v, "--by", who)
		mustRun(t, db.URL, "height", "set", "--in-force-from", inForceNow(), des, "1.000", "--unit", "m", "--datum", fmt.Sprintf("D%d", i),
			"--source", v, "--reason", v, "--by", who)

		var shown markJSON
		if err := json.Unmarshal([]byte(mustRun(t, db.URL, "mark", "show", des, "-o", "json")), &shown); err != nil {
			t.Fatal(err)
		}
		if shown.Type != v || shown.Setting != v || shown.Stamping != v || shown.Directions != v ||
			len(shown.Conditions) != 1 || shown.Conditions[0].Note != v || shown.Conditions[0].RecordedBy != who {
			t.Errorf("mark show %s gives back %+v, want %q throughout", des, shown, clip(v))
		}
		var src, reason, by, name, note, dby string
		if err := db.Pool.QueryRow(ctx, `SELECT h.source, h.reason, h.recorded_by, d.name, d.note, d.created_by
			FROM height h JOIN datum d ON d.id = h.datum_id JOIN mark m ON m.id = h.mark_id WHERE m.designation = $1`, des).
			Scan(&src, &reason, &by, &name, &note, &dby); err != nil {
			t.Fatal(err)
		}
		if src != v || reason != v || by != who || name != v || note != v || dby != who {
			t.Errorf("height and datum of %s not kept exactly", des)
		}
	}
	// Reasons of publication and discard, and who.
	v := hostile[0] + hostile[3]
	a1, a2 := adjustForTest(t, db.URL, fmt.Sprint(runs[0])), adjustForTest(t, db.URL, fmt.Sprint(runs[1]))
	mustRun(t, db.URL, "discard", a2, "--reason", v, "--by", v, "--yes")
	mustRun(t, db.URL, "publish", a1, "--reason", v, "--by", v, "--yes")
	var n int
	if err := db.Pool.QueryRow(ctx, "SELECT count(*) FROM adjustment_event WHERE reason = $1 AND recorded_by = $1", v).Scan(&n); err != nil || n != 2 {
		t.Errorf("publication and discard reasons kept: %d of 2 (%v)", n, err)
	}

	// A book whose metadata, notes and file name are hostile is kept byte
	// for byte and its metadata exactly.
	book, err := os.ReadFile(workedCircuit)
	if err != nil {
		t.Fatal(err)
	}
	meta := "Robert'); DROP TABLE run; -- \x1b[31m\u202e"
	// A side shot of its own makes it other observations than the runs
	// recorded already (registertest.SideShot).
	hostileBook := registertest.SideShot(t, append([]byte("# rod: "+meta+"\n# instrument: "+meta+"\n"), book...), "hostile")
	path := filepath.Join(t.TempDir(), "o'brien; DROP TABLE run; --.csv")
	if err := os.WriteFile(path, hostileBook, 0o644); err != nil {
		t.Fatal(err)
	}
	mustRun(t, db.URL, "run", "record", path, "--by", v)
	var rod, instrument, fileName string
	var stored []byte
	if err := db.Pool.QueryRow(ctx, "SELECT rod, instrument, file_name, book FROM run ORDER BY id DESC LIMIT 1").Scan(&rod, &instrument, &fileName, &stored); err != nil {
		t.Fatal(err)
	}
	if rod != meta || instrument != meta || fileName != filepath.Base(path) || string(stored) != string(hostileBook) {
		t.Errorf("hostile book kept as rod %q, instrument %q, file %q", rod, instrument, fileName)
	}

	// Refusals: exit 2, a message naming the field, nothing written.
	try := func(want string, args ...string) {
		t.Helper()
		before := registertest.Counts(t, db.Pool)
		_, errOut, st := run(t, db.URL, args...)
		if st != ExitBadInput || !strings.Contains(errOut, want) {
			t.Errorf("cairn %s: exit %d, %q; want exit 2 saying %q", clip(strings.Join(args, " ")), st, clip(errOut), want)
		}
		if !registertest.AssertNothingWritten(t, db.Pool, before) {
			t.Errorf("refused command wrote: cairn %s", clip(strings.Join(args, " ")))
		}
	}
	for _, r := range refusedText {
		try("--note: ", "mark", "condition", "BM2", "good", "--note", r.value)
		try("--directions: ", "mark", "add", "TC-0999", "--directions", r.value)
		try("--reason: ", "height", "set", "--in-force-from", inForceNow(), "BM2", "1.000", "--unit", "m", "--datum", "NAVD88", "--source", "s", "--reason", r.value)
		try("--by: ", "publish", a2, "--reason", "r", "--by", r.value, "--yes")
		try("--name: ", "datum", "add", "DX", "--name", r.value)
		try("DESIGNATION: ", "mark", "add", r.value)
		try(r.want, "mark", "add", "TC-0999", "--type", r.value)
	}
	for _, des := range []string{"TC-0412'; DROP TABLE mark; --", "TC 0412", "_TC", "TC-0412\n", strings.Repeat("T", 65), "ТС-0412"} {
		try("designation", "mark", "add", des, "--type", "x")
	}
	bad := filepath.Join(t.TempDir(), "latin1.csv")
	if err := os.WriteFile(bad, append([]byte("# rod: caf\xe9\n"), book...), 0o644); err != nil {
		t.Fatal(err)
	}
	try("latin1.csv", "run", "record", bad)
}

// A 200 MB field book is refused before it is read, with an error that
// names the file and the cap, exit status 2, and the process's peak
// resident memory stays far below the book's size. The same holds for a
// book on a pipe, which cannot be measured first: reading stops at the cap.
func TestHugeBookRefusedInBoundedMemory(t *testing.T) {
	t.Parallel()
	bin := cairnBinary(t)
	db := pgtest.New(t)
	before := registertest.Counts(t, db.Pool)
	dir := t.TempDir()
	path := filepath.Join(dir, "huge.csv")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	line := []byte("TP1,FS,1.2345,,,\n")
	chunk := []byte(strings.Repeat(string(line), 1<<16))
	for written := 0; written < 200<<20; written += len(chunk) {
		if _, err := f.Write(chunk); err != nil {
			t.Fatal(err)
		}
	}
	if err := f.Truncate(200 << 20); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	fifo := filepath.Join(dir, "piped.csv")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ name, path, want string }{
		{"file", path, "the book is 200.0 MiB; a field book may be at most 32 MiB"},
		{"pipe", fifo, "the book is more than 32 MiB"},
	} {
		cmd := exec.Command(bin, "--db", db.URL, "run", "record", c.path)
		cmd.Env = append(os.Environ(), "CAIRN_REPORT_PEAK_MEMORY=1")
		var stderr strings.Builder
		cmd.Stderr = &stderr
		if c.name == "pipe" {
			// Feed the pipe from the huge file, and stop when the reader goes.
			go func() {
				w, err := os.OpenFile(fifo, os.O_WRONLY, 0)
				if err != nil {
					return
				}
				defer w.Close()
				src, err := os.Open(path)
				if err != nil {
					return
				}
				defer src.Close()
				_, _ = src.WriteTo(w)
			}()
		}
		err := cmd.Run()
		if cmd.ProcessState == nil || cmd.ProcessState.ExitCode() != ExitBadInput || !strings.Contains(stderr.String(), c.want) ||
			!strings.Contains(stderr.String(), c.path) {
			t.Fatalf("%s: %v, %q; want exit 2 saying %q", c.name, err, stderr.String(), c.want)
		}
		// The process reports its own VmHWM: the rusage of a child that Go
		// starts with a vfork-like clone also counts this test process.
		m := regexp.MustCompile(`peak resident memory (\d+) kB`).FindStringSubmatch(stderr.String())
		if m == nil {
			t.Fatalf("%s: no peak memory report in %q", c.name, stderr.String())
		}
		peakKiB, _ := strconv.ParseInt(m[1], 10, 64)
		peak := peakKiB << 10
		t.Logf("%s of 200 MiB refused; peak resident memory %.1f MiB", c.name, float64(peak)/(1<<20))
		if limit := int64(levelbook.MaxBookBytes) + 40<<20; peak > limit {
			t.Errorf("%s: peak resident memory %d bytes, above the bound of %d", c.name, peak, limit)
		}
	}
	if !registertest.AssertCounts(t, db.Pool, map[string]int64{"run": 0}) || !registertest.AssertNothingWritten(t, db.Pool, before) {
		t.Fatal("refused books left rows")
	}
}
