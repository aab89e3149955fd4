package cli

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/pgtest"
)

// execErr is execRun with the error's text as cairn prints it.
func execErr(t *testing.T, args ...string) (string, int) {
	t.Helper()
	ios, _, _, _ := TestStreams(false)
	f := NewFactory(ios, "test")
	f.Getenv = func(string) string { return "" }
	err := Execute(context.Background(), f, args)
	if err == nil {
		return "", ExitOK
	}
	return err.Error(), exitCode(err)
}

// run check names the profile that judged the run, its source and, in
// plain words, which values are from memory; --standards en0593 judges the
// same book by EN0593's values.
func TestRunCheckSaysWhichStandards(t *testing.T) {
	out, _, code := execRun(t, "run", "check", testBooks+"tallis-north-loop.csv")
	if code != ExitOK {
		t.Fatalf("exit %d", code)
	}
	for _, want := range []string{
		"Judged by standards fgcc-1984, built in, edition 2",
		"source: Federal Geodetic Control Committee, Standards and Specifications for Geodetic Control Networks, Rockville MD, September 1984, §3.5",
		"from memory, not checked against the source: loop",
		"CAUTION: the loop, section, sight length",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("report lacks %q:\n%s", want, out)
		}
	}
	out, _, code = execRun(t, "run", "check", testBooks+"tallis-north-loop.csv", "--standards", "en0593")
	if code != ExitOK || !strings.Contains(out, "Judged by standards en0593, built in, edition 1") || !strings.Contains(out, "read: loop") {
		t.Errorf("en0593: exit %d\n%s", code, out)
	}
	errOut, code := execErr(t, "run", "check", testBooks+"tallis-north-loop.csv", "--standards", "nowhere.std")
	if code != ExitBadInput || !strings.Contains(errOut, "neither a built-in profile") {
		t.Errorf("missing profile: exit %d, %q", code, errOut)
	}
}

// standards show lists every value with its status; a bad file names its
// file, line and field.
func TestStandardsShow(t *testing.T) {
	out, _, code := execRun(t, "standards", "show", "en0593")
	if code != ExitOK || !strings.Contains(out, "read: US Army Engineer School, subcourse EN0593, §4-3") || !strings.Contains(out, "licensed surveyor") {
		t.Errorf("show en0593: exit %d\n%s", code, out)
	}
	dir := t.TempDir()
	bad := filepath.Join(dir, "office.std")
	if err := os.WriteFile(bad, []byte("cairn-standards: 1\nprofile: o\nsource: s\n\nclass,loop_mm_sqrt_km,section_mm_sqrt_km,max_sight_m,max_setup_imbalance_m,max_section_imbalance_m,three_wire_m,check_connection_mm_sqrt_km\nthird,12,12,90,10,10,3,12\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	errOut, code := execErr(t, "standards", "show", bad)
	if code != ExitBadInput || !strings.Contains(errOut, "office.std:6: three_wire_m: 3 is outside") {
		t.Errorf("bad file: exit %d, %q", code, errOut)
	}
}

// A recorded run shows the profile that judged it, in run show and trace.
func TestRunShowSaysWhichStandards(t *testing.T) {
	t.Parallel()
	url := pgtest.New(t).URL
	mustRun(t, url, "run", "record", testBooks+"tallis-north-loop.csv", "--new-marks", "--by", "A. Moreau", "--standards", "en0593")
	out := mustRun(t, url, "run", "show", "1")
	if !strings.Contains(out, "en0593, built in, edition 1") || !strings.Contains(out, "read: loop") {
		t.Errorf("run show:\n%s", out)
	}
}
