package register

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/store"
)

// MarksGeoJSON is the other form of the marks file: an RFC 7946
// FeatureCollection of Point features whose properties are marks.csv's
// columns (docs/import.md). A folder holds the one or the other.
const MarksGeoJSON = "marks.geojson"

// geoFeature is one member of a FeatureCollection's "features" (RFC 7946
// section 3.2); foreign members are ignored, as the RFC allows.
type geoFeature struct {
	Type       string          `json:"type"`
	Geometry   json.RawMessage `json:"geometry"`
	Properties json.RawMessage `json:"properties"`
}

// geoProperties are the properties a feature may carry: marks.csv's
// columns without lat and lon, which the geometry gives.
var geoProperties = slices.DeleteFunc(slices.Clone(markHeader), func(c string) bool { return c == "lat" || c == "lon" })

// importGeoJSON streams marks.geojson into the staging table of marks, one
// feature at a time (encoding/json's Token API: the file is never held
// whole), each feature checked as a row of marks.csv is.
func (r *Register) importGeoJSON(ctx context.Context, tx pgx.Tx, dir, by string, problems *[]ImportProblem) (store.ImportFile, error) {
	fh, err := os.Open(filepath.Join(dir, MarksGeoJSON))
	if err != nil {
		return store.ImportFile{}, inputErr("dir", "%v", err)
	}
	defer fh.Close()
	sum := sha256.New()
	src := io.TeeReader(fh, sum)
	f := &csvFile{name: MarksGeoJSON, problems: problems}
	g := &geoReader{dec: json.NewDecoder(src), f: f}
	row := f.markRow(by, LatestToday(time.Now()))
	var readErr error
	_, err = store.StageCopy(ctx, tx, "mark", store.StageMarkColumns, func() ([]any, error) {
		for {
			n, get, err := g.next()
			if err != nil {
				readErr = err
				return nil, nil
			}
			if get == nil {
				return nil, nil
			}
			if v := row(n, get); v != nil {
				return v, nil
			}
		}
	})
	if err != nil {
		return store.ImportFile{}, fmt.Errorf("%s: %w", MarksGeoJSON, err)
	}
	if readErr != nil {
		f.problem(g.n, "", "%v", readErr)
	}
	// The rest of the file (after a problem, or the decoder's unread
	// buffer) goes through the hash too: the SHA-256 is of the whole file.
	if _, err := io.Copy(io.Discard, src); err != nil {
		return store.ImportFile{}, fmt.Errorf("%s: %w", MarksGeoJSON, err)
	}
	return store.ImportFile{Name: MarksGeoJSON, SHA256: hex.EncodeToString(sum.Sum(nil)), Rows: g.n}, nil
}

// geoReader walks a FeatureCollection: the object's members as tokens,
// the "features" array's elements decoded one at a time.
type geoReader struct {
	dec *json.Decoder
	f   *csvFile
	// n is the number of features read (a feature's number counts from 1).
	n int64
	// state: 0 before the collection, 1 in "features", 2 done.
	state   int
	sawType bool
}

func delim(t json.Token, d rune) bool { v, ok := t.(json.Delim); return ok && rune(v) == d }

// next returns the next feature's number and a getter of its fields (the
// properties, and lat and lon from its geometry); nil at the end. An
// error is a file that is not a FeatureCollection as RFC 7946 writes it.
func (g *geoReader) next() (int64, func(string) string, error) {
	for {
		switch g.state {
		case 0:
			t, err := g.dec.Token()
			if err != nil {
				return 0, nil, fmt.Errorf("not JSON: %v", err)
			}
			if !delim(t, '{') {
				return 0, nil, errors.New("not a GeoJSON object: the file is one FeatureCollection (RFC 7946 section 3.3)")
			}
			if err := g.members(); err != nil {
				return 0, nil, err
			}
		case 1:
			if !g.dec.More() {
				if _, err := g.dec.Token(); err != nil { // ]
					return 0, nil, fmt.Errorf("not JSON: %v", err)
				}
				if err := g.members(); err != nil {
					return 0, nil, err
				}
				continue
			}
			var ft geoFeature
			if err := g.dec.Decode(&ft); err != nil {
				return 0, nil, fmt.Errorf("feature %d is not JSON: %v", g.n+1, err)
			}
			g.n++
			if get := g.feature(ft); get != nil {
				return g.n, get, nil
			}
		default:
			return 0, nil, nil
		}
	}
}

// members reads the collection's members up to "features" (state 1) or
// its end (state 2).
func (g *geoReader) members() error {
	for g.dec.More() {
		t, err := g.dec.Token()
		if err != nil {
			return fmt.Errorf("not JSON: %v", err)
		}
		key, _ := t.(string)
		switch key {
		case "type":
			var v string
			if err := g.dec.Decode(&v); err != nil || v != "FeatureCollection" {
				return fmt.Errorf("the object's type is %q, not FeatureCollection (RFC 7946 section 3.3)", v)
			}
			g.sawType = true
		case "features":
			t, err := g.dec.Token()
			if err != nil || !delim(t, '[') {
				return errors.New("features is not an array (RFC 7946 section 3.3)")
			}
			g.state = 1
			return nil
		case "crs":
			// RFC 7946 section 4: no crs member; positions are WGS 84
			// longitude and latitude. One naming anything else is refused.
			var v any
			if err := g.dec.Decode(&v); err != nil {
				return fmt.Errorf("not JSON: %v", err)
			}
			if !bytes.Contains(mustJSON(v), []byte("CRS84")) {
				return errors.New("a crs member naming another coordinate system: RFC 7946 (section 4) positions are WGS 84 longitude, latitude; reproject the file")
			}
		default:
			var skip json.RawMessage
			if err := g.dec.Decode(&skip); err != nil {
				return fmt.Errorf("not JSON: %v", err)
			}
		}
	}
	if _, err := g.dec.Token(); err != nil { // }
		return fmt.Errorf("not JSON: %v", err)
	}
	if !g.sawType {
		return errors.New(`the object has no "type": "FeatureCollection" (RFC 7946 section 3.3)`)
	}
	if _, err := g.dec.Token(); !errors.Is(err, io.EOF) {
		return errors.New("more after the FeatureCollection: the file is one object")
	}
	g.state = 2
	return nil
}

