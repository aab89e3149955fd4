package cli

import (
	"encoding/json"
	"fmt"
	"strings"
	"testing"

	"cairn/internal/pgtest"
)

// mark list --near lists at most --limit marks, the nearest, and says on
// the error stream when more are within the radius; --limit 0 lists all;
// --limit without --near is refused.
func TestMarkListNearLimit(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	// Five marks due north of 41.62,-97.95, 100 m apart (0.0009° of
	// latitude is about 100 m): OB-5 nearest, OB-1 furthest.
	for i := 1; i <= 5; i++ {
		mustRun(t, db.URL, "mark", "add", fmt.Sprintf("OB-%d", i), "--lat", fmt.Sprintf("%.4f", 41.62+float64(6-i)*0.0009), "--lon", "-97.95")
	}
	list := func(args ...string) ([]markJSON, string) {
		out, errOut, status := run(t, db.URL, append([]string{"mark", "list", "--near", "41.62,-97.95", "--within", "1km", "-o", "json"}, args...)...)
		if status != ExitOK {
			t.Fatalf("mark list %v: exit %d: %s", args, status, errOut)
		}
		var ms []markJSON
		if err := json.Unmarshal([]byte(out), &ms); err != nil {
			t.Fatal(err)
		}
		return ms, errOut
	}
	names := func(ms []markJSON) string {
		var s []string
		for _, m := range ms {
			s = append(s, m.Designation)
		}
		return strings.Join(s, " ")
	}
	ms, errOut := list("--limit", "2")
	if names(ms) != "OB-5 OB-4" || !strings.Contains(errOut, "more marks are within 1km of 41.62,-97.95 than the 2 nearest listed") {
		t.Errorf("--limit 2: %q, stderr %q", names(ms), errOut)
	}
	ms, errOut = list("--limit", "5")
	if names(ms) != "OB-5 OB-4 OB-3 OB-2 OB-1" || strings.Contains(errOut, "more marks") {
		t.Errorf("--limit 5: %q, stderr %q", names(ms), errOut)
	}
	if ms, _ = list("--limit", "0"); len(ms) != 5 {
		t.Errorf("--limit 0: %q", names(ms))
	}
	if ms, _ = list(); len(ms) != 5 {
		t.Errorf("default limit: %q", names(ms))
	}
	if _, errOut, status := run(t, db.URL, "mark", "list", "--limit", "3"); status != ExitBadInput || !strings.Contains(errOut, "--limit goes with --near") {
		t.Errorf("--limit without --near: exit %d, %s", status, errOut)
	}
	if _, errOut, status := run(t, db.URL, "mark", "list", "--near", "41.62,-97.95", "--limit", "-1"); status != ExitBadInput || !strings.Contains(errOut, "limit") {
		t.Errorf("--limit -1: exit %d, %s", status, errOut)
	}
}
