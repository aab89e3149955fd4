// Package levelbook reads cairn's level-book format: a CSV file of
// sightings, one per row, with the run described in `# key: value` comments
// before the header row. The format is described in docs/levelbook.md.
//
// Parse checks everything that can be checked from the book alone: every
// number, the order of the wires, the stadia distance against a measured
// one, and the shape of the run (a setup is one backsight, any number of
// intermediate sights and one foresight; each backsight is taken on the
// point of the foresight before it; the run starts and ends on a mark; a
// spot height, declared by the `kind` column, takes intermediate sights
// only). A
// book that parses is a valid sequence of setups; reducing it is the work of
// package reduce. Readings and distances stay in the book's unit.
package levelbook

import (
	"crypto/sha256"
	"fmt"

	"cairn/internal/standards"
	"cairn/internal/units"
)

// Sight is the kind of a sighting.
type Sight string

// The kinds of sighting.
const (
	Backsight    Sight = "BS" // to a point of known height: begins a setup
	Intermediate Sight = "IS" // to a side point: does not carry the line
	Foresight    Sight = "FS" // to the next point of the line: ends a setup
)

// ReadingMode says which reading of a three-wire sighting is the rod
// reading.
type ReadingMode string

// The reading modes.
const (
	// ReadMean takes the mean of the three wires when all three are booked,
	// else the middle wire (the default). The mean of the three wires is the
	// rod reading of three-wire leveling (common practice; Mahun,
	// "Elevations", ch. G).
	ReadMean ReadingMode = "mean"
	// ReadMiddle always takes the middle wire; upper and lower serve only
	// for the stadia distance and the three-wire check.
	ReadMiddle ReadingMode = "middle"
)

// Default values of the metadata.
const (
	DefaultTurningPoints = "TP*"
	DefaultReading       = ReadMean
)

// Book is a parsed level book.
type Book struct {
	// Name is the file name the book was read from, as given to Parse; it
	// prefixes every error.
	Name string `json:"name"`
	// Meta describes the run.
	Meta Meta `json:"meta"`
	// HeaderLine is the line number of the header row.
	HeaderLine int `json:"header_line"`
	// Columns are the header's column names, in file order, lower case.
	Columns []string `json:"columns"`
	// Sightings are the rows of the book in field order (none in a book
	// read by Summarize).
	Sightings []Sighting `json:"sightings"`
	// Points are the points the book sights, in the order it first
	// sights them; Count is its number of sightings.
	Points []Point `json:"-"`
	Count  int     `json:"-"`

	size          int                // of the bytes read
	turningPoints []string           // compiled Meta.TurningPoints
	observations  *[sha256.Size]byte // the fingerprint, in a book read by Summarize
}

// Point is a point a book sights, as the book's sightings describe it:
// its name, the line first sighting it, whether it is a turning point or
// a spot height (the same on every row, or the book is refused), and
// whether a backsight or foresight is on it (it carries the line).
type Point struct {
	Name         string
	Line         int
	TurningPoint bool
	Spot         bool
	Carries      bool
}

// Mark says whether the point is a mark: neither a turning point nor a
// spot height.
func (p Point) Mark() bool { return !p.TurningPoint && !p.Spot }

// Meta is the description of a run from the `# key: value` comments before
// the header row.
type Meta struct {
	Run        string `json:"run,omitempty"`        // name of the run
	Date       string `json:"date,omitempty"`       // YYYY-MM-DD
	Crew       string `json:"crew,omitempty"`       // who observed and booked
	Instrument string `json:"instrument,omitempty"` // level, with serial number
	Rod        string `json:"rod,omitempty"`        // rod or rods
	Datum      string `json:"datum,omitempty"`      // vertical datum of the heights
	// Unit is the unit of every reading, distance and stadia constant in the
	// book (key `units`, required).
	Unit units.Unit `json:"unit"`
	// StadiaFactor multiplies the stadia interval (upper − lower); default
	// 100 (standards.StadiaFactor).
	StadiaFactor float64 `json:"stadia_factor"`
	// StadiaConstant is added to the stadia distance, in the book's unit;
	// default 0.
	StadiaConstant float64 `json:"stadia_constant"`
	// Class is the accuracy class the run is meant to meet; empty if the
	// book names none.
	Class standards.Class `json:"class,omitempty"`
	// Standards names the standards profile that judges the run: a
	// built-in profile (standards.Builtins) or a profile file, a relative
	// path read from the book's directory; empty for the default profile.
	// The book names it; reading a file is the caller's (standards.Resolve).
	Standards string `json:"standards,omitempty"`
	// Reading says which reading is the rod reading; default mean.
	Reading ReadingMode `json:"reading"`
	// TurningPoints is the turning-point name pattern as written: one or
	// more shell patterns (`*`, `?`, `[...]`) separated by commas, matched
	// case-insensitively; default "TP*".
	TurningPoints string `json:"turning_points"`
	// Extra holds the `x-` keys, kept and otherwise ignored.
	Extra map[string]string `json:"extra,omitempty"`
	// Lines gives the line number of each key that was written.
	Lines map[string]int `json:"-"`
}

