package cli

import (
	"context"
	"encoding/json"
	"slices"
	"strings"
	"testing"

	"cairn/internal/standards"
)

const testBooks = "../../testdata/books/"

func execRun(t *testing.T, args ...string) (out, errOut string, code int) {
	t.Helper()
	ios, _, o, e := TestStreams(false)
	f := NewFactory(ios, "test")
	f.Getenv = func(string) string { return "" }
	err := Execute(context.Background(), f, args)
	return o.String(), e.String(), exitCode(err)
}

func TestRunCheckFlags(t *testing.T) {
	tests := []struct {
		args  []string
		want  runCheckOptions
		error string
	}{
		{args: []string{"b.csv"}, want: runCheckOptions{BookPath: "b.csv", Format: FormatTable}},
		{args: []string{"b.csv", "--hold", "TC-0420=3.512", "--hold", " TC-0427 = 5.104 ", "--class", "SECOND-ii", "--curvature-refraction", "-o", "json"},
			want: runCheckOptions{BookPath: "b.csv", Hold: map[string]float64{"TC-0420": 3.512, "TC-0427": 5.104}, Class: standards.SecondII, CurvatureRefraction: true, Format: FormatJSON}},
		{args: []string{"b.csv", "--hold", "TC-0420"}, want: runCheckOptions{BookPath: "b.csv", HoldCurrent: []string{"TC-0420"}, Format: FormatTable}},
		{args: []string{"b.csv", "--hold", "TC-0420="}, error: `--hold "TC-0420=": want MARK=HEIGHT, or MARK for its height in the register`},
		{args: []string{"b.csv", "--hold", "A", "--held-height", "A=2"}, error: `--hold "A": A is held twice`},
		{args: []string{"b.csv", "--hold", "TC-0420=3.5x"}, error: `--hold "TC-0420=3.5x": height "3.5x" is not a number`},
		{args: []string{"b.csv", "--hold", "A=1", "--hold", "A=2"}, error: `--hold "A=2": A is held twice`},
		{args: []string{"b.csv", "--class", "fourth"}, error: `--class: unknown accuracy class "fourth" (want first-I, first-II, second-I, second-II, third)`},
		{args: []string{}, error: "check wants one level book (got 0 argument(s))"},
	}
	for _, tt := range tests {
		ios, _, _, _ := TestStreams(false)
		f := NewFactory(ios, "test")
		var got *runCheckOptions
		cmd := newCmdRunCheck(f, func(o *runCheckOptions) error { got = o; return nil })
		cmd.SetArgs(tt.args)
		cmd.SilenceErrors, cmd.SilenceUsage = true, true
		err := cmd.Execute()
		if tt.error != "" {
			if err == nil || err.Error() != tt.error || exitCode(err) != ExitBadInput {
				t.Errorf("%v: error %v (exit %d), want %q (exit 2)", tt.args, err, exitCode(err), tt.error)
			}
			continue
		}
		if err != nil {
			t.Fatalf("%v: %v", tt.args, err)
		}
		w := tt.want
		if got.BookPath != w.BookPath || got.Class != w.Class || got.CurvatureRefraction != w.CurvatureRefraction || got.Format != w.Format || len(got.Hold) != len(w.Hold) ||
			!slices.Equal(got.HoldCurrent, w.HoldCurrent) {
			t.Errorf("%v: options %+v, want %+v", tt.args, got, w)
		}
		for k, v := range w.Hold {
			if got.Hold[k] != v {
				t.Errorf("%v: hold %s = %v, want %v", tt.args, k, got.Hold[k], v)
			}
		}
	}
}

