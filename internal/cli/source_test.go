package cli

import (
	"encoding/json"
	"strconv"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/sheetdata"
)

// Source texts as tables, the trace and datasheets show them: a version
// published with the whole run list (before issue 15) reads as one
// published since; any text past sheetdata.MaxSourceShown characters is cut, saying
// so; the rest is shown as it is.
func TestSourceShown(t *testing.T) {
	var runs []string
	for i := 1; i <= 2947; i++ {
		runs = append(runs, strconv.Itoa(i))
	}
	old := "adjustment 12 (least-squares, run " + strings.Join(runs, ", ") + ")"
	long := strings.Repeat("Tallis County levelling notes (invented). ", 10) // 420 characters
	cases := []struct{ kind, in, want string }{
		{"adjustment", old, "adjustment 12 (least-squares, 2947 runs)"},
		{"adjustment", "adjustment 2 (proportional, run 1)", "adjustment 2 (proportional, 1 run)"},
		{"adjustment", "adjustment 2 (proportional, 1 run)", "adjustment 2 (proportional, 1 run)"},
		// Not from an adjustment: the same words are a citation like any other.
		{"authority", "adjustment 2 (proportional, run 1)", "adjustment 2 (proportional, run 1)"},
		{"authority", long[:sheetdata.MaxSourceShown], long[:sheetdata.MaxSourceShown]},
		{"authority", long, long[:sheetdata.MaxSourceShown] + "… (420 characters; the whole text with -o json)"},
		{"adjustment", old[:len(old)-1], old[:sheetdata.MaxSourceShown] + "… (" + strconv.Itoa(len(old)-1) + " characters; the whole text with -o json)"},
	}
	for _, c := range cases {
		if got := sourceShown(c.kind, c.in); got != c.want {
			t.Errorf("sourceShown(%s, %.60q...) = %.120q, want %.120q", c.kind, c.in, got, c.want)
		}
	}
}

// history shows a long citation cut and -o json the whole of it.
func TestHistoryCutsALongSource(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seed(t, db.URL)
	long := strings.TrimSpace(strings.Repeat("Tallis County levelling notes (invented). ", 10)) // 419 characters
	args := setArgs("769.83", "outside value")
	for i, a := range args {
		if a == "--source" {
			args[i+1] = long
		}
	}
	mustRun(t, db.URL, args...)
	text := mustRun(t, db.URL, "history", "TC-0412")
	if !strings.Contains(text, "… (419 characters; the whole text with -o json)") || strings.Contains(text, long) {
		t.Errorf("history does not cut the source:\n%s", text)
	}
	var hist []heightJSON
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "history", "TC-0412", "-o", "json")), &hist); err != nil {
		t.Fatal(err)
	}
	if len(hist) != 1 || hist[0].Source != long {
		t.Errorf("history -o json: %+v, want the whole source", hist)
	}
}
