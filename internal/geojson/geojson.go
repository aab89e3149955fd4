// Package geojson writes RFC 7946 GeoJSON (Butler et al., "The GeoJSON
// Format", IETF RFC 7946, 2016): one FeatureCollection of Point features,
// written feature by feature to an io.Writer, so that a collection of any
// size is never held in memory.
//
// What the writer keeps to, by section of RFC 7946:
//
//   - §3.3: the top level is an object of type "FeatureCollection" with a
//     member "features", an array of Feature objects;
//   - §3.2: each Feature has "type", "geometry" (a Point, or null for an
//     unlocated feature) and "properties" (an object);
//   - §3.1.1, §4: a position is [longitude, latitude] in decimal degrees
//     on WGS 84, longitude first, with no altitude, longitude in -180 to
//     180 and latitude in -90 to 90 (a position out of range is refused);
//   - §4: no "crs" member (the 2008 specification's crs was removed);
//   - §11.2: coordinates are rounded to Decimals places (7: 1e-7 degree is
//     at most 1.1 cm on the ground, finer than any position a register of
//     benchmarks keeps for finding a mark; §11.2 says 6 places are about
//     10 cm).
//
// Property names must be snake_case (lower-case letters, digits and
// underscores, starting with a letter) and unique within a feature; a
// writer refuses anything else, so a collection's names stay stable.
package geojson

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
)

// Decimals is the number of decimal places of a written coordinate.
const Decimals = 7

// Property is one named value of a feature's properties, written in the
// order given. Value is anything encoding/json encodes; nil is null.
type Property struct {
	Name  string
	Value any
}

// Feature is one feature: a Point at Lon, Lat, or a null geometry when
// Lon or Lat is nil.
type Feature struct {
	Lon, Lat   *float64
	Properties []Property
}

// Writer writes one FeatureCollection. Write each feature, then Close.
type Writer struct {
	w      io.Writer
	indent string
	n      int
	closed bool
	err    error
	buf    bytes.Buffer
	ind    bytes.Buffer
}

// NewWriter starts a FeatureCollection on w. With indent "" each feature is
// one line; otherwise the collection is indented by indent per level, as
// json.MarshalIndent(v, "", indent) would write it.
func NewWriter(w io.Writer, indent string) *Writer {
	return &Writer{w: w, indent: indent}
}

// Count is the number of features written.
func (g *Writer) Count() int { return g.n }

// Write writes one feature; an error names the feature by its number
// (from 1) and what is wrong with it, and stops the writer.
func (g *Writer) Write(f Feature) error {
	if g.err != nil {
		return g.err
	}
	if g.closed {
		return errors.New("geojson: write after close")
	}
	g.buf.Reset()
	if err := appendFeature(&g.buf, f); err != nil {
		g.err = fmt.Errorf("geojson: feature %d: %w", g.n+1, err)
		return g.err
	}
	var head string
	switch {
	case g.n == 0 && g.indent == "":
		head = `{"type":"FeatureCollection","features":[` + "\n"
	case g.n == 0:
		head = "{\n" + g.indent + `"type": "FeatureCollection",` + "\n" + g.indent + `"features": [` + "\n" + g.indent + g.indent
	case g.indent == "":
		head = ",\n"
	default:
		head = ",\n" + g.indent + g.indent
	}
	body := g.buf.Bytes()
	if g.indent != "" {
		g.ind.Reset()
		if err := json.Indent(&g.ind, body, g.indent+g.indent, g.indent); err != nil {
			g.err = fmt.Errorf("geojson: feature %d: %w", g.n+1, err)
			return g.err
		}
		body = g.ind.Bytes()
	}
	if _, err := io.WriteString(g.w, head); err != nil {
		g.err = err
		return err
	}
	if _, err := g.w.Write(body); err != nil {
		g.err = err
		return err
	}
	g.n++
	return nil
}

// Close ends the collection (an empty one if no feature was written) with
// a final line end. It does not close the underlying writer.
func (g *Writer) Close() error {
	if g.err != nil {
		return g.err
	}
	if g.closed {
		return nil
	}
	g.closed = true
	var tail string
	switch {
	case g.n == 0 && g.indent == "":
		tail = `{"type":"FeatureCollection","features":[]}` + "\n"
	case g.n == 0:
		tail = "{\n" + g.indent + `"type": "FeatureCollection",` + "\n" + g.indent + `"features": []` + "\n}\n"
	case g.indent == "":
		tail = "\n]}\n"
	default:
		tail = "\n" + g.indent + "]\n}\n"
	}
	_, err := io.WriteString(g.w, tail)
	return err
}

// appendFeature writes f as compact JSON.
func appendFeature(b *bytes.Buffer, f Feature) error {
	b.WriteString(`{"type":"Feature","geometry":`)
	switch {
	case f.Lon == nil && f.Lat == nil:
		b.WriteString("null")
	case f.Lon == nil || f.Lat == nil:
		return errors.New("a position needs both longitude and latitude")
	default:
		lon, lat := *f.Lon, *f.Lat
		if math.IsNaN(lon) || lon < -180 || lon > 180 {
			return fmt.Errorf("longitude %v is outside -180 to 180 degrees (RFC 7946 §4)", lon)
		}
		if math.IsNaN(lat) || lat < -90 || lat > 90 {
			return fmt.Errorf("latitude %v is outside -90 to 90 degrees (RFC 7946 §4)", lat)
		}
		b.WriteString(`{"type":"Point","coordinates":[`)
		b.WriteString(Coordinate(lon))
		b.WriteByte(',')
		b.WriteString(Coordinate(lat))
		b.WriteString("]}")
	}
	b.WriteString(`,"properties":{`)
	for i, p := range f.Properties {
		if !SnakeCase(p.Name) {
			return fmt.Errorf("property name %q is not snake_case", p.Name)
		}
		for _, q := range f.Properties[:i] {
			if q.Name == p.Name {
				return fmt.Errorf("property %q given twice", p.Name)
			}
		}
		if i > 0 {
			b.WriteByte(',')
		}
		b.WriteByte('"')
		b.WriteString(p.Name)
		b.WriteString(`":`)
		v, err := json.Marshal(p.Value)
		if err != nil {
			return fmt.Errorf("property %q: %w", p.Name, err)
		}
		b.Write(v)
	}
	b.WriteString("}}")
	return nil
}

// Coordinate is v in degrees rounded to Decimals places, as JSON writes a
// number (the shortest form that reads back as the rounded value; never
// an exponent, which JSON allows but some readers do not expect).
func Coordinate(v float64) string {
	p := math.Pow10(Decimals)
	r := math.Round(v*p) / p
	if r == 0 {
		r = 0 // no "-0"
	}
	return strconv.FormatFloat(r, 'f', -1, 64)
}

// SnakeCase says whether name is a property name a writer accepts:
// lower-case ASCII letters, digits and underscores, starting with a
// letter, not ending with an underscore and with no two underscores
// together.
func SnakeCase(name string) bool {
	if name == "" || name[0] < 'a' || name[0] > 'z' || name[len(name)-1] == '_' {
		return false
	}
	for i := 0; i < len(name); i++ {
		c := name[i]
		switch {
		case c >= 'a' && c <= 'z', c >= '0' && c <= '9':
		case c == '_' && name[i-1] != '_':
		default:
			return false
		}
	}
	return true
}
