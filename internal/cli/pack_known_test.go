package cli

import (
	"bytes"
	"encoding/csv"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"
)

// pack --known-at K is the pack as the register knew it at K, by the rule
// of height show --known-at: a height version committed after K (here a
// correction in force from 2019, entered later), a condition report
// recorded after K and a mark added after K are not in it; without
// --known-at they are. --as-of with --known-at takes the versions in force
// at --as-of among those known at K.
func TestPackKnownAt(t *testing.T) {
	t.Parallel()
	db := sheetRegister(t)
	time.Sleep(20 * time.Millisecond)
	k := time.Now().UTC().Format(time.RFC3339Nano)
	time.Sleep(20 * time.Millisecond)
	mustRun(t, db.URL, "height", "set", "OB-17", "234.680", "--unit", "m", "--datum", "NAVD88", "--kind", "authority",
		"--in-force-from", "2019-09-16T00:00:00Z", "--source", "control report 2019, corrected (invented)", "--reason", "correction", "--by", "tester")
	mustRun(t, db.URL, "mark", "condition", "TC-0412", "good", "--note", "found after the pack", "--on", "2024-07-01", "--by", "mara")
	mustRun(t, db.URL, "mark", "add", "OB-18", "--type", "rivet", "--lat", "41.6210", "--lon", "-97.9581")

	dir := t.TempDir()
	pack := func(name string, extra ...string) (map[string][]byte, map[string]string) {
		t.Helper()
		out := filepath.Join(dir, name)
		mustRun(t, db.URL, append([]string{"pack", "--near", "41.6208,-97.9583", "--within", "500m", "--out", out}, extra...)...)
		data, _ := os.ReadFile(out)
		files, _ := readZip(t, data)
		recs, err := csv.NewReader(bytes.NewReader(files["marks.csv"])).ReadAll()
		if err != nil {
			t.Fatal(err)
		}
		heights := map[string]string{}
		for _, r := range recs[1:] {
			heights[r[0]] = r[slices.Index(recs[0], "height_m")]
		}
		return files, heights
	}
	now, hNow := pack("now.zip")
	then, hThen := pack("then.zip", "--known-at", k)
	if hNow["OB-17"] != "234.680" || hThen["OB-17"] != "234.671" {
		t.Errorf("OB-17: %q now and %q known at K, want 234.680 (the correction) and 234.671 (before it)", hNow["OB-17"], hThen["OB-17"])
	}
	if _, ok := hNow["OB-18"]; !ok {
		t.Error("the pack made now lacks OB-18")
	}
	if _, ok := hThen["OB-18"]; ok {
		t.Error("pack --known-at K has OB-18, added after K")
	}
	if !strings.Contains(string(now["sheets/TC-0412.html"]), "found after the pack") || strings.Contains(string(then["sheets/TC-0412.html"]), "found after the pack") {
		t.Error("the report recorded after K: want it in the pack of now only")
	}
	if !strings.Contains(string(then["README.txt"]), k) || !strings.Contains(string(then["sheets/OB-17.html"]), "as the register knew them on") {
		t.Error("pack --known-at: README or sheet does not say the instant")
	}
	// --as-of 2010 known at K: the 2001 version.
	if _, h := pack("old.zip", "--as-of", "2010-01-01", "--known-at", k); h["OB-17"] != "234.662" {
		t.Errorf("--as-of 2010 --known-at K: OB-17 %q, want 234.662 (in force from 2001)", h["OB-17"])
	}
	// Twice from the same state and arguments: the same bytes.
	again, _ := pack("then2.zip", "--known-at", k)
	a, _ := os.ReadFile(filepath.Join(dir, "then.zip"))
	b, _ := os.ReadFile(filepath.Join(dir, "then2.zip"))
	if len(again) == 0 || !bytes.Equal(a, b) {
		t.Error("two packs --known-at K of the same state differ")
	}
	if _, errOut, status := run(t, db.URL, "pack", "--near", "41.6208,-97.9583", "--known-at", "yesterday", "--out", filepath.Join(dir, "x.zip")); status != 2 || !strings.Contains(errOut, "known-at") {
		t.Errorf("pack --known-at yesterday: exit %d, %s", status, errOut)
	}
}
