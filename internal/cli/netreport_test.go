package cli

import (
	"bytes"
	"context"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/adjust"
	"cairn/internal/netgen"
	"cairn/internal/register"
)

// TestChiSquareLineSameInBothReports: the offline report (adjust
// --sections) and the register's (adjust RUN... --method least-squares)
// word the χ² test the same way, naming what the bounds apply to. The
// network is Ghilani & Wolf, Adjustment Computations, 4th ed., 2006,
// Example 12.1 (as in adjust.TestPublishedLevelNet): redundancy 3; the
// two-tailed 95 % bounds of χ²(3) are 0.216 and 9.348 (χ² quantiles at
// 0.025 and 0.975, derived; tables of the χ² distribution give 0.2158 and
// 9.3484), 0.072 and 3.116 on the variance factor (divided by 3).
func TestChiSquareLineSameInBothReports(t *testing.T) {
	net := adjust.NewNetwork(6)
	for _, o := range []struct {
		from, to string
		dh, sd   float64
	}{{"A", "B", 10.509, 0.006}, {"B", "C", 5.360, 0.004}, {"C", "D", -8.523, 0.005}, {"D", "A", -7.348, 0.003}, {"B", "D", -3.167, 0.004}, {"A", "C", 15.881, 0.012}} {
		net.AddSection(adjust.Section{From: o.from, To: o.to, DhM: o.dh, LengthKm: (o.sd / 0.001) * (o.sd / 0.001)})
	}
	net.AddHeld(adjust.HeldMark{Point: "A", HeightM: 437.596})
	sol, err := adjust.SolveNetwork(net, adjust.NetworkOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var offline bytes.Buffer
	writeAdjustReport(&offline, sol, &adjustOptions{SigmaMMPerSqrtKm: 1, SectionsPath: "s.csv"}, make([]int32, 6))
	var reg strings.Builder
	renderNetworkStats(func(f string, a ...any) { fmt.Fprintf(&reg, f, a...) }, &register.AdjustmentView{}, adjust.NetworkStatOf(sol))

	a, b := regexpLine(offline.String(), "chi-square"), strings.TrimSpace(regexpLine(reg.String(), "chi-square"))
	if a == "" || a != b {
		t.Fatalf("offline:  %q\nregister: %q", a, b)
	}
	t.Log(a)
	for _, want := range []string{"vTPv against its two-tailed 95% bounds for 3 degrees of freedom, 0.216 to 9.348", "(variance factor 0.072 to 3.116)", "alpha 0.05"} {
		if !strings.Contains(a, want) {
			t.Errorf("chi-square line %q lacks %q", a, want)
		}
	}
}

// TestNotJudgedSaysWhy: a loop whose book names a class but books no sight
// lengths is "not judged (no lengths)", not "(no class)"; with no class it
// is "(no class, no lengths)".
func TestNotJudgedSaysWhy(t *testing.T) {
	dir := t.TempDir()
	for class, want := range map[string]string{"# class: first-I\n": "not judged (no lengths)", "": "not judged (no class, no lengths)"} {
		book := writeFile(t, dir, "b.csv", "# units: m\n"+class+"point,sight,middle\nTC-1,BS,1.5\nTC-2,FS,1.2\nTC-2,BS,1.5\nTC-1,FS,1.8\n")
		ios, _, out, _ := TestStreams(false)
		_ = Execute(context.Background(), NewFactory(ios, "test"), []string{"run", "check", book})
		if got := regexpLine(out.String(), "loop  TC-1"); !strings.HasSuffix(strings.TrimSpace(got), want) {
			t.Errorf("class %q: misclosure row %q, want it to end %q; output:\n%s", class, got, want, out.String())
		}
	}
}

// TestSnoopingFlagSetsTheExitStatus: a clean generated network (netgen: noise
// of 1 mm·√L, no blunder) of about 12,000 sections adjusted offline. Per
// observation (the default) chance flags about n·0.001 sections: the report
// says how many were expected and points to --snooping family, and the exit
// status is 3 as asked. Family-wise the same network flags none, the report
// says which level was used, and the exit status is 0.
func TestSnoopingFlagSetsTheExitStatus(t *testing.T) {
	dir := t.TempDir()
	g := netgen.Generate(netgen.Options{Points: 7000, PerLine: -1, HeldEvery: 1000, Seed: 5})
	if err := g.WriteFiles(dir); err != nil {
		t.Fatal(err)
	}
	s, h := filepath.Join(dir, "sections.csv"), filepath.Join(dir, "held.csv")
	adjustWith := func(args ...string) (string, error) {
		ios, _, _, errOut := TestStreams(false)
		err := Execute(context.Background(), NewFactory(ios, "test"), append([]string{"adjust", "--sections", s, "--held", h, "--out", filepath.Join(dir, "out.csv")}, args...))
		return errOut.String(), err
	}
	report, err := adjustWith()
	line := regexpLine(report, "flagged by data snooping")
	if exitCode(err) != ExitChecks || !strings.Contains(line, "per observation: alpha 0.001 for each of") ||
		!strings.Contains(line, "expected by chance with no blunder") || !strings.Contains(line, "--snooping family") {
		t.Errorf("per observation: exit %d (%v): %s", exitCode(err), err, line)
	}
	report, err = adjustWith("--snooping", "family")
	line = regexpLine(report, "flagged by data snooping")
	if exitCode(err) != ExitOK || !strings.HasPrefix(line, "0 section(s) flagged") || !strings.Contains(line, "family-wise: alpha 0.001 for the whole network, Šidák's") {
		t.Errorf("family-wise: exit %d (%v): %s", exitCode(err), err, line)
	}
	t.Log(line)
	if _, err := adjustWith("--snooping", "each"); exitCode(err) != ExitBadInput || !strings.Contains(err.Error(), "per-observation or family") {
		t.Errorf("--snooping each: %v", err)
	}
}
