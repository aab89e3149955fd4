package cli

import (
	"bytes"
	"context"
	"encoding/csv"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"cairn/internal/geojson/geojsontest"
)

// exportRegister is sheetRegister with two marks more and no position:
// MR-9 with a height, MR-10 with none.
func exportRegister(t *testing.T) string {
	t.Helper()
	db := sheetRegister(t)
	mustRun(t, db.URL, "mark", "add", "MR-9", "--type", "rivet")
	mustRun(t, db.URL, "mark", "add", "MR-10", "--type", "rivet")
	mustRun(t, db.URL, "height", "set", "MR-9", "12.5", "--unit", "m", "--datum", "NAVD88", "--kind", "authority",
		"--in-force-from", "2010-01-01T00:00:00Z", "--source", "river survey 2010 (invented)", "--reason", "entered", "--by", "tester")
	return db.URL
}

// cairn export --format geojson|csv: one file of every mark with its
// current heights in the unit asked for. The GeoJSON is read back against
// RFC 7946 (geojsontest.Check cites the sections: FeatureCollection §3.3,
// no crs §4, [longitude, latitude] in range §3.1.1 and §4, a null geometry
// for a mark with no position §3.2); the CSV by encoding/csv (RFC 4180),
// with the unit in its headers.
func TestExportFormats(t *testing.T) {
	t.Parallel()
	url := exportRegister(t)
	dir := t.TempDir()
	out := filepath.Join(dir, "marks.geojson")
	_, errOut, status := run(t, url, "export", "--format", "geojson", "--unit", "usft", "--out", out)
	if status != 0 {
		t.Fatalf("export --format geojson: exit %d: %s", status, errOut)
	}
	for _, w := range []string{"wrote " + out + ": 4 mark(s) (the register), 4 row(s), heights in usft", "licensed surveyor", "in doubt"} {
		if !strings.Contains(errOut, w) {
			t.Errorf("export's stderr lacks %q:\n%s", w, errOut)
		}
	}
	data, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	if st, _ := os.Stat(out); st.Mode().Perm() != 0o644 {
		t.Errorf("the export's file has mode %v, want -rw-r--r-- as the pack's", st.Mode().Perm())
	}
	fs := geojsontest.Check(t, data)
	var order []string
	props := map[string]map[string]any{}
	for _, f := range fs {
		m := f.Properties["mark"].(string)
		order, props[m] = append(order, m), f.Properties
		if got := propNames(f); !slices.Equal(got, packFeatureProps("usft")) {
			t.Errorf("%s: properties %v, want %v", m, got, packFeatureProps("usft"))
		}
		if (f.Point == nil) != strings.HasPrefix(m, "MR-") {
			t.Errorf("%s: geometry %v (MR-9 and MR-10 have no position: null, RFC 7946 §3.2)", m, f.Point)
		}
	}
	if want := []string{"MR-10", "MR-9", "OB-17", "TC-0412"}; !slices.Equal(order, want) {
		t.Errorf("export's features %v, want %v (by designation)", order, want)
	}
	// 234.671 m and 12.5 m in US survey feet (1 usft = 1200/3937 m, NIST
	// Handbook 44, Appendix C): 769.9166… and 41.0104…, each to one
	// decimal fewer than published (units.ConvertedDecimals); TC-0412's
	// 769.83 usft stays as published.
	for m, want := range map[string]any{"OB-17": "769.92", "TC-0412": "769.83", "MR-9": "41", "MR-10": nil} {
		if got := props[m]["height_usft"]; got != want {
			t.Errorf("%s: height_usft %v, want %v", m, got, want)
		}
	}
	if props["OB-17"]["doubts"] != "disturbed" || props["OB-17"]["last_found_good_on"] != "2024-05-02" {
		t.Errorf("OB-17: %v, want the disturbed doubt and last found good 2024-05-02", props["OB-17"])
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 1 {
		t.Errorf("the export left %d files in its folder, want the one", len(ents))
	}

	// An existing file is refused and left as it was.
	_, errOut, status = run(t, url, "export", "--format", "csv", "--out", out)
	if after, _ := os.ReadFile(out); status != 2 || !strings.Contains(errOut, "is there already") || !bytes.Equal(after, data) {
		t.Errorf("export over an existing file: exit %d, %s", status, errOut)
	}

	// CSV of an area to standard output: the two marks within 500 m, in
	// metres by default.
	text := mustRun(t, url, "export", "--format", "csv", "--area", "41.6208,-97.9583", "--within", "500m", "--out", "-")
	recs, err := csv.NewReader(strings.NewReader(text)).ReadAll()
	if err != nil {
		t.Fatalf("export --format csv: %v\n%s", err, text)
	}
	hdr := recs[0]
	if want := packCSVHeader("m"); !slices.Equal(hdr, want) || !slices.Contains(hdr, "height_m") {
		t.Errorf("CSV header %v, want %v", hdr, want)
	}
	if len(recs) != 3 || recs[1][0] != "OB-17" || recs[2][0] != "TC-0412" {
		t.Fatalf("CSV of the area: %v, want OB-17 and TC-0412", recs)
	}
	// 769.83 usft = 923 796/3937 m = 234.64465… m (NIST Handbook 44 App. C).
	col := func(rec []string, name string) string { return rec[slices.Index(hdr, name)] }
	if col(recs[2], "height_m") != "234.645" || col(recs[2], "height_in_unit") != "769.83" || col(recs[2], "unit") != "usft" {
		t.Errorf("TC-0412's row %v: want height_m 234.645 from 769.83 usft", recs[2])
	}
	if d, err := strconv.ParseFloat(col(recs[1], "distance_from_site_m"), 64); err != nil || d <= 0 || d > 500 {
		t.Errorf("OB-17's distance from the site %v (%v), want within 500 m", d, err)
	}

	// Bad flags are refused, and the import layout is unchanged by them.
	for _, args := range [][]string{
		{"export", "--format", "kml", "--out", "-"},
		{"export", "--format", "csv", "--area", "41.62", "--within", "1km", "--out", "-"},
		{"export", "--format", "csv", "--area", "41.62,-97.95", "--out", "-"},
		{"export", "--format", "csv", "--within", "1km", "--out", "-"},
		{"export", "--area", "41.62,-97.95", "--within", "1km", "--out", filepath.Join(dir, "layout")},
		{"export", "--unit", "usft", "--out", filepath.Join(dir, "layout")},
	} {
		if _, errOut, status := run(t, url, args...); status != 2 {
			t.Errorf("cairn %s: exit %d, want 2: %s", strings.Join(args, " "), status, errOut)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "layout")); err == nil {
		t.Error("a refused export wrote its folder")
	}
}

// packFeatureProps are the property names of a pack's and an export's
// features, the height's named after unit u.
func packFeatureProps(u string) []string {
	ps := []string{"aliases", "class", "condition", "datum", "distance_from_site_m", "doubts", "height_in_unit", "height_" + u,
		"in_force_from_utc", "last_found_good_on", "mark", "source", "unit", "version"}
	slices.Sort(ps)
	return ps
}

// The progress bar is decided in one place (IOStreams.StartBar): an export
// whose stderr is not a terminal (a buffer here) writes no bar; the same
// export with ErrIsTerminal set draws one on stderr, never on stdout.
func TestExportProgressOnlyOnTerminal(t *testing.T) {
	t.Parallel()
	url := exportRegister(t)
	for _, term := range []bool{false, true} {
		ios, _, out, errOut := TestStreams(false)
		ios.ErrIsTerminal = term
		f := NewFactory(ios, "test")
		err := Execute(context.Background(), f, []string{"--db", url, "export", "--format", "geojson", "--out", "-"})
		f.Close()
		if err != nil {
			t.Fatal(err)
		}
		bar := strings.Contains(errOut.String(), "exporting marks") || strings.Contains(errOut.String(), "\r")
		if bar != term {
			t.Errorf("stderr a terminal %v: bar drawn %v:\n%q", term, bar, errOut.String())
		}
		if strings.Contains(out.String(), "exporting marks") || strings.Contains(out.String(), "\r") {
			t.Errorf("stderr a terminal %v: a bar on stdout", term)
		}
		geojsontest.Check(t, out.Bytes())
	}
}