func TestRunCheckLoopPasses(t *testing.T) {
	out, errOut, code := execRun(t, "run", "check", testBooks+"tallis-north-loop.csv")
	if code != ExitOK || errOut != "" {
		t.Fatalf("exit %d, stderr %q", code, errOut)
	}
	for _, want := range []string{
		"Level book ../../testdata/books/tallis-north-loop.csv: Orrin Bay north loop, 2024-05-14",
		"A loop from TC-0412 to TC-0412: 8 setups, 3 sections",
		"No mark held: heights are relative to TC-0412 = 0.000 usft",
		"LINE  POINT    BS (usft)  IS (usft)  FS (usft)  DIST (usft)",
		"16    TC-0412  5.119                            181.9        5.119      0.000",
		"loop  TC-0412  TC-0412  16-31  8       2965.9         -0.006           +0.000        -0.006             0.025             pass",
		"All checks passed.",
		"licensed surveyor",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("report lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, " \n") {
		t.Error("report has trailing spaces")
	}
}

func TestRunCheckFailuresExit3(t *testing.T) {
	out, errOut, code := execRun(t, "run", "check", testBooks+"mere-river-line.csv", "--class", "first-I")
	if code != ExitChecks {
		t.Fatalf("exit %d, want 3; stderr %q", code, errOut)
	}
	for _, want := range []string{
		"Failed checks",
		"22    sight_length  TC-0423             sight of 51.2 m is longer than 50.0 m",
		"29    closure       TC-0420 to TC-0427  the line from TC-0420 to TC-0427 does not close and no mark is held",
		"3 check(s) failed.",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("report lacks %q:\n%s", want, out)
		}
	}
}

func TestRunCheckBadBook(t *testing.T) {
	for _, tt := range []struct{ args []string }{
		{[]string{"run", "check", testBooks + "bad/not-a-number.csv"}},
		{[]string{"run", "check", testBooks + "no-such-book.csv"}},
		{[]string{"run", "check", testBooks + "mere-river-line.csv", "--hold", "TP1=3"}},
	} {
		out, _, code := execRun(t, tt.args...)
		if code != ExitBadInput || out != "" {
			t.Errorf("%v: exit %d, stdout %q; want 2 and nothing", tt.args, code, out)
		}
	}
	// Main prints the error with file, line and field.
	ios, _, _, e := TestStreams(false)
	f := NewFactory(ios, "test")
	err := Execute(context.Background(), f, []string{"run", "check", testBooks + "bad/not-a-number.csv"})
	if err == nil || err.Error() != testBooks+`bad/not-a-number.csv:3: field "middle": not a number "1.4x0"` || e.Len() != 0 {
		t.Errorf("error %v", err)
	}
}

func TestRunCheckJSONAndCSV(t *testing.T) {
	out, _, code := execRun(t, "run", "check", testBooks+"usm-ukur-aras.csv", "--hold", "OBM1=29.23", "--hold", "OBM2=29.66", "-o", "json")
	if code != ExitOK {
		t.Fatalf("exit %d", code)
	}
	var v struct {
		Passed      bool               `json:"passed"`
		Unit        string             `json:"unit"`
		Held        map[string]float64 `json:"held_m"`
		Rows        []map[string]any   `json:"rows"`
		Sections    []map[string]any   `json:"sections"`
		Misclosures []struct {
			MisclosureM float64 `json:"misclosure_m"`
			Setups      int     `json:"setups"`
		} `json:"misclosures"`
		Failures []any `json:"failures"`
	}
	if err := json.Unmarshal([]byte(out), &v); err != nil {
		t.Fatal(err)
	}
	if !v.Passed || v.Unit != "m" || v.Held["OBM2"] != 29.66 || len(v.Rows) != 14 || len(v.Sections) != 1 || v.Failures == nil {
		t.Errorf("json = %+v", v)
	}
	if len(v.Misclosures) != 1 || v.Misclosures[0].Setups != 5 || v.Misclosures[0].MisclosureM < 0.0095 || v.Misclosures[0].MisclosureM > 0.0105 {
		t.Errorf("misclosures = %+v", v.Misclosures)
	}
	for _, key := range []string{"line", "point", "sight", "reading_m", "height_m", "height_of_instrument_m"} {
		if _, ok := v.Rows[1][key]; !ok {
			t.Errorf("row lacks key %q: %v", key, v.Rows[1])
		}
	}

	out, _, code = execRun(t, "run", "check", testBooks+"usm-ukur-aras.csv", "--hold", "OBM1=29.23", "--hold", "OBM2=29.66", "-o", "csv")
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if code != ExitOK || len(lines) != 15 ||
		lines[0] != "line,point,bs_m,is_m,fs_m,dist_m,hi_m,height_m,imbal_m,acc_imbal_m,note" ||
		lines[2] != "16,A,,1.4320,,,30.9470,29.5150,,," {
		t.Errorf("csv (exit %d):\n%s", code, out)
	}
}
