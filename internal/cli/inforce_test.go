package cli

import (
	"encoding/json"
	"strings"
	"testing"
	"time"

	"cairn/internal/pgtest"
)

// Through the command line: heights recorded out of order of their
// in-force dates, with a correction of an earlier date recorded last;
// height show answers by --as-of (in force), --known-at (recorded) and
// both; history, trace and height list show both times.
func TestHeightShowAsOfKnownAt(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seed(t, db.URL)
	set := func(value, unit, kind, from, source string) {
		t.Helper()
		mustRun(t, db.URL, "height", "set", "TC-0412", value, "--unit", unit, "--datum", "NAVD88", "--kind", kind,
			"--in-force-from", from, "--source", source, "--reason", "entered from "+source, "--by", "tester")
	}
	set("769.83", "usft", "authority", "2005-07-15T00:00:00Z", "control sheet 2005 (invented)")
	set("769.70", "usft", "authority", "2001-03-01T00:00:00Z", "control sheet 2001 (invented)")
	set("234.662", "m", "authority", "2019-09-16T00:00:00Z", "control report 2019 (invented)")
	set("769.88", "usft", "correction", "2005-07-15T00:00:00Z", "errata to the 2005 sheet (invented)")

	var hist []struct {
		Version     int       `json:"version"`
		Value       string    `json:"value"`
		InForceFrom time.Time `json:"in_force_from"`
		CommittedAt time.Time `json:"committed_at"`
		Current     bool      `json:"current"`
	}
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "history", "TC-0412", "-o", "json")), &hist); err != nil {
		t.Fatal(err)
	}
	if len(hist) != 4 || hist[0].Version != 4 || !hist[0].InForceFrom.Equal(time.Date(2005, 7, 15, 0, 0, 0, 0, time.UTC)) ||
		hist[0].Current || !hist[1].Current {
		t.Fatalf("history: %+v; want four versions, the correction (4) in force from 2005-07-15 and 3 current", hist)
	}
	recorded := map[int]time.Time{}
	for _, h := range hist {
		recorded[h.Version] = h.CommittedAt
	}
	show := func(args ...string) (version int, value string) {
		t.Helper()
		var out struct {
			Heights []struct {
				Version int    `json:"version"`
				Value   string `json:"value"`
			} `json:"heights"`
		}
		if err := json.Unmarshal([]byte(mustRun(t, db.URL, append([]string{"height", "show", "TC-0412", "-o", "json"}, args...)...)), &out); err != nil {
			t.Fatal(err)
		}
		if len(out.Heights) == 0 {
			return 0, ""
		}
		if len(out.Heights) > 1 {
			t.Fatalf("height show %v: %d heights", args, len(out.Heights))
		}
		return out.Heights[0].Version, out.Heights[0].Value
	}
	at := func(v int, d time.Duration) string { return recorded[v].Add(d).Format(time.RFC3339Nano) }
	for _, c := range []struct {
		args    []string
		version int
		value   string
	}{
		{nil, 3, "234.662"}, // now: the 2019 report, though the correction came later
		{[]string{"--as-of", "2010-01-01"}, 4, "769.88"},                         // in force in 2010 as known now: the corrected 2005 value
		{[]string{"--as-of", "2003-06-30"}, 2, "769.70"},                         // the 2001 sheet
		{[]string{"--as-of", "2000-12-31"}, 0, ""},                               // before every in-force date
		{[]string{"--as-of", "2010-01-01", "--known-at", at(3, 0)}, 1, "769.83"}, // before the correction was recorded
		{[]string{"--as-of", "2003-06-30", "--known-at", at(1, 0)}, 0, ""},       // the 2001 sheet not yet recorded
		{[]string{"--as-of", "2003-06-30", "--known-at", at(2, 0)}, 2, "769.70"},
		{[]string{"--known-at", at(1, -time.Microsecond)}, 0, ""}, // nothing recorded yet
		{[]string{"--known-at", at(2, 0)}, 1, "769.83"},           // in force then, as known then
		{[]string{"--known-at", at(4, time.Minute)}, 3, "234.662"},
	} {
		v, val := show(c.args...)
		if v != c.version || val != c.value {
			t.Errorf("height show %v: version %d (%s), want %d (%s)", c.args, v, val, c.version, c.value)
		}
	}
	// No height: said on the error stream, naming both instants.
	_, errOut, _ := run(t, db.URL, "height", "show", "TC-0412", "--as-of", "2003-06-30", "--known-at", at(1, 0))
	if !strings.Contains(errOut, "has no height in force at ") || !strings.Contains(errOut, " as known at ") {
		t.Errorf("height show with none in force: %q", errOut)
	}
	// The table shows both times.
	out := mustRun(t, db.URL, "height", "show", "TC-0412", "--as-of", "2010-01-01")
	assertTabSeparated(t, "height show --as-of", out,
		[]string{"DATUM", "VERSION", "HEIGHT (in UNIT)", "UNIT", "CLASS", "IN FORCE FROM (UTC)", "RECORDED (UTC)", "SOURCE", "DOUBT"},
		[][]string{{"NAVD88", "4", "769.88", "usft", "", "2005-07-15 00:00:00Z", timeText(recorded[4]), "errata to the 2005 sheet (invented)", ""}})
	// history: both times on every version, in recorded order.
	out = mustRun(t, db.URL, "history", "TC-0412")
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 5 || !strings.HasPrefix(lines[0], "datum\tversion\tin_force_from_utc\trecorded_utc\t") {
		t.Fatalf("history piped:\n%s", out)
	}
	for i, want := range []struct{ version, from string }{
		{"4", "2005-07-15 00:00:00Z"}, {"3", "2019-09-16 00:00:00Z"}, {"2", "2001-03-01 00:00:00Z"}, {"1", "2005-07-15 00:00:00Z"},
	} {
		cells := strings.Split(lines[i+1], "\t")
		v := map[string]int{"4": 4, "3": 3, "2": 2, "1": 1}[want.version]
		if cells[1] != want.version || cells[2] != want.from || cells[3] != timeText(recorded[v]) {
			t.Errorf("history row %d: %q; want version %s in force from %s, recorded %s", i, lines[i+1], want.version, want.from, timeText(recorded[v]))
		}
	}
	// trace: the version and both its times.
	out = mustRun(t, db.URL, "trace", "TC-0412", "--as-of", "2010-01-01", "--known-at", at(3, 0))
	if !strings.Contains(out, "TC-0412 on NAVD88, version 1: 769.83 usft (authority), in force from 2005-07-15 00:00:00Z, recorded "+timeText(recorded[1])) {
		t.Errorf("trace --as-of --known-at:\n%s", out)
	}
	// height list takes both.
	out = mustRun(t, db.URL, "height", "list", "--as-of", "2010-01-01", "--known-at", at(3, 0))
	if !strings.Contains(out, "TC-0412\tNAVD88\t1\t769.83\t") {
		t.Errorf("height list --as-of --known-at:\n%s", out)
	}
	// --in-force-from is required, and not in the future: exit 2, nothing
	// written.
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{}, "--in-force-from is required"},
		{[]string{"--in-force-from", time.Now().AddDate(0, 0, 2).Format("2006-01-02")}, "--in-force-from: " /* in the future */},
		{[]string{"--in-force-from", "15/07/2005"}, "in-force-from: \"15/07/2005\" is not a time"},
	} {
		_, errOut, status := run(t, db.URL, append([]string{"height", "set", "TC-0412", "769.90", "--unit", "usft", "--datum", "NAVD88",
			"--source", "s", "--reason", "r"}, c.args...)...)
		if status != 2 || !strings.Contains(errOut, c.want) {
			t.Errorf("height set %v: exit %d, %q; want exit 2 saying %q", c.args, status, errOut, c.want)
		}
	}
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "history", "TC-0412", "-o", "json")), &hist); err != nil || len(hist) != 4 {
		t.Fatalf("history after the refusals: %v, %d versions; want 4", err, len(hist))
	}
}
