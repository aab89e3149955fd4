package levelbook

import (
	"bufio"
	"bytes"
	"crypto/sha256"
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
	reading := "-"
	if threeWire {
		reading = string(b.Meta.Reading)
		if reading == "" {
			reading = string(DefaultReading)
		}
	}
	bw.WriteString(ObservationsVersion + "\n")
	bw.WriteString("unit=" + string(b.Meta.Unit) + "\n")
	bw.WriteString("reading=" + reading + "\n")
	var num []byte
	number := func(v float64) {
		num = appendCanonicalNumber(num[:0], v)
		bw.Write(num)
	}
	for i := range b.Sightings {
		s := &b.Sightings[i]
		kind := "mark"
		if s.TurningPoint {
			kind = "tp"
		}
		pointEscaper.WriteString(bw, s.Point)
		bw.WriteByte('\t')
		bw.WriteString(string(s.Sight))
		bw.WriteByte('\t')
		bw.WriteString(kind)
		bw.WriteByte('\t')
		if s.ThreeWire {
			number(s.Upper)
		}
		bw.WriteByte('\t')
		number(s.Middle)
		bw.WriteByte('\t')
		if s.ThreeWire {
			number(s.Lower)
		}
		bw.WriteByte('\t')
		if s.HasDistance() {
			bw.WriteString(string(s.DistanceFrom))
			bw.WriteByte('\t')
			number(s.Distance)
		} else {
			bw.WriteString(string(DistanceNone))
			bw.WriteByte('\t')
		}
		bw.WriteByte('\n')
	}
	bw.Flush()
}

// ObservationsSHA256 is the SHA-256 of the book's canonical observations
// (Observations): the fingerprint that tells two books of the same field
// work apart from two books of different work. The text is hashed as it
// is written, never held.
func (b *Book) ObservationsSHA256() [sha256.Size]byte {
	h := sha256.New()
	b.writeObservations(h)
	var sum [sha256.Size]byte
	h.Sum(sum[:0])
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
