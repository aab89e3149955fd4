package cli

import (
	"slices"
	"strings"
	"testing"

	"cairn/internal/geojson/geojsontest"
)

// The property names of mark list's and height list's GeoJSON: a closed
// set, snake_case with the unit last (docs/output.md).
var (
	markFeatureProps = []string{"aliases", "condition", "description", "description_version", "directions", "doubts", "mark",
		"position_source", "replaced_by", "replaces", "retired_on", "setting", "stamping", "type"}
	heightFeatureProps = []string{"class", "current", "datum", "decimals", "doubts", "height_in_unit", "height_m", "in_force_from_utc",
		"mark", "recorded_utc", "source", "source_kind", "unit", "version", "withdrawn"}
)

func propNames(f geojsontest.Feature) []string {
	var ks []string
	for k := range f.Properties {
		ks = append(ks, k)
	}
	slices.Sort(ks)
	return ks
}

// mark list -o geojson and height list -o geojson, read back by
// geojsontest.Check against RFC 7946 (Butler et al., IETF 2016): a
// FeatureCollection (§3.3) of Features (§3.2) with no crs member (§4),
// Point positions [longitude, latitude] in range (§3.1.1, §4), a null
// geometry for the mark with no position (§3.2); the property names are
// the closed sets above.
func TestListsAsGeoJSON(t *testing.T) {
	t.Parallel()
	db := sheetRegister(t)
	mustRun(t, db.URL, "mark", "add", "MR-9", "--type", "rivet")
	mustRun(t, db.URL, "height", "set", "MR-9", "12.5", "--unit", "m", "--datum", "NAVD88", "--kind", "authority",
		"--in-force-from", "2010-01-01T00:00:00Z", "--source", "river survey 2010 (invented)", "--reason", "entered", "--by", "tester")

	fs := geojsontest.Check(t, []byte(mustRun(t, db.URL, "mark", "list", "-o", "geojson")))
	byMark := map[string]geojsontest.Feature{}
	for _, f := range fs {
		byMark[f.Properties["mark"].(string)] = f
		if got := propNames(f); !slices.Equal(got, markFeatureProps) {
			t.Errorf("mark list feature properties %v, want %v", got, markFeatureProps)
		}
	}
	if len(fs) != 3 {
		t.Fatalf("mark list -o geojson: %d features, want 3", len(fs))
	}
	// OB-17 was added at 41.6212 N, 97.9579 W: longitude first (§3.1.1).
	if p := byMark["OB-17"].Point; p == nil || p[0] != -97.9579 || p[1] != 41.6212 {
		t.Errorf("OB-17 at %v, want [-97.9579, 41.6212]", p)
	}
	if byMark["MR-9"].Point != nil {
		t.Errorf("MR-9 has no position, but geometry %v (want null, RFC 7946 §3.2)", byMark["MR-9"].Point)
	}
	ob := byMark["OB-17"].Properties
	if ob["condition"] != "disturbed" || !strings.Contains(ob["doubts"].(string), "disturbed") || ob["description"] != hostileDescription {
		t.Errorf("OB-17's properties %v: want condition and doubt disturbed, the description as written", ob)
	}

	// --near adds the distance, in km.
	fs = geojsontest.Check(t, []byte(mustRun(t, db.URL, "mark", "list", "--near", "41.6208,-97.9583", "--within", "500m", "-o", "geojson")))
	if len(fs) != 2 {
		t.Fatalf("mark list --near -o geojson: %d features, want 2", len(fs))
	}
	for _, f := range fs {
		if d, ok := f.Properties["distance_km"].(float64); !ok || d <= 0 || d > 0.5 {
			t.Errorf("%v: distance_km %v, want within 0.5", f.Properties["mark"], f.Properties["distance_km"])
		}
	}

	fs = geojsontest.Check(t, []byte(mustRun(t, db.URL, "height", "list", "-o", "geojson")))
	if len(fs) != 3 {
		t.Fatalf("height list -o geojson: %d features, want 3", len(fs))
	}
	hm := map[string]geojsontest.Feature{}
	for _, f := range fs {
		hm[f.Properties["mark"].(string)] = f
		if got := propNames(f); !slices.Equal(got, heightFeatureProps) {
			t.Errorf("height list feature properties %v, want %v", got, heightFeatureProps)
		}
	}
	// 769.83 usft in metres, 1 usft = 1200/3937 m (NIST Handbook 44,
	// Appendix C, 2024; the US survey foot's definition): 923 796/3937 =
	// 234.64465…, to the published value's 0.01 usft ≈ 3 mm: 234.645.
	tc := hm["TC-0412"].Properties
	if tc["height_m"] != "234.645" || tc["height_in_unit"] != "769.83" || tc["unit"] != "usft" {
		t.Errorf("TC-0412's height properties %v, want height_m 234.645 from 769.83 usft", tc)
	}
	if p := hm["TC-0412"].Point; p == nil || p[0] != -97.9586 || p[1] != 41.6205 {
		t.Errorf("TC-0412 at %v, want [-97.9586, 41.6205]", p)
	}
	if hm["MR-9"].Point != nil || hm["MR-9"].Properties["height_m"] != "12.5" {
		t.Errorf("MR-9: geometry %v, properties %v: want null and height_m 12.5", hm["MR-9"].Point, hm["MR-9"].Properties)
	}
	if hm["OB-17"].Properties["height_m"] != "234.671" || !strings.Contains(hm["OB-17"].Properties["doubts"].(string), "disturbed") {
		t.Errorf("OB-17: %v, want height_m 234.671 and the disturbed doubt", hm["OB-17"].Properties)
	}

	// A command that does not list marks refuses geojson.
	if _, errOut, status := run(t, db.URL, "datum", "list", "-o", "geojson"); status == 0 || !strings.Contains(errOut, "geojson") {
		t.Errorf("datum list -o geojson: exit %d, %s", status, errOut)
	}
}
