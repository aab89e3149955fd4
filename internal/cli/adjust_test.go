package cli

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"cairn/internal/adjust"
	"cairn/internal/register"
)

func writeFile(t *testing.T, dir, name, body string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestAdjustFlags(t *testing.T) {
	for _, c := range []struct {
		args []string
		want string // error text, or "" for the options reaching runF
	}{
		{[]string{"--sections", "s.csv", "--held", "h.csv", "--alpha", "0.01", "--snoop-critical", "4", "-o", "json"}, ""},
		{[]string{"--sections", "s.csv"}, "--sections needs --held"},
		{[]string{"--held", "h.csv"}, "--held needs --sections"},
		{[]string{}, "give --sections"},
		{[]string{"RUN-1", "--hold", "TC-0412"}, "is not a run number"},
		{[]string{"1"}, "hold at least one mark"},
		{[]string{"--sections", "s.csv", "--held", "h.csv", "--hold", "TC-0412"}, "--hold goes with RUN numbers"},
		{[]string{"RUN-1", "--sections", "s.csv", "--held", "h.csv"}, "do not name runs"},
		{[]string{"--sections", "s.csv", "--held", "h.csv", "--alpha", "1.5"}, "--alpha must lie"},
		{[]string{"--sections", "s.csv", "--held", "h.csv", "--sigma-mm-per-sqrt-km", "0"}, "must be positive"},
	} {
		got, _, _, err := parseAdjust(c.args...)
		if c.want == "" {
			if err != nil || got == nil || got.Alpha != 0.01 || got.SnoopCritical != 4 || got.Format != FormatJSON || got.SigmaMMPerSqrtKm != 1 {
				t.Errorf("%v: err %v, options %+v", c.args, err, got)
			}
			continue
		}
		if err == nil || !strings.Contains(err.Error(), c.want) || exitCode(err) != ExitBadInput {
			t.Errorf("%v: got %v, want exit 2 with %q", c.args, err, c.want)
		}
	}
}

func TestAdjustHelpOpensNoDatabase(t *testing.T) {
	ios, _, out, _ := TestStreams(false)
	f := NewFactory(ios, "test")
	f.DatabaseURL = "postgres://nowhere.invalid/none"
	if err := Execute(context.Background(), f, []string{"adjust", "--help"}); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out.String(), "--sections") || f.pool != nil {
		t.Errorf("help: %q, pool %v", out.String(), f.pool)
	}
}

// A loop A→X→B→A of 4 km misclosing by −4 mm with A held: corrections
// +1, +1, +2 mm in proportion to length (common practice).
const loopSections = "from,to,dh_m,length_km\nA,X,1.000,1\nX,B,2.000,1\nB,A,-3.004,2\n"

func TestAdjustFilesCSV(t *testing.T) {
	dir := t.TempDir()
	s := writeFile(t, dir, "s.csv", loopSections)
	h := writeFile(t, dir, "h.csv", "point,height_m\nA,10\n")
	ios, _, out, errOut := TestStreams(false)
	f := NewFactory(ios, "test")
	if err := Execute(context.Background(), f, []string{"adjust", "--sections", s, "--held", h, "-o", "csv"}); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(out.String()), "\n")
	if len(lines) != 4 || lines[0] != "point,height_m,sd_m" || !strings.HasPrefix(lines[1], "A,10.000000,0.000000") ||
		!strings.HasPrefix(lines[2], "X,11.001000,") || !strings.HasPrefix(lines[3], "B,13.002000,") {
		t.Errorf("output:\n%s", out.String())
	}
	if !strings.Contains(errOut.String(), "redundancy 1") || !strings.Contains(errOut.String(), "0 section(s) flagged") {
		t.Errorf("report:\n%s", errOut.String())
	}
}

func TestAdjustFilesJSON(t *testing.T) {
	dir := t.TempDir()
	s := writeFile(t, dir, "s.csv", loopSections)
	h := writeFile(t, dir, "h.csv", "point,height_m\nA,10\n")
	ios, _, out, _ := TestStreams(false)
	if err := Execute(context.Background(), NewFactory(ios, "test"), []string{"adjust", "--sections", s, "--held", h, "-o", "json"}); err != nil {
		t.Fatal(err)
	}
	var v struct {
		Statistics struct {
			Redundancy int  `json:"redundancy"`
			Pass       bool `json:"chi_square_pass"`
		} `json:"statistics"`
		Points []struct {
			Point   string  `json:"point"`
			HeightM float64 `json:"height_m"`
		} `json:"points"`
	}
	if err := json.Unmarshal(out.Bytes(), &v); err != nil {
		t.Fatalf("%v in %s", err, out.String())
	}
	if v.Statistics.Redundancy != 1 || len(v.Points) != 3 || v.Points[2].HeightM != 13.002 {
		t.Errorf("got %+v", v)
	}
}

