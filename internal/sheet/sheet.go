// Package sheet renders a mark's datasheet: one page (or more) that tells
// a crew how to find a mark, what it looks like, its heights in force in
// the unit of the job, its condition history, every doubt about it, and
// the register state the sheet was made from. The layout and headings are
// cairn's own.
//
// The package is pure: it takes a Data already read from the register
// (register.Datasheets) and formatted (heights as strings, exactly
// rounded), and writes HTML (html/template, a print stylesheet, no
// script) or PDF (codeberg.org/go-pdf/fpdf, with an embedded DejaVu Sans
// so that any Latin, Greek or Cyrillic text is written as given). The same
// Data gives the same bytes: the PDF's creation date is the register
// state's time, never the clock.
package sheet

import (
	"math"
	"time"
)

// Data is everything one sheet shows, as the register holds it.
type Data struct {
	Designation string
	Aliases     []string
	Kind        string // the kind of mark (store.Mark.Type)
	Setting     string
	Stamping    string
	Description string
	Directions  string
	// Lat and Lon are the approximate position in decimal degrees; nil
	// when the register has none.
	Lat, Lon       *float64
	PositionSource string
	// Retired says, in words, that the mark is retired ("" while in use).
	Retired  string
	Replaces string
	// Neighbours are the marks near this one for the sketch, nearest
	// first.
	Neighbours []Neighbour
	// Unit is the unit every height is shown in (m, ft or usft).
	Unit    string
	Heights []Height
	// Conditions are the condition reports, latest first.
	Conditions []Condition
	// LastRecovered is the latest date the mark was reported found in
	// good order (a good or reset report); nil if never.
	LastRecovered *time.Time
	// Doubts are the loud warnings (register.Doubt.Warning), each once.
	Doubts []string
	Photos []Photo
	State  State
	// Cautions are the cautions every height cairn gives out carries, one
	// per line.
	Cautions []string
}

// Neighbour is a nearby mark drawn on the sketch.
type Neighbour struct {
	Designation string
	Lat, Lon    float64
	DistanceM   float64
}

// Height is one height in force on one datum.
type Height struct {
	Datum string
	// Value is the height in the sheet's unit, exactly converted and
	// rounded (units.ConvertExact); Published is the value as published
	// with its unit, when the unit differs.
	Value     string
	Published string
	Version   int
	Class     string
	// Provenance is how the version was made (its kind: adjustment,
	// published, correction, ...).
	Provenance  string
	InForceFrom time.Time
	// Source is the citation of a height set by hand, or the adjustment
	// it came from.
	Source string
	// Withdrawn is true for a datum whose version in force is a
	// withdrawal (no value).
	Withdrawn bool
}

// Condition is one condition report.
type Condition struct {
	ObservedOn time.Time
	Condition  string
	Note       string
	By         string
}

// Photo is a photograph of a condition report, listed by its file name
// and SHA-256.
type Photo struct {
	ObservedOn time.Time
	View       string
	FileName   string
	MediaType  string
	Bytes      int64
	SHA256     string
	// Content is the image (JPEG or PNG, as MediaType says), drawn on the
	// sheet when given; nil to list the photograph only.
	Content []byte
}

// State is the register state the sheet was made from: its latest commit
// in the evidence chain (what `cairn audit head` states and `cairn audit
// verify --against` proves), and the instant the heights are as of.
type State struct {
	Seq         int64
	Head        string // hex SHA-256 of the latest commit
	CommittedAt time.Time
	// AsOf is the instant asked about (--as-of); nil for now.
	AsOf *time.Time
	// KnownAt is the instant of the register's knowledge (--known-at):
	// the heights and reports it had by then; nil for all it knows.
	KnownAt *time.Time
}

// Time is the sheet's own time: the state's latest commit, the moment
// the sheet describes (the PDF's creation date).
func (s State) Time() time.Time { return s.CommittedAt.UTC() }

// point is a position on the sketch, in metres east and north of the
// sheet's mark.
type point struct {
	Label string
	E, N  float64
}

// sketchRadiusM is the distance the sketch reaches at least, so that a
// mark alone is not drawn at an absurd scale.
const sketchRadiusM = 100.0

// earthRadiusM is the mean radius R1 of GRS 80, the sphere of the
// register's distances (store.MeanEarthRadiusM; Moritz 2000).
const earthRadiusM = 6371008.8

// sketch projects the neighbours on a local plane about the mark
// (equirectangular, good to a fraction of a percent over a few
// kilometres: common practice):
//
//	E = R Δλ cos φ0,  N = R Δφ
//
// and returns them with the half-width in metres of the square to draw,
// rounded up to a round number for the scale bar. ok is false when the
// mark has no position.
func (d Data) sketch() (pts []point, halfM float64, ok bool) {
	if d.Lat == nil || d.Lon == nil {
		return nil, 0, false
	}
	lat0, lon0 := *d.Lat*math.Pi/180, *d.Lon*math.Pi/180
	halfM = sketchRadiusM
	for _, n := range d.Neighbours {
		e := earthRadiusM * (n.Lon*math.Pi/180 - lon0) * math.Cos(lat0)
		no := earthRadiusM * (n.Lat*math.Pi/180 - lat0)
		pts = append(pts, point{Label: n.Designation, E: e, N: no})
		halfM = max(halfM, math.Abs(e)*1.15, math.Abs(no)*1.15)
	}
	return pts, roundUp(halfM), true
}

// roundUp is the smallest 1, 2 or 5 times a power of ten at least v.
func roundUp(v float64) float64 {
	p := math.Pow(10, math.Floor(math.Log10(v)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*p >= v {
			return m * p
		}
	}
	return 10 * p
}
