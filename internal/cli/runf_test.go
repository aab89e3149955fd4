package cli

import (
	"context"
	"strings"
	"testing"

	"github.com/spf13/cobra"
)

// noDBFactory is a factory whose database, were it opened, would be the
// embedded default: the tests check it never is.
func noDBFactory(t *testing.T) *Factory {
	t.Helper()
	ios, _, _, _ := TestStreams(false)
	f := NewFactory(ios, "test")
	f.Getenv = func(string) string { return "" }
	return f
}

// execCmd runs one command built by a newCmdX on args, as Execute would.
func execCmd(cmd *cobra.Command, args ...string) error {
	cmd.SetArgs(args)
	cmd.SilenceErrors, cmd.SilenceUsage = true, true
	return cmd.ExecuteContext(context.Background())
}

// The options of the commands that gained a run function reach it as
// typed, checked before it is called, and no database is opened.
func TestLeafCommandFlagsReachRunF(t *testing.T) {
	t.Parallel()
	f := noDBFactory(t)

	var hist *historyOptions
	if err := execCmd(newCmdHistory(f, func(o *historyOptions) error { hist = o; return nil }), "TC-0412", "--datum", "NAVD88", "-o", "json"); err != nil {
		t.Fatal(err)
	}
	if hist.designation != "TC-0412" || hist.datum != "NAVD88" || hist.format != FormatJSON || hist.ctx == nil {
		t.Errorf("history options %+v", hist)
	}

	var tr *traceOptions
	if err := execCmd(newCmdTrace(f, func(o *traceOptions) error { tr = o; return nil }), "TC-0415", "--as-of", "2024-03-01T14:00:00Z", "-o", "csv"); err != nil {
		t.Fatal(err)
	}
	if tr.params.Designation != "TC-0415" || tr.params.AsOf == nil || tr.params.AsOf.UTC().Format("2006-01-02 15:04") != "2024-03-01 14:00" || tr.format != FormatCSV {
		t.Errorf("trace options %+v", tr)
	}

	var show *markShowOptions
	if err := execCmd(newCmdMarkShow(f, func(o *markShowOptions) error { show = o; return nil }), "TC-0412"); err != nil {
		t.Fatal(err)
	}
	if show.designation != "TC-0412" || show.format != FormatTable {
		t.Errorf("mark show options %+v", show)
	}

	var hl *heightListOptions
	if err := execCmd(newCmdHeightList(f, func(o *heightListOptions) error { hl = o; return nil }), "--datum", "NGVD29", "-o", "csv"); err != nil {
		t.Fatal(err)
	}
	if hl.datum != "NGVD29" || hl.format != FormatCSV {
		t.Errorf("height list options %+v", hl)
	}

	var al *adjustmentListOptions
	if err := execCmd(newCmdAdjustmentList(f, func(o *adjustmentListOptions) error { al = o; return nil }), "--status", "draft"); err != nil {
		t.Fatal(err)
	}
	if al.status != "draft" {
		t.Errorf("adjustment list options %+v", al)
	}

	var as *adjustmentShowOptions
	if err := execCmd(newCmdAdjustmentShow(f, func(o *adjustmentShowOptions) error { as = o; return nil }), " 7 ", "-o", "json"); err != nil {
		t.Fatal(err)
	}
	if as.id != 7 || as.format != FormatJSON {
		t.Errorf("adjustment show options %+v", as)
	}

	var cond *markConditionOptions
	if err := execCmd(newCmdMarkCondition(f, func(o *markConditionOptions) error { cond = o; return nil }), "TC-0415", "disturbed", "--on", "2024-05-14", "--note", "tilted", "--by", "R. Okafor"); err != nil {
		t.Fatal(err)
	}
	if p := cond.params; p.Designation != "TC-0415" || p.Condition != "disturbed" || p.ObservedOn.Format("2006-01-02") != "2024-05-14" || p.Note != "tilted" || p.RecordedBy != "R. Okafor" {
		t.Errorf("mark condition options %+v", cond.params)
	}

	var add *markAddOptions
	if err := execCmd(newCmdMarkAdd(f, func(o *markAddOptions) error { add = o; return nil }), "TC-0500", "--lat", "41.62", "--type", "bronze disk"); err != nil {
		t.Fatal(err)
	}
	if p := add.params; p.Designation != "TC-0500" || p.Lat == nil || *p.Lat != 41.62 || p.Lon != nil || p.Type != "bronze disk" {
		t.Errorf("mark add options %+v", add.params)
	}

	var disc *publishOptions
	if err := execCmd(newCmdDiscard(f, func(o *publishOptions) error { disc = o; return nil }), "3", "--reason", "superseded", "--by", "J. Ames"); err != nil {
		t.Fatal(err)
	}
	if disc.id != 3 || disc.reason != "superseded" || disc.by != "J. Ames" || disc.yes {
		t.Errorf("discard options %+v", disc)
	}

	var demo *demoOptions
	if err := execCmd(newCmdDemo(f, func(o *demoOptions) error { demo = o; return nil }), "--name", "cairn_demo_test"); err != nil {
		t.Fatal(err)
	}
	if demo.name != "cairn_demo_test" {
		t.Errorf("demo options %+v", demo)
	}

	ran := 0
	for _, cmd := range []*cobra.Command{
		newCmdDatumList(f, func(*datumListOptions) error { ran++; return nil }),
		newCmdStale(f, func(*staleOptions) error { ran++; return nil }),
		newCmdAuditVerify(f, func(*auditVerifyOptions) error { ran++; return nil }),
	} {
		if err := execCmd(cmd, "-o", "json"); err != nil {
			t.Fatalf("%s: %v", cmd.Name(), err)
		}
	}
	if ran != 3 {
		t.Errorf("%d of 3 run functions called", ran)
	}

	// Refused while filling the options: the run function is not called.
	for _, c := range []struct {
		cmd  *cobra.Command
		args []string
		want string
	}{
		{newCmdTrace(f, func(*traceOptions) error { t.Error("trace ran"); return nil }), []string{"TC-0415", "--as-of", "yesterday"}, "as-of: "},
		{newCmdAdjustmentShow(f, func(*adjustmentShowOptions) error { t.Error("adjustment show ran"); return nil }), []string{"seven"}, `adjustment: "seven" is not an adjustment number`},
		{newCmdMarkCondition(f, func(*markConditionOptions) error { t.Error("mark condition ran"); return nil }), []string{"TC-0415", "good", "--on", "May 14"}, `on: "May 14" is not a date`},
		{newCmdDemo(f, func(*demoOptions) error { t.Error("demo ran"); return nil }), []string{"--name", "register"}, "name: the demo database's name must be cairn_demo"},
		{newCmdDiscard(f, func(*publishOptions) error { t.Error("discard ran"); return nil }), []string{"3"}, "reason: say why with --reason"},
		{newCmdHistory(f, func(*historyOptions) error { t.Error("history ran"); return nil }), nil, "wants a DESIGNATION"},
	} {
		err := execCmd(c.cmd, c.args...)
		if exitCode(err) != ExitBadInput || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s %v: exit %d, %v; want 2 saying %q", c.cmd.Name(), c.args, exitCode(err), err, c.want)
		}
	}
	if f.pool != nil || f.connErr != nil {
		t.Error("parsing flags opened the database")
	}
}

