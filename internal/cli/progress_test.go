package cli

import (
	"bytes"
	"context"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/creack/pty"

	"cairn/internal/geojson/geojsontest"
)

// Each long command draws its bar only when its error stream is a
// terminal (IOStreams.StartBar decides): with a buffer for stderr no bar,
// and with ErrIsTerminal set (the control, so that the test can fail) a
// bar on stderr, never on stdout. audit verify -o json draws none even on
// a terminal.
func TestProgressOnlyOnTerminal(t *testing.T) {
	t.Parallel()
	url := exportRegister(t)
	dir := t.TempDir()
	n := 0
	for _, c := range []struct {
		args []string
		bar  string // the bar's words; "" for none even on a terminal
	}{
		{[]string{"pack", "--near", "41.6208,-97.9583", "--within", "500m", "--out", "PACK"}, "pack: "},
		{[]string{"audit", "verify"}, "audit: height versions checked"},
		{[]string{"audit", "verify", "-o", "json"}, ""},
		{[]string{"export", "--format", "csv", "--out", "-"}, "exporting marks"},
	} {
		for _, term := range []bool{false, true} {
			args := append([]string{"--db", url}, c.args...)
			for i, a := range args {
				if a == "PACK" {
					n++
					args[i] = filepath.Join(dir, strings.Repeat("p", n)+".zip")
				}
			}
			ios, _, out, errOut := TestStreams(false)
			ios.ErrIsTerminal = term
			f := NewFactory(ios, "test")
			err := Execute(context.Background(), f, args)
			f.Close()
			if err != nil {
				t.Fatalf("cairn %s: %v", strings.Join(c.args, " "), err)
			}
			want := term && c.bar != ""
			got := strings.Contains(errOut.String(), "\r")
			if got != want || (want && !strings.Contains(errOut.String(), c.bar)) {
				t.Errorf("cairn %s, stderr a terminal %v: bar %v, want %v:\n%q", strings.Join(c.args, " "), term, got, want, errOut.String())
			}
			if strings.Contains(out.String(), "\r") || (c.bar != "" && strings.Contains(out.String(), c.bar)) {
				t.Errorf("cairn %s: a bar on stdout", strings.Join(c.args, " "))
			}
		}
	}
}

// The built binary, run as a process: its stderr a pseudo-terminal
// (creack/pty), the export draws its bar there and the GeoJSON goes whole
// to stdout, a pipe; with stderr a pipe too there is no bar at all.
func TestProgressOnPseudoTerminal(t *testing.T) {
	t.Parallel()
	url := exportRegister(t)
	bin := cairnBinary(t)
	args := []string{"--db", url, "export", "--format", "geojson", "--out", "-"}

	ptmx, tty, err := pty.Open()
	if err != nil {
		t.Skipf("no pseudo-terminal here: %v", err)
	}
	defer ptmx.Close()
	var out bytes.Buffer
	cmd := exec.Command(bin, args...)
	cmd.Stdout, cmd.Stderr, cmd.Stdin = &out, tty, nil
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	tty.Close()
	var onTerm bytes.Buffer
	done := make(chan struct{})
	go func() { _, _ = io.Copy(&onTerm, ptmx); close(done) }()
	if err := cmd.Wait(); err != nil {
		t.Fatalf("cairn export with a terminal for stderr: %v\n%s", err, onTerm.String())
	}
	select {
	case <-done:
	case <-time.After(5 * time.Second):
		_ = ptmx.Close()
		<-done
	}
	if !strings.Contains(onTerm.String(), "exporting marks") || !strings.Contains(onTerm.String(), "\r") {
		t.Errorf("the terminal shows no bar:\n%q", onTerm.String())
	}
	if strings.Contains(out.String(), "exporting") || strings.Contains(out.String(), "\r") {
		t.Error("the bar reached stdout")
	}
	geojsontest.Check(t, out.Bytes())

	var out2, err2 bytes.Buffer
	cmd = exec.Command(bin, args...)
	cmd.Stdout, cmd.Stderr = &out2, &err2
	cmd.Env = append(os.Environ(), "TERM=xterm")
	if err := cmd.Run(); err != nil {
		t.Fatalf("cairn export piped: %v\n%s", err, err2.String())
	}
	if strings.Contains(err2.String(), "exporting marks") || strings.Contains(err2.String(), "\r") {
		t.Errorf("a bar on a piped stderr:\n%q", err2.String())
	}
	if !bytes.Equal(out.Bytes(), out2.Bytes()) {
		t.Error("the GeoJSON differs with and without a terminal for stderr")
	}
}
