package cli

import (
	"context"
	"encoding/json"
	"io"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// serveUntil runs `cairn serve` over url with args in this process,
// calls fn with the address it listens on, then stops it as SIGINT or
// SIGTERM would (its context ends) and returns what it wrote on stderr;
// the server must have stopped cleanly.
func serveUntil(t *testing.T, url string, args []string, fn func(addr string)) string {
	t.Helper()
	ios, _, _, errOut := TestStreams(false)
	f := NewFactory(ios, "test")
	f.DatabaseURL = url
	defer f.Close()
	addr := make(chan string, 1)
	cmd := newCmdServe(f, func(o *serveOptions) error {
		o.ready = func(a string) { addr <- a }
		return serveRun(o)
	})
	cmd.SetArgs(append([]string{"--listen", "127.0.0.1:0"}, args...))
	cmd.SetOut(io.Discard)
	cmd.SetErr(io.Discard)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	done := make(chan error, 1)
	go func() { done <- cmd.ExecuteContext(ctx) }()
	select {
	case a := <-addr:
		fn(a)
	case err := <-done:
		t.Fatalf("serve stopped before serving: %v\n%s", err, errOut)
	case <-time.After(30 * time.Second):
		t.Fatal("serve did not start in 30 s")
	}
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("serve stopped with %v", err)
		}
	case <-time.After(30 * time.Second):
		t.Fatal("serve did not stop in 30 s")
	}
	ios.Flush()
	return errOut.String()
}

// serve refuses to start as a role that can write to the register (the
// test server's superuser, a recorder), naming the role and what it may write, and
// exits 2; with --allow-writer it starts, warning loudly.
func TestServeRefusesWriter(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	_, errOut, status := run(t, db.URL, "serve", "--listen", "127.0.0.1:0")
	if status != ExitBadInput || !strings.Contains(errOut, "can write to the register") || !strings.Contains(errOut, "adjustment INSERT") ||
		!strings.Contains(errOut, "--allow-writer") {
		t.Fatalf("serve as the owner: exit %d: %s", status, errOut)
	}
	// A recorder may write the runs it records: refused too.
	_, errOut, status = run(t, loginAs(t, db, "cairn_recorder"), "serve", "--listen", "127.0.0.1:0")
	if status != ExitBadInput || !strings.Contains(errOut, "can write to the register") {
		t.Errorf("serve as a recorder: exit %d: %s", status, errOut)
	}
	logs := serveUntil(t, db.URL, []string{"--allow-writer"}, func(string) {})
	if !strings.Contains(logs, "WARNING: serving as role") || !strings.Contains(logs, "CAN WRITE") {
		t.Errorf("--allow-writer gave no loud warning: %s", logs)
	}
}

// As a login member of cairn_reader, serve starts, answers, writes one
// JSON line per request to stderr (the access log), and stops cleanly
// when told to, finishing what it was doing.
func TestServeAsReader(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	b := registertest.On(t, db)
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0412"})
	reader := loginAs(t, db, "cairn_reader")
	logs := serveUntil(t, reader, nil, func(addr string) {
		resp, err := http.Get("http://" + addr + "/marks/TC-0412")
		if err != nil {
			t.Fatal(err)
		}
		body, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != http.StatusOK || !strings.Contains(string(body), "TC-0412") || !strings.Contains(string(body), "licensed surveyor") {
			t.Errorf("GET /marks/TC-0412: %s %.300s", resp.Status, body)
		}
	})
	if !strings.Contains(logs, "serving the register read-only on http://127.0.0.1:") {
		t.Errorf("no line saying where it serves: %s", logs)
	}
	var found bool
	for _, line := range strings.Split(logs, "\n") {
		var l struct {
			Msg, Method, Path string
			Status            int
			DurationMS        *float64 `json:"duration_ms"`
		}
		if json.Unmarshal([]byte(line), &l) == nil && l.Msg == "request" {
			found = l.Method == "GET" && l.Path == "/marks/TC-0412" && l.Status == 200 && l.DurationMS != nil
		}
	}
	if !found {
		t.Errorf("no access log line for the request: %s", logs)
	}
	if strings.Contains(logs, "CAN WRITE") {
		t.Errorf("a reader was warned of writing: %s", logs)
	}
}

