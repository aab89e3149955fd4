package geojsontest

import (
	"strings"
	"testing"
)

// The checker refuses what RFC 7946 (IETF 2016) rules out, each with its
// section, and accepts the two examples of §1.5 and §3.2 cut down to
// Points, so that a test that relies on it can fail.
func TestCheckRefuses(t *testing.T) {
	ok := []string{
		// RFC 7946 §1.5's example, its Point feature alone.
		`{"type":"FeatureCollection","features":[{"type":"Feature","geometry":{"type":"Point","coordinates":[102.0,0.5]},"properties":{"prop0":"value0"}}]}`,
		// §3.2: a feature with a null geometry and null properties.
		`{"type":"FeatureCollection","features":[{"type":"Feature","geometry":null,"properties":null}]}`,
		`{"type":"FeatureCollection","features":[]}`,
	}
	for _, doc := range ok {
		if _, err := check([]byte(doc)); err != nil {
			t.Errorf("%s: %v", doc, err)
		}
	}
	point := func(geom, props string) string {
		return `{"type":"FeatureCollection","features":[{"type":"Feature","geometry":` + geom + `,"properties":` + props + `}]}`
	}
	for _, c := range []struct{ doc, want string }{
		{`[]`, "not a JSON object"},
		{`{"type":"Feature","features":[]}`, "§3.3"},
		{`{"type":"FeatureCollection"}`, "§3.3"},
		{`{"type":"FeatureCollection","features":[],"crs":{"type":"name"}}`, "crs"},
		{`{"type":"FeatureCollection","features":[{"type":"Point","geometry":null,"properties":{}}]}`, "§3.2"},
		{`{"type":"FeatureCollection","features":[{"type":"Feature","properties":{}}]}`, "no geometry"},
		{`{"type":"FeatureCollection","features":[{"type":"Feature","geometry":null}]}`, "no properties"},
		{point(`{"type":"LineString","coordinates":[[1,2],[3,4]]}`, `{}`), "§3.1.2"},
		{point(`{"type":"Point","coordinates":[1,2,3]}`, `{}`), "§3.1.2"},
		{point(`{"type":"Point","coordinates":[41.62,-97.95]}`, `{}`), "out of range"},
		{point(`{"type":"Point","coordinates":[-197.95,41.62]}`, `{}`), "out of range"},
		{point(`{"type":"Point","coordinates":[1,2],"crs":{}}`, `{}`), "crs"},
		{point(`null`, `{"Height (m)":1}`), "not snake_case"},
		{point(`null`, `{"height-m":1}`), "not snake_case"},
		{point(`null`, `[1]`), "not an object"},
	} {
		_, err := check([]byte(c.doc))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %v, want an error with %q", c.doc, err, c.want)
		}
	}
}