func TestAdjustFilesBadInput(t *testing.T) {
	dir := t.TempDir()
	s := writeFile(t, dir, "s.csv", loopSections+"P,Q,1,1\n")
	h := writeFile(t, dir, "h.csv", "point,height_m\nA,10\n")
	bad := writeFile(t, dir, "bad.csv", "from,to,dh_m,length_km\nA,X,1,1\nX,X,1,1\n")
	missing := writeFile(t, dir, "m.csv", "point,height_m\nA,10\nZZ,3\n")
	for _, c := range []struct {
		sections, held, want string
	}{
		{s, h, "have no path to held control: P, Q"},
		{bad, h, "bad.csv:3: to: the section begins and ends at X"},
		{writeFile(t, dir, "s2.csv", loopSections), missing, `m.csv:3: point: "ZZ" is not a point of the network`},
		{filepath.Join(dir, "none.csv"), h, "open sections"},
	} {
		ios, _, _, _ := TestStreams(false)
		err := Execute(context.Background(), NewFactory(ios, "test"), []string{"adjust", "--sections", c.sections, "--held", c.held})
		if err == nil || !strings.Contains(err.Error(), c.want) || exitCode(err) != ExitBadInput {
			t.Errorf("got %v, want exit 2 with %q", err, c.want)
		}
	}
}

// TestAdjustFlaggedExitsChecksFailed: four routes between A and B agree on
// B − A to a millimetre (3.000, 3.001 and 3.000 m over the 2 km chains
// through X, Y and Z) but for the direct 1 km section B → A, booked 8 mm
// off (−3.008 m, line 8). Derived by hand with σ = 1 mm/√km: the weighted
// mean of B − A is (3.008 + 0.5·9.001)/2.5 = 3.0034 m, so the direct section
// has v = +4.6 mm with q_vv = 1 − 1/2.5 = 0.6 km, w = 4.6/√0.6 ≈ 5.9, and
// the chains v ≤ 3.4 mm with q_vv = 2 − 0.4 = 1.6 km, |w| ≤ 2.7, under
// 3.29: the planted blunder is the one section flagged, the exit status 3.
func TestAdjustFlaggedExitsChecksFailed(t *testing.T) {
	dir := t.TempDir()
	s := writeFile(t, dir, "s.csv", "from,to,dh_m,length_km\nA,X,1.000,1\nX,B,2.000,1\nA,Y,0.500,1\nY,B,2.501,1\nB,Z,-1.000,1\nZ,A,-2.000,1\nB,A,-3.008,1\n")
	h := writeFile(t, dir, "h.csv", "point,height_m\nA,10\n")
	ios, _, _, errOut := TestStreams(false)
	err := Execute(context.Background(), NewFactory(ios, "test"), []string{"adjust", "--sections", s, "--held", h, "-o", "csv"})
	report := errOut.String()
	if exitCode(err) != ExitChecks || !strings.Contains(report, "1 section(s) flagged") {
		t.Fatalf("exit %d (%v), report:\n%s", exitCode(err), err, report)
	}
	flagged := regexpLine(report, "s.csv line")
	if !strings.Contains(flagged, "s.csv line 8: residual +0.0046 m, w +5.9") {
		t.Errorf("flagged %q, want line 8 with v = +0.0046 m and w about 5.9; report:\n%s", flagged, report)
	}
}

