package geojson_test

import (
	"bytes"
	"encoding/json"
	"strings"
	"testing"

	"cairn/internal/geojson"
	"cairn/internal/geojson/geojsontest"
)

func f(v float64) *float64 { return &v }

// The features of the tests: one located, one unlocated (RFC 7946 §3.2:
// a feature's geometry may be null), one on the antimeridian and a pole.
func features() []geojson.Feature {
	return []geojson.Feature{
		{Lon: f(-97.95791234567), Lat: f(41.62120000001), Properties: []geojson.Property{
			{Name: "mark", Value: `OB-17 <"x">`}, {Name: "height_m", Value: "234.671"}, {Name: "aliases", Value: []string{"a", "b"}}, {Name: "version", Value: 2}}},
		{Properties: []geojson.Property{{Name: "mark", Value: "TC-0001"}, {Name: "height_m", Value: nil}}},
		{Lon: f(180), Lat: f(-90), Properties: []geojson.Property{{Name: "mark", Value: "Дорога"}}},
	}
}

func write(t *testing.T, indent string, fs []geojson.Feature) []byte {
	t.Helper()
	var b bytes.Buffer
	w := geojson.NewWriter(&b, indent)
	for _, x := range fs {
		if err := w.Write(x); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// Compact and indented, the collection follows RFC 7946 (geojsontest.Check
// cites the sections): a FeatureCollection (§3.3), no crs (§4), Point
// geometries [longitude, latitude] in range (§3.1.1, §4), a null geometry
// for the unlocated feature (§3.2); coordinates rounded to 7 places
// (§11.2's advice on precision), properties in the order given.
func TestWriterFollowsRFC7946(t *testing.T) {
	for _, indent := range []string{"", " ", "  "} {
		data := write(t, indent, features())
		fs := geojsontest.Check(t, data)
		if len(fs) != 3 {
			t.Fatalf("indent %q: %d features, want 3", indent, len(fs))
		}
		if p := fs[0].Point; p == nil || p[0] != -97.9579123 || p[1] != 41.6212 {
			t.Errorf("indent %q: first position %v, want [-97.9579123, 41.6212] (longitude first, 7 places)", indent, p)
		}
		if fs[1].Point != nil {
			t.Errorf("indent %q: an unlocated feature has geometry %v, want null (RFC 7946 §3.2)", indent, fs[1].Point)
		}
		if p := fs[2].Point; p == nil || p[0] != 180 || p[1] != -90 {
			t.Errorf("indent %q: third position %v, want [180, -90]", indent, p)
		}
		if fs[0].Properties["mark"] != `OB-17 <"x">` || fs[2].Properties["mark"] != "Дорога" {
			t.Errorf("indent %q: properties not read back as written: %v", indent, fs[0].Properties)
		}
		if v, ok := fs[1].Properties["height_m"]; !ok || v != nil {
			t.Errorf("indent %q: a nil property is %v (present %v), want null", indent, v, ok)
		}
		if i, j := bytes.Index(data, []byte(`"mark"`)), bytes.Index(data, []byte(`"height_m"`)); i < 0 || i > j {
			t.Errorf("indent %q: properties not in the order given", indent)
		}
	}
	// Compact: one feature per line, between the collection's first and
	// last lines.
	if lines := strings.Split(strings.TrimSuffix(string(write(t, "", features())), "\n"), "\n"); len(lines) != 5 {
		t.Errorf("compact collection of 3 features has %d lines, want 5", len(lines))
	}
}

// Indented, the writer gives the bytes json.MarshalIndent (Go's
// encoding/json) gives for the same collection held whole, so packs
// written before the writer existed are unchanged.
func TestWriterIndentedIsMarshalIndent(t *testing.T) {
	type geometry struct {
		Type        string     `json:"type"`
		Coordinates [2]float64 `json:"coordinates"`
	}
	type feature struct {
		Type       string         `json:"type"`
		Geometry   *geometry      `json:"geometry"`
		Properties map[string]any `json:"properties"`
	}
	props := []geojson.Property{{Name: "aliases", Value: []string{}}, {Name: "height_usft", Value: "769.92"}, {Name: "mark", Value: "A&B"}, {Name: "version", Value: nil}}
	fs := []geojson.Feature{{Lon: f(-97.9579), Lat: f(41.6212), Properties: props}, {Properties: props}}
	want := struct {
		Type     string    `json:"type"`
		Features []feature `json:"features"`
	}{Type: "FeatureCollection"}
	m := map[string]any{}
	for _, p := range props {
		m[p.Name] = p.Value
	}
	want.Features = []feature{{"Feature", &geometry{"Point", [2]float64{-97.9579, 41.6212}}, m}, {"Feature", nil, m}}
	b, _ := json.MarshalIndent(want, "", " ")
	if got := write(t, " ", fs); string(got) != string(b)+"\n" {
		t.Errorf("indented collection:\n%s\nwant json.MarshalIndent's:\n%s", got, b)
	}
	want.Features = []feature{}
	b, _ = json.MarshalIndent(want, "", " ")
	if got := write(t, " ", nil); string(got) != string(b)+"\n" {
		t.Errorf("empty collection %q, want %q", got, b)
	}
	geojsontest.Check(t, write(t, "", nil))
}

// A position out of range (RFC 7946 §4), half a position, a property name
// not snake_case or given twice are refused, naming the feature; the
// writer stops there.
func TestWriterRefuses(t *testing.T) {
	for _, c := range []struct {
		f    geojson.Feature
		want string
	}{
		{geojson.Feature{Lon: f(-197.9), Lat: f(41.6)}, "longitude -197.9 is outside"},
		{geojson.Feature{Lon: f(41.6), Lat: f(-97.9)}, "latitude -97.9 is outside"},
		{geojson.Feature{Lon: f(41.6)}, "both longitude and latitude"},
		{geojson.Feature{Properties: []geojson.Property{{Name: "Height (m)"}}}, `"Height (m)" is not snake_case`},
		{geojson.Feature{Properties: []geojson.Property{{Name: "height-m"}}}, "not snake_case"},
		{geojson.Feature{Properties: []geojson.Property{{Name: "mark"}, {Name: "mark"}}}, `"mark" given twice`},
	} {
		var b bytes.Buffer
		w := geojson.NewWriter(&b, "")
		if err := w.Write(geojson.Feature{}); err != nil {
			t.Fatal(err)
		}
		err := w.Write(c.f)
		if err == nil || !strings.Contains(err.Error(), "feature 2: ") || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: error %v, want feature 2 and %q", c.f, err, c.want)
		}
		if w.Close() == nil {
			t.Errorf("%+v: the writer closed the collection after refusing a feature", c.f)
		}
	}
}

// The writer streams: each feature reaches the underlying writer when it
// is written, not at Close.
func TestWriterStreams(t *testing.T) {
	var b bytes.Buffer
	w := geojson.NewWriter(&b, "")
	fs := features()
	_ = w.Write(fs[0])
	n := b.Len()
	_ = w.Write(fs[1])
	if n == 0 || b.Len() <= n {
		t.Errorf("after one feature %d bytes written, after two %d", n, b.Len())
	}
}

func TestSnakeCase(t *testing.T) {
	for name, want := range map[string]bool{"height_m": true, "in_force_from_utc": true, "lat_deg": true, "a1": true,
		"": false, "Height": false, "_m": false, "m_": false, "height__m": false, "1m": false, "height m": false} {
		if geojson.SnakeCase(name) != want {
			t.Errorf("SnakeCase(%q) = %v, want %v", name, !want, want)
		}
	}
}
