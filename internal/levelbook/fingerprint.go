package levelbook

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"hash"
	"io"
	"strconv"
	"strings"
)

// ObservationsVersion is the first line of the canonical form of a book's
// observations (Observations); a change of the rules gets a new version.
const ObservationsVersion = "cairn-observations-v1"

// Observations returns the canonical form of the book's observations: what
// a run is identified by, whatever its bytes (docs/runs.md, "The
// observations fingerprint", gives the rules for recomputing it). It is
// UTF-8 text, lines ended by LF:
//
//	cairn-observations-v1
//	unit=<m|ft|usft>
//	reading=<mean|middle|->        "-" when no sighting has three wires
//	<one line per sighting, in field order>
//
// and each sighting's line is eight fields separated by one TAB:
//
//	point  sight  kind  upper  middle  lower  distance-from  distance
//
// point is the name as parsed, with "%", TAB, CR and LF written %25, %09,
// %0D and %0A; sight is BS, IS or FS; kind is "tp" for a turning point,
// "mark" for a mark; upper and lower are the stadia wires (empty unless
// all three wires are booked); distance-from is none, stadia or measured;
// distance is the sight length (empty when none). Numbers are the parsed
// values written as the shortest decimal that reads back as the same
// IEEE-754 double, without exponent, trailing zeros or trailing point,
// negative zero as 0 (strconv.FormatFloat(v, 'f', -1, 64)).
//
// Line numbers, notes, comments, column order, white space, line ends and
// the metadata that do not change what the readings mean (run name, date,
// crew, instrument, rod, datum, class, x- keys) are left out. The stadia
// factor and constant enter through the stadia distances they give, the
// turning-point pattern through each sighting's kind.
//
// Every field of a sighting that can change the observations belongs
// here: a new one is added to this function, with a new version.
func (b *Book) Observations() []byte {
	var buf bytes.Buffer
	b.writeObservations(&buf)
	return buf.Bytes()
}

// writeObservations writes Observations' text to w, a sighting at a time.
func (b *Book) writeObservations(w io.Writer) {
	bw := bufio.NewWriterSize(w, 64<<10)
	threeWire := false
	for i := range b.Sightings {
		threeWire = threeWire || b.Sightings[i].ThreeWire
	}
	bw.WriteString(observationsHead(b.Meta, threeWire))
	var line []byte
	for i := range b.Sightings {
		line = appendObservation(line[:0], &b.Sightings[i])
		bw.Write(line)
	}
	bw.Flush()
}

// observationsHead is the first three lines of Observations' text.
func observationsHead(m Meta, threeWire bool) string {
	reading := "-"
	if threeWire {
		reading = string(m.Reading)
		if reading == "" {
			reading = string(DefaultReading)
		}
	}
	return ObservationsVersion + "\n" + "unit=" + string(m.Unit) + "\n" + "reading=" + reading + "\n"
}

// appendObservation appends the line of Observations' text of sighting s.
func appendObservation(b []byte, s *Sighting) []byte {
	kind := "mark"
	if s.TurningPoint {
		kind = "tp"
	}
	if strings.ContainsAny(s.Point, "%\t\r\n") {
		b = append(b, pointEscaper.Replace(s.Point)...)
	} else {
		b = append(b, s.Point...)
	}
	b = append(b, '\t')
	b = append(b, s.Sight...)
	b = append(b, '\t')
	b = append(b, kind...)
	b = append(b, '\t')
	if s.ThreeWire {
		b = appendCanonicalNumber(b, s.Upper)
	}
	b = append(b, '\t')
	b = appendCanonicalNumber(b, s.Middle)
	b = append(b, '\t')
	if s.ThreeWire {
		b = appendCanonicalNumber(b, s.Lower)
	}
	b = append(b, '\t')
	if s.HasDistance() {
		b = append(b, s.DistanceFrom...)
		b = append(b, '\t')
		b = appendCanonicalNumber(b, s.Distance)
	} else {
		b = append(b, DistanceNone...)
		b = append(b, '\t')
	}
	return append(b, '\n')
}

// ObservationsSHA256 is the SHA-256 of the book's canonical observations
// (Observations): the fingerprint that tells two books of the same field
// work apart from two books of different work. The text is hashed as it
// is written, never held. A book read by Summarize has it from its
// reading.
func (b *Book) ObservationsSHA256() [sha256.Size]byte {
	if b.Sightings == nil && b.observations != nil {
		return *b.observations
	}
	h := sha256.New()
	b.writeObservations(h)
	var sum [sha256.Size]byte
	h.Sum(sum[:0])
	return sum
}

// observationsHasher hashes Observations' text a sighting at a time,
// before it is known whether any sighting has three wires (which the
// head says): the sightings' lines are hashed after each of the two
// heads there can be, and sum takes the one that holds.
type observationsHasher struct {
	lines     []byte
	dash, all hash.Hash // after "reading=-", after "reading=<mode>"
	threeWire bool
}

func newObservationsHasher(m Meta) *observationsHasher {
	h := &observationsHasher{lines: make([]byte, 0, 64<<10), dash: sha256.New(), all: sha256.New()}
	h.dash.Write([]byte(observationsHead(m, false)))
	h.all.Write([]byte(observationsHead(m, true)))
	return h
}

func (h *observationsHasher) add(s *Sighting) {
	h.threeWire = h.threeWire || s.ThreeWire
	h.lines = appendObservation(h.lines, s)
	if len(h.lines) >= 60<<10 {
		h.flush()
	}
}

func (h *observationsHasher) flush() {
	h.dash.Write(h.lines)
	h.all.Write(h.lines)
	h.lines = h.lines[:0]
}

// sum is the fingerprint of the sightings added.
func (h *observationsHasher) sum() [sha256.Size]byte {
	h.flush()
	which := h.dash
	if h.threeWire {
		which = h.all
	}
	var sum [sha256.Size]byte
	which.Sum(sum[:0])
	return sum
}

var pointEscaper = strings.NewReplacer("%", "%25", "\t", "%09", "\r", "%0D", "\n", "%0A")

// canonicalNumber writes v as the shortest decimal that reads back as v,
// without exponent; negative zero is 0.
func canonicalNumber(v float64) string {
	return string(appendCanonicalNumber(nil, v))
}

// appendCanonicalNumber appends canonicalNumber(v) to b.
func appendCanonicalNumber(b []byte, v float64) []byte {
	if v == 0 {
		return append(b, '0')
	}
	return strconv.AppendFloat(b, v, 'f', -1, 64)
}
