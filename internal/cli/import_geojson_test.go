package cli

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/registertest"
)

// The sample register's marks as an RFC 7946 FeatureCollection: the same
// marks as testdata/import/tallis/marks.csv (invented Tallis County marks).
var geojsonSample = filepath.Join("..", "..", "testdata", "import", "tallis-geojson", "marks.geojson")

// geojsonDir is a folder with the sample's marks.geojson (edited by the
// pairs old, new) and its conditions.csv and heights.csv.
func geojsonDir(t *testing.T, edits ...[2]string) string {
	t.Helper()
	dir := t.TempDir()
	b, err := os.ReadFile(geojsonSample)
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	for _, e := range edits {
		if !strings.Contains(s, e[0]) {
			t.Fatalf("marks.geojson holds no %q", e[0])
		}
		s = strings.Replace(s, e[0], e[1], 1)
	}
	if err := os.WriteFile(filepath.Join(dir, "marks.geojson"), []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, n := range []string{"conditions.csv", "heights.csv"} {
		b, err := os.ReadFile(filepath.Join(importSample, n))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, n), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

// TestImportGeoJSON: the marks given as a FeatureCollection of Points
// (RFC 7946 section 3.3) are imported as marks.csv's rows are: the export
// of the register is byte for byte the export of the sample's CSV files. The position
// [-104.8211, 39.4127] is longitude first (RFC 7946 section 3.1.1), so
// marks.csv's lat is 39.4127; a null geometry (section 3.2, an unlocated
// feature) is a mark without a position (TC-0103).
func TestImportGeoJSON(t *testing.T) {
	t.Parallel()
	db := importDB(t)
	dir := geojsonDir(t)
	before := registertest.Counts(t, db.Pool)
	_, out := mustBin(t, db, ExitOK, "import", dir, "--check")
	if !strings.Contains(out, "5 marks, 5 condition reports, 9 height versions would be imported") {
		t.Errorf("import --check: %s", out)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
	_, out = mustBin(t, db, ExitOK, "import", dir)
	if !strings.Contains(out, "marks.geojson  5 rows  sha256 ") {
		t.Errorf("import names not marks.geojson: %s", out)
	}
	registertest.AssertWrote(t, db.Pool, before, map[string]int64{"mark": 5, "mark_version": 4, "mark_alias": 5, "mark_retirement": 1,
		"mark_condition": 5, "height": 9, "import_event": 1, "register_commit": 1})
	exp := filepath.Join(t.TempDir(), "exp")
	mustBin(t, db, ExitOK, "export", "--out", exp)
	sameFiles(t, importExported, exp)
	mustBin(t, db, ExitOK, "audit", "verify")
}

// TestImportGeoJSONBadFeatures: each bad feature is refused, naming the
// file, the feature (from 1) and the property; nothing is written.
func TestImportGeoJSONBadFeatures(t *testing.T) {
	t.Parallel()
	db := importDB(t)
	first := `"coordinates": [-104.8211, 39.4127]`
	for _, c := range []struct {
		name string
		edit [2]string
		want string
	}{
		// RFC 7946 section 3.1.1: "The first two elements are longitude
		// and latitude"; a latitude beyond 90 with a longitude within it
		// is a position written latitude first.
		{"swapped", [2]string{first, `"coordinates": [39.4127, -104.8211]`},
			"marks.geojson feature 1 property geometry: latitude -104.8211 is outside -90 to 90 degrees: a position is [longitude, latitude], longitude first (RFC 7946 section 3.1.1); are they swapped?"},
		{"longitude", [2]string{first, `"coordinates": [-204.8211, 39.4127]`},
			"marks.geojson feature 1 property geometry: longitude -204.8211 is outside -180 to 180 degrees"},
		// RFC 7946 section 3.1.1: "Altitude or elevation MAY be included
		// as an optional third element"; cairn refuses it, since a height
		// never comes from a position.
		{"altitude", [2]string{first, `"coordinates": [-104.8211, 39.4127, 1769.8]`},
			"marks.geojson feature 1 property geometry: a third number in the position (an altitude, RFC 7946 section 3.1.1) is refused"},
		{"one number", [2]string{first, `"coordinates": [-104.8211]`},
			"marks.geojson feature 1 property geometry: a position has two numbers, [longitude, latitude] (RFC 7946 section 3.1.1); this one has 1"},
		// RFC 7946 section 3.1.2: "For type "Point", the "coordinates"
		// member is a single position."
		{"not a point", [2]string{`{"type": "Point", "coordinates": [-104.80012, 39.40031]}`,
			`{"type": "LineString", "coordinates": [[-104.80012, 39.40031], [-104.8, 39.4]]}`},
			"marks.geojson feature 2 property geometry: a LineString: a mark is a Point (RFC 7946 section 3.1.2)"},
		// RFC 7946 section 3.2: "A Feature object has a "type" member
		// with the value "Feature"."
		{"not a feature", [2]string{`{"type": "Feature", "geometry": {"type": "Point", "coordinates": [-104.7943`,
			`{"type": "Geometry", "geometry": {"type": "Point", "coordinates": [-104.7943`},
			`marks.geojson feature 4 property type: "Geometry" is not a Feature (RFC 7946 section 3.2)`},
		{"lat property", [2]string{`"designation": "TC-0101",`, `"designation": "TC-0101", "lat": 39.4,`},
			"marks.geojson feature 1 property lat: the position is the feature's geometry, not a property"},
		{"unknown property", [2]string{`"designation": "TC-0101",`, `"designation": "TC-0101", "colour": "red",`},
			`marks.geojson feature 1 property colour: unknown property "colour"`},
		{"designation", [2]string{`"designation": "TC-0102"`, `"designation": "TC 0102"`},
			`marks.geojson feature 2 property designation: "TC 0102" is not a designation`},
		{"retired on", [2]string{`"retired_on": "2015-03-01"`, `"retired_on": "3/1/2015"`},
			`marks.geojson feature 3 property retired_on: "3/1/2015" is a spreadsheet's date`},
		{"staged check", [2]string{`"designation": "TC-0102"`, `"designation": "TC-0101"`},
			`marks.geojson feature 2 property designation: TC-0101 is given also as feature 1`},
		// RFC 7946 section 3.3: "A GeoJSON object with the type
		// "FeatureCollection" is a FeatureCollection object."
		{"not a collection", [2]string{`{"type": "FeatureCollection",`, `{"type": "Feature",`},
			`marks.geojson: the object's type is "Feature", not FeatureCollection (RFC 7946 section 3.3)`},
		// RFC 7946 section 4: "The coordinate reference system for all
		// GeoJSON coordinates is a geographic coordinate reference system,
		// using the World Geodetic System 1984 (WGS 84) datum".
		{"crs", [2]string{`{"type": "FeatureCollection",`, `{"type": "FeatureCollection", "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::2232"}},`},
			"marks.geojson: a crs member naming another coordinate system: RFC 7946 (section 4)"},
		{"not JSON", [2]string{`"features": [`, `"features": [}`}, "marks.geojson: not JSON: invalid character '}'"},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := geojsonDir(t, c.edit)
			refusedBin(t, db, []string{c.want, "nothing written"}, "import", dir)
			refusedBin(t, db, []string{c.want}, "import", dir, "--check")
		})
	}

	// A crs member naming CRS84 (WGS 84 longitude, latitude) is RFC 7946's
	// own system, read as if it were not there (section 4).
	dir := geojsonDir(t, [2]string{`{"type": "FeatureCollection",`, `{"type": "FeatureCollection", "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:OGC:1.3:CRS84"}},`})
	mustBin(t, db, ExitOK, "import", dir, "--check")

	// marks.csv and marks.geojson together: which is meant?
	dir = geojsonDir(t)
	b, err := os.ReadFile(filepath.Join(importSample, "marks.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "marks.csv"), b, 0o644); err != nil {
		t.Fatal(err)
	}
	refusedBin(t, db, []string{"marks.geojson: marks.csv is in the folder too: give the marks in the one file or the other, not both"}, "import", dir, "--check")
}