// --held-height gives run check and run record their known heights; the
// old spelling --hold still works, with a notice on stderr, and a mark is
// held once across both.
func TestHeldHeightFlag(t *testing.T) {
	t.Parallel()
	for _, name := range []string{"check", "record"} {
		parse := func(args ...string) (map[string]float64, string, error) {
			ios, _, _, errOut := TestStreams(false)
			f := NewFactory(ios, "test")
			f.Getenv = func(string) string { return "" }
			var hold map[string]float64
			cmd := newCmdRunCheck(f, func(o *runCheckOptions) error { hold = o.Hold; return nil })
			if name == "record" {
				cmd = newCmdRunRecord(f, func(o *runRecordOptions) error { hold = o.Hold; return nil })
			}
			err := execCmd(cmd, append([]string{"b.csv"}, args...)...)
			if f.pool != nil || f.connErr != nil {
				t.Errorf("run %s: parsing flags opened the database", name)
			}
			return hold, errOut.String(), err
		}
		hold, notice, err := parse("--held-height", "TC-0420=3.512", "--held-height", " TC-0427 = 5.104 ")
		if err != nil || len(hold) != 2 || hold["TC-0420"] != 3.512 || hold["TC-0427"] != 5.104 || notice != "" {
			t.Errorf("run %s --held-height: %v, %v, notice %q", name, hold, err, notice)
		}
		hold, notice, err = parse("--hold", "TC-0420=3.512", "--held-height", "TC-0427=5.104")
		if err != nil || len(hold) != 2 || hold["TC-0420"] != 3.512 || hold["TC-0427"] != 5.104 ||
			notice != name+": --hold MARK=HEIGHT is deprecated here and will be removed: use --held-height MARK=HEIGHT (--hold MARK, without a height, holds the mark at its height in the register)\n" {
			t.Errorf("run %s --hold: %v, %v, notice %q", name, hold, err, notice)
		}
		for _, c := range []struct {
			args []string
			want string
		}{
			{[]string{"--held-height", "TC-0420="}, `--held-height "TC-0420=": want MARK=HEIGHT, or MARK for its height in the register`},
			{[]string{"--held-height", "TC-0420=3.5x"}, `--held-height "TC-0420=3.5x": height "3.5x" is not a number`},
			{[]string{"--held-height", "A=1", "--held-height", "A=2"}, `--held-height "A=2": A is held twice`},
			{[]string{"--held-height", "A=1", "--hold", "A=2"}, `--hold "A=2": A is held twice`},
		} {
			if _, _, err := parse(c.args...); err == nil || err.Error() != c.want || exitCode(err) != ExitBadInput {
				t.Errorf("run %s %v: %v, want %q (exit 2)", name, c.args, err, c.want)
			}
		}
	}

	// Both spellings reduce the book alike; the old one says it is old.
	args := []string{"run", "check", testBooks + "usm-ukur-aras.csv", "-o", "json"}
	viaNew, errNew, code := execRun(t, append(args, "--held-height", "OBM1=29.23", "--held-height", "OBM2=29.66")...)
	if code != ExitOK || errNew != "" {
		t.Fatalf("--held-height: exit %d, stderr %q", code, errNew)
	}
	viaOld, errOld, code := execRun(t, append(args, "--hold", "OBM1=29.23", "--hold", "OBM2=29.66")...)
	if code != ExitOK || errOld != "cairn run check: --hold MARK=HEIGHT is deprecated here and will be removed: use --held-height MARK=HEIGHT (--hold MARK, without a height, holds the mark at its height in the register)\n" {
		t.Fatalf("--hold: exit %d, stderr %q", code, errOld)
	}
	if viaNew != viaOld || !strings.Contains(viaNew, `"OBM2"`) {
		t.Errorf("the two spellings reduce differently:\n%s\n%s", viaNew, viaOld)
	}

	// --hold stays listed in the help, marked deprecated.
	for _, name := range []string{"check", "record"} {
		out, _, code := execRun(t, "run", name, "--help")
		if code != ExitOK || !strings.Contains(out, "--held-height stringArray") || !strings.Contains(lineWith(out, "--hold stringArray"), "deprecated: use --held-height") {
			t.Errorf("run %s --help:\n%s", name, out)
		}
	}
}

// lineWith returns the first line of s that contains sub, or "".
func lineWith(s, sub string) string {
	for _, line := range strings.Split(s, "\n") {
		if strings.Contains(line, sub) {
			return line
		}
	}
	return ""
}
