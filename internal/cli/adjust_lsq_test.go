package cli

import (
	"encoding/json"
	"fmt"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// tallisLines are three invented runs over TC-0412 to TC-0416 (TC-0413
// and TC-0416 reached by several) and a fourth far off, as (from, to,
// dh_m, km). The second section of the first run carries a planted 5 cm
// blunder (0.5421 observed + 0.05).
var tallisLines = [][][4]any{
	{{"TC-0412", "TC-0413", 1.2357, 1.2}, {"TC-0413", "TC-0414", 0.5921, 0.9}, {"TC-0414", "TC-0415", -0.8757, 1.1}},
	{{"TC-0415", "TC-0416", 0.3199, 0.8}, {"TC-0416", "TC-0413", 0.0133, 1.3}, {"TC-0413", "TC-0412", -1.2356, 1.0}},
	{{"TC-0414", "TC-0416", -0.5545, 0.7}},
	{{"TC-0430", "TC-0431", 0.4321, 1.0}},
}

// seedTallis adds the marks (with positions 2.2 km apart, TC-0430 and
// TC-0431 a degree off), the held heights TC-0412 = 10.0000 m and
// TC-0415 = 10.9012 m, and records the runs: one setup per section, the
// rise on the backsight, half the length on each sight; the book lines of
// section k are 6+2k and 7+2k.
func seedTallis(t *testing.T, db *pgtest.DB) {
	t.Helper()
	b := registertest.On(t, db)
	b.Datum(t, registertest.DatumOpts{})
	for i, d := range []string{"TC-0412", "TC-0413", "TC-0414", "TC-0415", "TC-0416", "TC-0430", "TC-0431"} {
		lat, lon := 41.60+0.02*float64(i), -97.90
		if i >= 5 {
			lat += 1
		}
		b.Mark(t, registertest.MarkOpts{Designation: d, Lat: &lat, Lon: &lon})
	}
	for _, h := range [][2]string{{"TC-0412", "10.0000"}, {"TC-0415", "10.9012"}} {
		b.Height(t, registertest.HeightOpts{Designation: h[0], Value: h[1],
			Source: "Outside control (invented citation)", Reason: "held control", By: "tester"})
	}
	for i, secs := range tallisLines {
		var book strings.Builder
		fmt.Fprintf(&book, "# Invented Tallis County line.\n# run: Tallis %c\n# date: 2024-06-03\n# units: m\npoint,sight,middle,distance,note\n", 'A'+i)
		for _, s := range secs {
			dh, km := s[2].(float64), s[3].(float64)
			bs, fs := 1.0, 1.0
			if dh > 0 {
				bs += dh
			} else {
				fs -= dh
			}
			fmt.Fprintf(&book, "%s,BS,%.4f,%.1f,\n%s,FS,%.4f,%.1f,\n", s[0], bs, km*500, s[1], fs, km*500)
		}
		b.Run(t, registertest.RunOpts{Path: fmt.Sprintf("tallis-%c.csv", 'a'+i),
			Book: []byte(book.String()), By: "tester", AcceptFailedChecks: true, Reason: "a line of the network"})
	}
}

// The register form by least squares: the report lists the planted
// blunder first among the flagged sections with its run, book and lines,
// exits 3, keeps the draft, and shows it again from the register.
func TestAdjustLeastSquaresCommand(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seedTallis(t, db)

	out, errOut, status := run(t, db.URL, "adjust", "1", "2", "3", "--method", "least-squares", "--hold", "TC-0412,TC-0415", "--by", "tester")
	if status != ExitChecks {
		t.Fatalf("exit %d, want %d: %s", status, ExitChecks, errOut)
	}
	// The whole report is on stdout, piped or not.
	flag := regexpLine(out, "FLAGGED")
	if !strings.Contains(flag, "run 1, section 2, TC-0413 to TC-0414 (tallis-a.csv lines 8-9)") {
		t.Fatalf("first flagged line %q in:\n%s", flag, out)
	}
	for _, want := range []string{"least-squares weighted by length (sigma 1 mm per sqrt km)", "redundancy 4", "variance factor", "FAILS", "licensed surveyor"} {
		if !strings.Contains(out, want) {
			t.Errorf("report lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(errOut, "FLAGGED") {
		t.Errorf("the report is on stderr too:\n%s", errOut)
	}
	if !strings.Contains(out, "TC-0416") {
		t.Fatalf("rows:\n%s", out)
	}
	shown, _, _ := run(t, db.URL, "adjustment", "show", "1")
	if regexpLine(shown, "FLAGGED") != flag {
		t.Fatalf("shown again:\n%s", shown)
	}

	// --marks picks the runs through TC-0416; JSON carries every section.
	var rep adjustmentJSON
	js, errOut, status := run(t, db.URL, "adjust", "--marks", "TC-0416", "--method", "least-squares", "--hold", "TC-0415:3", "--dry-run", "-o", "json")
	if err := json.Unmarshal([]byte(js), &rep); err != nil {
		t.Fatalf("exit %d %s: %v", status, errOut, err)
	}
	if len(rep.Runs) != 2 || rep.Runs[0].RunID != 2 || rep.Runs[1].RunID != 3 || len(rep.Sections) != 4 || rep.Statistics.Network == nil {
		t.Fatalf("--marks TC-0416: %+v", rep)
	}
	// --area around TC-0412 (the only mark within 1 km) picks runs 1 and 2.
	js, errOut, status = run(t, db.URL, "adjust", "--area", "41.6,-97.9", "--within", "1km", "--method", "least-squares", "--hold", "TC-0412", "--dry-run", "-o", "json")
	rep = adjustmentJSON{}
	if err := json.Unmarshal([]byte(js), &rep); err != nil || len(rep.Runs) != 2 || rep.Runs[0].RunID != 1 || rep.Runs[1].RunID != 2 {
		t.Fatalf("--area: exit %d %s %+v", status, errOut, rep.Runs)
	}
}

// regexpLine returns the first line of s containing sub.
func regexpLine(s, sub string) string {
	for _, l := range strings.Split(s, "\n") {
		if strings.Contains(l, sub) {
			return l
		}
	}
	return ""
}

// Bad input to the least-squares register form names the field and exits
// 2, storing nothing.
func TestAdjustLeastSquaresBadInput(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seedTallis(t, db)
	before := registertest.Counts(t, db.Pool)
	// The author by its old spelling, --made-by, still read in this
	// release, so that --by setups below is the old spelling of
	// --distribute setups.
	lsq := []string{"--method", "least-squares", "--made-by", "tester"}
	for _, c := range []struct {
		args []string
		want string
	}{
		{append([]string{"1", "--hold", "TC-0412", "--weight", "fathoms"}, lsq...), "weight:"},
		{append([]string{"1", "--hold", "TC-0412", "--by", "setups"}, lsq...), "by:"},
		{append([]string{"1", "--hold", "TC-0412", "--distribute", "setups"}, lsq...), "distribute:"},
		{append([]string{"1", "--hold-weighted", "TC-0412"}, lsq...), "hold-weighted:"},
		{append([]string{"--area", "91,0", "--within", "1km", "--hold", "TC-0412"}, lsq...), "area:"},
		{append([]string{"--area", "41.6,-97.9", "--hold", "TC-0412"}, lsq...), "within:"},
		{append([]string{"1", "--hold", "TC-0412", "--within", "2km"}, lsq...), "within:"},
		{append([]string{"1", "--hold", "TC-0412:x"}, lsq...), "hold:"},
		{append([]string{"1", "4", "--hold", "TC-0412"}, lsq...), "TC-0430, TC-0431"},
		{append([]string{"1", "--hold", "TC-0412", "--alpha", "0"}, lsq...), "--alpha"},
		{[]string{"1", "--hold", "TC-0412,TC-0415", "--sigma-mm-per-sqrt-km", "2"}, "sigma-mm-per-sqrt-km:"},
		{[]string{"1", "--hold", "TC-0412,TC-0415", "--minimal"}, "minimal:"},
		{[]string{"--marks", "TC-0499", "--hold", "TC-0412", "--method", "least-squares"}, "TC-0499"},
	} {
		_, errOut, status := run(t, db.URL, append([]string{"adjust"}, c.args...)...)
		if status != ExitBadInput || !strings.Contains(errOut, c.want) {
			t.Errorf("adjust %s: exit %d, %q; want exit 2 saying %q", strings.Join(c.args, " "), status, errOut, c.want)
		}
	}
	if out := mustRun(t, db.URL, "adjustment", "list", "-o", "csv"); strings.Count(out, "\n") > 1 {
		t.Fatalf("stored:\n%s", out)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}

// TestAdjustSnoopingFamilyIsKept: --snooping family is kept with the
// draft, said in its report and in adjustment show, and followed when the
// draft is computed again at publication (the draft reproduces: with its
// failed checks accepted it is published, not refused as altered).
func TestAdjustSnoopingFamilyIsKept(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seedTallis(t, db)
	out, errOut, _ := run(t, db.URL, "adjust", "1", "2", "3", "--method", "least-squares", "--hold", "TC-0412,TC-0415", "--snooping", "family", "--by", "tester")
	line := regexpLine(out, "flagged by data snooping")
	if !strings.Contains(line, "family-wise: alpha 0.001 for the whole network") {
		t.Fatalf("report line %q:\n%s\n%s", line, out, errOut)
	}
	shown, _, _ := run(t, db.URL, "adjustment", "show", "1")
	if regexpLine(shown, "flagged by data snooping") != line {
		t.Errorf("adjustment show:\n%s", shown)
	}
	js, _, _ := run(t, db.URL, "adjustment", "show", "1", "-o", "json")
	if !strings.Contains(js, `"snooping": "family"`) {
		t.Errorf("the stored parameters and statistics lack the snooping:\n%s", js)
	}
	_, errOut, st := run(t, db.URL, "publish", "1", "--reason", "network", "--by", "reviewer", "--yes", "--accept-failed-checks", "--accept-reason", "tried")
	if st != ExitOK || strings.Contains(errOut, "does not follow from its stored inputs") {
		t.Errorf("publish (exit %d) computed the draft again differently:\n%s", st, errOut)
	}
	if _, _, st := run(t, db.URL, "adjust", "1", "--hold", "TC-0412", "--snooping", "family"); st != ExitBadInput {
		t.Errorf("--snooping with a proportional adjustment: exit %d, want 2", st)
	}
}
