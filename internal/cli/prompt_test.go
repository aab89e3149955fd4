package cli

import (
	"strings"
	"testing"
)

// CanPrompt needs In and ErrOut on terminals, unless a test says otherwise.
func TestCanPrompt(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		in, errOut, want bool
	}{
		{false, false, false},
		{true, false, false},
		{false, true, false},
		{true, true, true},
	} {
		ios, _, _, _ := TestStreams(true)
		ios.InIsTerminal, ios.ErrIsTerminal = c.in, c.errOut
		if got := ios.CanPrompt(); got != c.want {
			t.Errorf("stdin terminal %v, stderr terminal %v: CanPrompt %v, want %v", c.in, c.errOut, got, c.want)
		}
		ios.SetCanPrompt(!c.want)
		if got := ios.CanPrompt(); got != !c.want {
			t.Errorf("SetCanPrompt(%v): CanPrompt %v", !c.want, got)
		}
	}
}

// confirm asks on stderr and reads the answer from the input stream; off
// a terminal it asks nothing and refuses.
func TestConfirm(t *testing.T) {
	t.Parallel()
	ios, in, out, errOut := TestStreams(false)
	in.WriteString("y\n")
	if err := confirm(ios, "Discard adjustment 3 for good?"); exitCode(err) != ExitBadInput || !strings.Contains(err.Error(), "give --yes to go ahead") {
		t.Errorf("off a terminal: %v", err)
	}
	if errOut.Len() != 0 || in.Len() != 2 {
		t.Errorf("off a terminal, a question was asked (%q) or an answer read", errOut)
	}
	for _, c := range []struct {
		answer string
		yes    bool
	}{
		{"y\n", true}, {" YES \n", true}, {"n\n", false}, {"\n", false}, {"", false}, {"yes please\n", false},
	} {
		ios, in, out, errOut = TestStreams(false)
		ios.SetCanPrompt(true)
		in.WriteString(c.answer)
		err := confirm(ios, "Discard adjustment 3 for good?")
		if c.yes && err != nil || !c.yes && (exitCode(err) != ExitBadInput || !strings.Contains(err.Error(), "not confirmed; nothing was done")) {
			t.Errorf("answer %q: %v", c.answer, err)
		}
		if errOut.String() != "Discard adjustment 3 for good? [y/N] " || out.Len() != 0 {
			t.Errorf("answer %q: asked %q, stdout %q", c.answer, errOut, out)
		}
	}
}

// discard asks before it opens the register: a "no" leaves it unopened.
func TestDiscardAsksFirst(t *testing.T) {
	t.Parallel()
	ios, in, _, _ := TestStreams(false)
	f := NewFactory(ios, "test")
	f.Getenv = func(string) string { return "" }
	ios.SetCanPrompt(true)
	in.WriteString("n\n")
	err := execCmd(newCmdDiscard(f, nil), "3", "--reason", "superseded")
	if exitCode(err) != ExitBadInput || !strings.Contains(err.Error(), "not confirmed") {
		t.Errorf("discard answered no: %v", err)
	}
	if f.pool != nil || f.connErr != nil {
		t.Error("discard opened the register before it was confirmed")
	}
}