// Sighting is one row of the book: one rod reading on one point. Readings
// and distances are in the book's unit.
type Sighting struct {
	// Line is the 1-based line number of the row in the file.
	Line int `json:"line"`
	// Point is the name of the point sighted.
	Point string `json:"point"`
	// Sight is BS, IS or FS.
	Sight Sight `json:"sight"`
	// TurningPoint says whether Point matches the turning-point pattern;
	// every other point is a mark.
	TurningPoint bool `json:"turning_point"`
	// Spot says the row's `kind` cell declares Point a spot height: not a
	// mark, not a turning point, sighted by intermediate sights only, given
	// a height and never looked up in the register.
	Spot bool `json:"spot"`
	// Upper, Middle and Lower are the wire readings. Upper and Lower are
	// meaningful only when ThreeWire is set.
	Upper     float64 `json:"upper"`
	Middle    float64 `json:"middle"`
	Lower     float64 `json:"lower"`
	ThreeWire bool    `json:"three_wire"`
	// Distance is the sight length: the booked distance if there is one,
	// else the stadia distance factor × (upper − lower) + constant.
	// Meaningful only when DistanceFrom is not DistanceNone.
	Distance     float64      `json:"distance"`
	DistanceFrom DistanceFrom `json:"distance_from"`
	// Note is the row's free note.
	Note string `json:"note,omitempty"`
	// Raw holds the numeric cells exactly as written, for keeping the
	// readings verbatim.
	Raw RawCells `json:"raw"`
}

// RawCells are the numeric cells of a row as written in the file (trimmed);
// empty when the cell was empty or the column absent.
type RawCells struct {
	Upper    string `json:"upper"`
	Middle   string `json:"middle"`
	Lower    string `json:"lower"`
	Distance string `json:"distance"`
}

// DistanceFrom says where a sighting's distance comes from.
type DistanceFrom string

// Sources of a sight distance.
const (
	DistanceNone     DistanceFrom = "none"     // no distance: middle wire only, no distance cell
	DistanceStadia   DistanceFrom = "stadia"   // factor × (upper − lower) + constant
	DistanceMeasured DistanceFrom = "measured" // the distance cell (a digital level); stadia agreed if booked
)

// HasDistance reports whether the sighting has a sight length.
func (s Sighting) HasDistance() bool { return s.DistanceFrom != DistanceNone && s.DistanceFrom != "" }

// Reading returns the rod reading in the book's unit under mode: the mean
// of the three wires when mode is ReadMean and all three are booked, else
// the middle wire.
//
//	mean = (upper + middle + lower) / 3
func (s Sighting) Reading(mode ReadingMode) float64 {
	if mode != ReadMiddle && s.ThreeWire {
		return (s.Upper + s.Middle + s.Lower) / 3
	}
	return s.Middle
}

// Error is a fault in a level book: the file, the 1-based line (0 when the
// fault is in the file as a whole), the field (column or metadata key; empty
// when the fault is in the row as a whole) and what is wrong. It formats as
//
//	north-loop.csv:14: field "upper": not a number "4.3x"
//
// The book is bad input; nothing made from it should be kept.
type Error struct {
	File  string
	Line  int
	Field string
	Msg   string
}

// Error formats the fault as file:line: field "name": message.
func (e *Error) Error() string {
	s := e.File
	if e.Line > 0 {
		s += fmt.Sprintf(":%d", e.Line)
	}
	s += ": "
	if e.Field != "" {
		s += fmt.Sprintf("field %q: ", e.Field)
	}
	return s + e.Msg
}