// --statement shows a statement of cairn audit head in the footer, and
// refuses one of another register, naming the file.
func TestServeStatement(t *testing.T) {
	t.Parallel()
	db, other := pgtest.New(t), pgtest.New(t)
	for _, d := range []*pgtest.DB{db, other} {
		registertest.On(t, d).Mark(t, registertest.MarkOpts{Designation: "TC-0412"})
	}
	registertest.On(t, other).Mark(t, registertest.MarkOpts{Designation: "TC-0413"})
	dir := t.TempDir()
	mine, theirs := filepath.Join(dir, "mine.json"), filepath.Join(dir, "theirs.json")
	for file, d := range map[string]*pgtest.DB{mine: db, theirs: other} {
		if err := os.WriteFile(file, []byte(mustRun(t, d.URL, "audit", "head")), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	reader := loginAs(t, db, "cairn_reader")
	serveUntil(t, reader, []string{"--statement", mine}, func(addr string) {
		resp, err := http.Get("http://" + addr + "/?f=html")
		if err != nil {
			t.Fatal(err)
		}
		body, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if !strings.Contains(string(body), "unsigned statement of commit") || strings.Contains(string(body), "no signed statement") {
			t.Errorf("the footer does not show the statement: %s", body)
		}
	})
	_, errOut, status := run(t, reader, "serve", "--listen", "127.0.0.1:0", "--statement", theirs)
	if status != ExitBadInput || !strings.Contains(errOut, "theirs.json") {
		t.Errorf("another register's statement: exit %d: %s", status, errOut)
	}
}

// serve's flags reach its run function as typed, bad ones are refused
// before any database is opened, and its help carries the cautions (it
// publishes heights).
func TestServeFlags(t *testing.T) {
	t.Parallel()
	f := noDBFactory(t)
	var got *serveOptions
	if err := execCmd(newCmdServe(f, func(o *serveOptions) error { got = o; return nil }), "--listen", "0.0.0.0:9000", "--tiles", "https://tiles.example/{z}/{x}/{y}.png",
		"--allow-writer", "--statement-timeout", "2s", "--max-conns", "8", "--grace", "3s"); err != nil {
		t.Fatal(err)
	}
	if got.listen != "0.0.0.0:9000" || got.tiles != "https://tiles.example/{z}/{x}/{y}.png" || !got.allowWriter || got.statementTimeout != 2*time.Second ||
		got.maxConns != 8 || got.grace != 3*time.Second || got.ctx == nil {
		t.Errorf("serve options %+v", got)
	}
	if err := execCmd(newCmdServe(f, func(o *serveOptions) error { got = o; return nil })); err != nil || got.listen != "127.0.0.1:8080" || got.allowWriter {
		t.Errorf("defaults: %v %+v", err, got)
	}
	for _, args := range [][]string{{"--statement-timeout", "0s"}, {"--max-conns", "-1"}, {"extra"},
		{"--tiles", "https://tiles.example/{z}/{x}.png"}, {"--tiles", "https://tiles.example/{z}/{x}/{y}.png; script-src *"}} {
		called := false
		err := execCmd(newCmdServe(f, func(*serveOptions) error { called = true; return nil }), args...)
		if err == nil || called || exitCode(err) != ExitBadInput {
			t.Errorf("serve %v: %v (run called %v)", args, err, called)
		}
	}
	help := newCmdServe(f, nil).Long
	for _, w := range []string{"licensed surveyor", "two marks", "condition", "Local codes"} {
		if !strings.Contains(help, w) {
			t.Errorf("serve --help lacks %q", w)
		}
	}
}