func mustJSON(v any) []byte { b, _ := json.Marshal(v); return b }

// feature checks one feature; nil (with problems) if it cannot be a row.
func (g *geoReader) feature(ft geoFeature) func(string) string {
	n, f := g.n, g.f
	if ft.Type != "Feature" {
		f.problem(n, "type", "%q is not a Feature (RFC 7946 section 3.2)", ft.Type)
		return nil
	}
	fields := map[string]string{}
	ok := true
	if len(ft.Properties) > 0 && string(ft.Properties) != "null" {
		dec := json.NewDecoder(bytes.NewReader(ft.Properties))
		dec.UseNumber()
		var props map[string]any
		if err := dec.Decode(&props); err != nil {
			f.problem(n, "properties", "not a JSON object")
			return nil
		}
		for k, v := range props {
			if k == "lat" || k == "lon" {
				f.problem(n, k, "the position is the feature's geometry, not a property")
				ok = false
				continue
			}
			if !slices.Contains(geoProperties, k) {
				f.problem(n, k, "unknown property %q (the properties are %s)", k, strings.Join(geoProperties, ", "))
				ok = false
				continue
			}
			switch v := v.(type) {
			case nil:
			case string:
				fields[k] = v
			case json.Number:
				fields[k] = v.String()
			default:
				f.problem(n, k, "a property's value is a string (or a number, or null), as marks.csv's field is")
				ok = false
			}
		}
	}
	lat, lon, gok := g.point(ft.Geometry)
	if !gok || !ok {
		return nil
	}
	if lat != "" {
		fields["lat"], fields["lon"] = lat, lon
	}
	return func(c string) string { return strings.TrimSpace(fields[c]) }
}

// point reads a Point geometry: "coordinates" one position [lon, lat]
// (RFC 7946 sections 3.1.1 and 3.1.2). A null geometry is a mark without
// a position (section 3.2). A third number, an altitude, is refused: a
// mark's height never comes from a position's altitude.
func (g *geoReader) point(raw json.RawMessage) (string, string, bool) {
	n, f := g.n, g.f
	if len(raw) == 0 || string(raw) == "null" {
		return "", "", true
	}
	var geom struct {
		Type        string          `json:"type"`
		Coordinates json.RawMessage `json:"coordinates"`
	}
	if err := json.Unmarshal(raw, &geom); err != nil {
		f.problem(n, "geometry", "not a GeoJSON geometry object")
		return "", "", false
	}
	if geom.Type != "Point" {
		f.problem(n, "geometry", "a %s: a mark is a Point (RFC 7946 section 3.1.2)", geom.Type)
		return "", "", false
	}
	var pos []json.Number
	dec := json.NewDecoder(bytes.NewReader(geom.Coordinates))
	dec.UseNumber()
	if err := dec.Decode(&pos); err != nil {
		f.problem(n, "geometry", "a Point's coordinates are one position, an array of numbers [longitude, latitude] (RFC 7946 section 3.1.1)")
		return "", "", false
	}
	switch {
	case len(pos) < 2:
		f.problem(n, "geometry", "a position has two numbers, [longitude, latitude] (RFC 7946 section 3.1.1); this one has %d", len(pos))
		return "", "", false
	case len(pos) > 2:
		f.problem(n, "geometry", "a third number in the position (an altitude, RFC 7946 section 3.1.1) is refused: a mark's height is never taken from a position; give [longitude, latitude] and the height in heights.csv")
		return "", "", false
	}
	lon, err1 := strconv.ParseFloat(pos[0].String(), 64)
	lat, err2 := strconv.ParseFloat(pos[1].String(), 64)
	switch {
	case err1 != nil || err2 != nil || math.IsInf(lon, 0) || math.IsInf(lat, 0):
		f.problem(n, "geometry", "the position %s is not two numbers of decimal degrees", geom.Coordinates)
		return "", "", false
	case math.Abs(lat) > 90 && math.Abs(lon) <= 90 && math.Abs(lat) <= 180:
		f.problem(n, "geometry", "latitude %s is outside -90 to 90 degrees: a position is [longitude, latitude], longitude first (RFC 7946 section 3.1.1); are they swapped?", pos[1])
		return "", "", false
	case math.Abs(lat) > 90:
		f.problem(n, "geometry", "latitude %s is outside -90 to 90 degrees", pos[1])
		return "", "", false
	case math.Abs(lon) > 180:
		f.problem(n, "geometry", "longitude %s is outside -180 to 180 degrees", pos[0])
		return "", "", false
	}
	return pos[1].String(), pos[0].String(), true
}
