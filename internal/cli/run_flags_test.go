package cli

import (
	"slices"
	"testing"

	"cairn/internal/standards"
)

// Flags of run record, list and show are parsed and checked without a
// database.
func TestRunRecordListShowFlags(t *testing.T) {
	ios, _, _, _ := TestStreams(false)
	f := NewFactory(ios, "test")
	var rec *runRecordOptions
	var list *runListOptions
	var show *runShowOptions
	exec := func(args ...string) error {
		rec, list, show = nil, nil, nil
		c := newCmdRunRecord(f, func(o *runRecordOptions) error { rec = o; return nil })
		switch args[0] {
		case "list":
			c = newCmdRunList(f, func(o *runListOptions) error { list = o; return nil })
		case "show":
			c = newCmdRunShow(f, func(o *runShowOptions) error { show = o; return nil })
		}
		c.SetArgs(args[1:])
		c.SilenceErrors, c.SilenceUsage = true, true
		return c.Execute()
	}

	if err := exec("record", "b.csv", "--by", "A. Moreau", "--hold", "TC-0420=3.512", "--class", "third", "--new-marks",
		"--accept-failed-checks", "--reason", " sights long by design "); err != nil {
		t.Fatal(err)
	}
	if rec.BookPath != "b.csv" || rec.By != "A. Moreau" || rec.Hold["TC-0420"] != 3.512 || rec.Class != standards.Third ||
		!rec.NewMarks || !rec.AcceptFailedChecks || rec.Reason != "sights long by design" {
		t.Errorf("record options %+v", rec)
	}
	// --hold MARK (no height) holds the mark at its register height, and
	// so does --held-height MARK.
	if err := exec("record", "b.csv", "--hold", "TC-0420", "--held-height", "TC-0427", "--held-height", "TC-0423=1.5",
		"--allow-condition", "--condition-reason", " post reset, checked by tape "); err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(rec.HoldCurrent, []string{"TC-0427", "TC-0420"}) || len(rec.Hold) != 1 || rec.Hold["TC-0423"] != 1.5 ||
		!rec.AllowCondition || rec.ConditionReason != "post reset, checked by tape" {
		t.Errorf("record options %+v", rec)
	}
	if err := exec("list", "--mark", "TC-0412", "--since", "2024-05-01", "-o", "csv"); err != nil {
		t.Fatal(err)
	}
	if list.Mark != "TC-0412" || list.Since == nil || list.Since.Format("2006-01-02") != "2024-05-01" || list.Format != FormatCSV {
		t.Errorf("list options %+v", list)
	}
	if err := exec("show", "12", "--book"); err != nil {
		t.Fatal(err)
	}
	if show.ID != 12 || !show.Book {
		t.Errorf("show options %+v", show)
	}

	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"record", "b.csv", "--accept-failed-checks"}, "--accept-failed-checks needs --reason saying why the run is recorded anyway"},
		{[]string{"record", "b.csv", "--reason", "x"}, "--reason goes with --accept-failed-checks"},
		{[]string{"record", "b.csv", "--by", " "}, "--by: say who records the run"},
		{[]string{"record", "b.csv", "-o", "csv"}, "--output: run record prints a report or json, not csv"},
		{[]string{"record", "b.csv", "--hold", "TC-0420="}, `--hold "TC-0420=": want MARK=HEIGHT, or MARK for its height in the register`},
		{[]string{"record", "b.csv", "--allow-condition"}, "--allow-condition needs --condition-reason saying why marks in doubt may be held"},
		{[]string{"record", "b.csv", "--condition-reason", "x", "--hold", "TC-0420"}, "--condition-reason goes with --allow-condition"},
		{[]string{"record", "b.csv", "--allow-condition", "--condition-reason", "x", "--held-height", "TC-0420=1"}, "--allow-condition goes with --hold MARK: only marks held at their register height have their condition checked"},
		{[]string{"record"}, "record wants one level book (got 0 argument(s))"},
		{[]string{"list", "--since", "May 2024"}, `--since "May 2024": want a date, YYYY-MM-DD`},
		{[]string{"show", "twelve"}, `"twelve" is not a run number (see cairn run list)`},
		{[]string{"show", "0"}, `"0" is not a run number (see cairn run list)`},
		{[]string{"show", "12", "--book", "-o", "json"}, "--book prints the file itself: it takes no --output"},
	} {
		err := exec(c.args...)
		if err == nil || err.Error() != c.want || exitCode(err) != ExitBadInput {
			t.Errorf("%v: error %v (exit %d), want %q (exit 2)", c.args, err, exitCode(err), c.want)
		}
		if rec != nil || list != nil || show != nil {
			t.Errorf("%v: the command ran", c.args)
		}
	}
}
