package cli

import (
	"context"
	"strings"
	"testing"
	"time"
)

// Flag parsing alone, without a database: the options reach the run
// function as typed.
func TestHeightSetFlags(t *testing.T) {
	t.Parallel()
	ios, _, _, _ := TestStreams(false)
	f := NewFactory(ios, "test")
	var got *heightSetOptions
	cmd := newCmdHeightSet(f, func(o *heightSetOptions) error { got = o; return nil })
	cmd.SetArgs([]string{"TC-0412", "769.830", "--unit", "usft", "--datum", "NAVD88", "--decimals", "3",
		"--class", "second-I", "--source", "book", "--reason", "why", "--by", "a.clerk", "--in-force-from", "2019-09-16"})
	if err := cmd.ExecuteContext(context.Background()); err != nil {
		t.Fatal(err)
	}
	p := got.params
	if p.Designation != "TC-0412" || p.Value != "769.830" || p.Unit != "usft" || p.Datum != "NAVD88" ||
		p.Decimals == nil || *p.Decimals != 3 || p.Class != "second-I" || p.Source != "book" || p.Reason != "why" || p.RecordedBy != "a.clerk" ||
		p.InForceFrom == nil || !p.InForceFrom.Equal(time.Date(2019, 9, 16, 0, 0, 0, 0, time.Local)) {
		t.Fatalf("options %+v", p)
	}
	cmd = newCmdHeightSet(f, func(o *heightSetOptions) error { got = o; return nil })
	cmd.SetArgs([]string{"TC-0412", "769.83", "--unit", "m", "--in-force-from", "2019-09-16T09:30:00Z"})
	if err := cmd.ExecuteContext(context.Background()); err != nil {
		t.Fatal(err)
	}
	if !got.params.InForceFrom.Equal(time.Date(2019, 9, 16, 9, 30, 0, 0, time.UTC)) {
		t.Fatalf("in force from %v", got.params.InForceFrom)
	}
	// --in-force-from is required: the register cannot know it.
	cmd = newCmdHeightSet(f, func(o *heightSetOptions) error { t.Fatal("run without --in-force-from"); return nil })
	cmd.SetArgs([]string{"TC-0412", "769.83", "--unit", "m"})
	cmd.SetOut(&strings.Builder{})
	cmd.SetErr(&strings.Builder{})
	if err := cmd.ExecuteContext(context.Background()); err == nil || !strings.Contains(err.Error(), "--in-force-from is required") {
		t.Fatalf("without --in-force-from: %v", err)
	}
	if got.params.Decimals != nil {
		t.Fatalf("decimals %d without --decimals, want as written", *got.params.Decimals)
	}
}

// The cautions are in height set's help.
func TestHeightSetHelpCarriesCautions(t *testing.T) {
	t.Parallel()
	ios, _, out, _ := TestStreams(false)
	f := NewFactory(ios, "test")
	if err := Execute(context.Background(), f, []string{"height", "set", "--in-force-from", inForceNow(), "--help"}); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"licensed surveyor", "two marks", "condition in the field", "regulations govern"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("height set --help lacks %q", want)
		}
	}
}
