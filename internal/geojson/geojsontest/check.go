// Package geojsontest checks a document against the rules of RFC 7946
// (Butler et al., "The GeoJSON Format", IETF RFC 7946, 2016), for the
// tests of every command that writes GeoJSON. It reads the document with
// encoding/json alone, never with the writer's code.
package geojsontest

import (
	"encoding/json"
	"fmt"
	"regexp"
	"testing"
)

// Feature is one feature as read back: its geometry (nil for a null one,
// RFC 7946 §3.2) and its properties.
type Feature struct {
	Point      *[2]float64 // [longitude, latitude]
	Properties map[string]any
}

var snake = regexp.MustCompile(`^[a-z][a-z0-9]*(_[a-z0-9]+)*$`)

// Check parses data as a FeatureCollection and fails t for each rule of
// RFC 7946 it breaks:
//
//   - §3.3: a FeatureCollection has "type": "FeatureCollection" and
//     "features", an array;
//   - §4: no "crs" member, at the top or in a feature or geometry;
//   - §3.2: each feature has "type": "Feature", a "geometry" member (an
//     object or null) and a "properties" member (an object or null);
//   - §3.1.2, §3.1.1: a Point's "coordinates" is one position, of two
//     numbers here (cairn writes no altitude), longitude first;
//   - §4: longitude in -180 to 180, latitude in -90 to 90;
//
// and, cairn's own rule (docs/output.md), property names snake_case with
// the unit last. It returns the features.
func Check(t *testing.T, data []byte) []Feature {
	t.Helper()
	feats, err := check(data)
	if err != nil {
		t.Fatalf("GeoJSON (RFC 7946): %v\n%.600s", err, data)
	}
	return feats
}

func check(data []byte) ([]Feature, error) {
	var fc map[string]json.RawMessage
	if err := json.Unmarshal(data, &fc); err != nil {
		return nil, fmt.Errorf("not a JSON object: %w", err)
	}
	if _, ok := fc["crs"]; ok {
		return nil, fmt.Errorf("a crs member (§4 removed it)")
	}
	var typ string
	if err := json.Unmarshal(fc["type"], &typ); err != nil || typ != "FeatureCollection" {
		return nil, fmt.Errorf("type %s, want \"FeatureCollection\" (§3.3)", fc["type"])
	}
	var raw []map[string]json.RawMessage
	if err := json.Unmarshal(fc["features"], &raw); err != nil || raw == nil {
		return nil, fmt.Errorf("features is not an array (§3.3): %s", fc["features"])
	}
	var out []Feature
	for i, f := range raw {
		var ft string
		if err := json.Unmarshal(f["type"], &ft); err != nil || ft != "Feature" {
			return nil, fmt.Errorf("feature %d: type %s, want \"Feature\" (§3.2)", i, f["type"])
		}
		if _, ok := f["crs"]; ok {
			return nil, fmt.Errorf("feature %d: a crs member (§4)", i)
		}
		g, ok := f["geometry"]
		if !ok {
			return nil, fmt.Errorf("feature %d: no geometry member (§3.2)", i)
		}
		p, ok := f["properties"]
		if !ok {
			return nil, fmt.Errorf("feature %d: no properties member (§3.2)", i)
		}
		var feat Feature
		if string(g) != "null" {
			var geom map[string]json.RawMessage
			if err := json.Unmarshal(g, &geom); err != nil {
				return nil, fmt.Errorf("feature %d: geometry %s is neither an object nor null (§3.2)", i, g)
			}
			if _, ok := geom["crs"]; ok {
				return nil, fmt.Errorf("feature %d: a crs member in the geometry (§4)", i)
			}
			var gt string
			var c []float64
			if json.Unmarshal(geom["type"], &gt) != nil || gt != "Point" || json.Unmarshal(geom["coordinates"], &c) != nil || len(c) != 2 {
				return nil, fmt.Errorf("feature %d: geometry %s is not a Point of one 2-number position (§3.1.2)", i, g)
			}
			if c[0] < -180 || c[0] > 180 || c[1] < -90 || c[1] > 90 {
				return nil, fmt.Errorf("feature %d: position %v out of range, longitude first (§4)", i, c)
			}
			feat.Point = &[2]float64{c[0], c[1]}
		}
		if err := json.Unmarshal(p, &feat.Properties); err != nil {
			return nil, fmt.Errorf("feature %d: properties %s is not an object (§3.2)", i, p)
		}
		for k := range feat.Properties {
			if !snake.MatchString(k) {
				return nil, fmt.Errorf("feature %d: property name %q is not snake_case", i, k)
			}
		}
		out = append(out, feat)
	}
	return out, nil
}