// The register form's flags parse into typed parameters (no database is
// opened), the old spellings of this release included, each with a
// deprecation notice on stderr.
func TestAdjustRegisterFlags(t *testing.T) {
	hold := func(d string, sdM float64) register.Hold { return register.Hold{Designation: d, SigmaM: sdM} }
	for _, c := range []struct {
		args       []string
		hold       []register.Hold
		by         string
		distribute adjust.Distribution
		notice     string // on stderr; "" for none
	}{
		{[]string{"1", "--hold", "TC-0412,TC-0427", "--by", "A. Moreau"}, []register.Hold{hold("TC-0412", 0), hold("TC-0427", 0)}, "A. Moreau", adjust.ByDistance, ""},
		{[]string{"1", "--hold", "TC-0412", "--distribute", "setups", "--by", "A. Moreau"}, []register.Hold{hold("TC-0412", 0)}, "A. Moreau", adjust.BySetups, ""},
		{[]string{"1", "--method", "least-squares", "--hold", "TC-0412", "--hold-weighted", "TC-0427=5", "--by", "A. Moreau"},
			[]register.Hold{hold("TC-0412", 0), hold("TC-0427", 0.005)}, "A. Moreau", adjust.ByDistance, ""},
		{[]string{"1", "--method", "least-squares", "--hold", "TC-0412,TC-0427:5mm", "--by", "A. Moreau"},
			[]register.Hold{hold("TC-0412", 0), hold("TC-0427", 0.005)}, "A. Moreau", adjust.ByDistance, "--hold TC-0427:5mm is deprecated"},
		{[]string{"1", "--hold", "TC-0412", "--by", "setups"}, []register.Hold{hold("TC-0412", 0)}, osUser(), adjust.BySetups, "use --distribute setups"},
		{[]string{"1", "--hold", "TC-0412", "--made-by", "R. Okafor"}, []register.Hold{hold("TC-0412", 0)}, "R. Okafor", adjust.ByDistance, "--made-by is deprecated"},
	} {
		got, f, notice, err := parseAdjust(c.args...)
		if err != nil || got == nil {
			t.Errorf("%v: %v", c.args, err)
			continue
		}
		p := got.Register.params
		if !slices.Equal(p.Hold, c.hold) || p.By != c.by || p.Distribution != c.distribute || f.pool != nil {
			t.Errorf("%v: hold %+v, by %q, distribution %v; want %+v, %q, %v", c.args, p.Hold, p.By, p.Distribution, c.hold, c.by, c.distribute)
		}
		if c.notice == "" && notice != "" || !strings.Contains(notice, c.notice) {
			t.Errorf("%v: stderr %q, want %q", c.args, notice, c.notice)
		}
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"1", "--method", "least-squares", "--hold", "TC-0412:abc"}, "millimetres"},
		{[]string{"1", "--method", "least-squares", "--hold", "TC-0412:0"}, "more than zero"},
		{[]string{"1", "--method", "least-squares", "--hold-weighted", "TC-0412"}, "hold-weighted: \"TC-0412\": give MARK=SD_MM"},
		{[]string{"1", "--method", "least-squares", "--hold-weighted", "TC-0412=-2"}, "more than zero"},
		{[]string{"1", "--hold", "TC-0412", "--hold-weighted", "TC-0427=5"}, "--hold-weighted goes with --method least-squares"},
		{[]string{"1", "--hold", "TC-0412", "--distribute", "sideways"}, "distribute: unknown distribution"},
		{[]string{"1", "--method", "least-squares", "--hold", "TC-0412", "--distribute", "setups"}, "least squares weighs sections with --weight"},
		{[]string{"1", "--hold", "TC-0412", "--by", "setups", "--distribute", "setups"}, "give the distribution with --distribute only"},
		{[]string{"1", "--method", "sideways", "--hold", "TC-0412"}, "method: unknown method"},
	} {
		if _, _, _, err := parseAdjust(c.args...); err == nil || !strings.Contains(err.Error(), c.want) || exitCode(err) != ExitBadInput {
			t.Errorf("%v: got %v, want exit 2 with %q", c.args, err, c.want)
		}
	}
}

// parseAdjust runs adjust's flag parsing on args through its runF: the
// options it would run with (nil on an error), the factory (whose pool
// must stay unopened) and what went to stderr.
func parseAdjust(args ...string) (*adjustOptions, *Factory, string, error) {
	ios, _, _, errOut := TestStreams(false)
	f := NewFactory(ios, "test")
	var got *adjustOptions
	cmd := newCmdAdjust(f, func(o *adjustOptions) error { got = o; return nil })
	cmd.SetArgs(args)
	cmd.SetOut(ios.Out)
	cmd.SetErr(ios.ErrOut)
	err := cmd.Execute()
	return got, f, errOut.String(), err
}
