package levelbook

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"time"
	"unicode/utf8"

	"cairn/internal/standards"
	"cairn/internal/suggest"
	"cairn/internal/units"
)

// Columns are the column names the header row may use, in the order the
// format describes them.
var Columns = []string{"point", "kind", "sight", "upper", "middle", "lower", "distance", "note"}

// KindSpot is the value of the `kind` cell that declares a spot height: a
// point that is neither a mark nor a turning point (a floor level, an
// invert, a ground shot), sighted by intermediate sights only.
const KindSpot = "spot"

// required columns.
var requiredColumns = []string{"point", "sight", "middle"}

// Keys are the metadata keys a book may set, in the order the format
// describes them. Keys starting with "x-" are also allowed and kept.
var Keys = []string{"run", "date", "crew", "instrument", "rod", "units", "stadia-factor", "stadia-constant", "datum", "class", "standards", "reading", "turning-points"}

// metaLine matches a metadata comment: "# key: value".
var metaLine = sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(`^#\s*([A-Za-z][A-Za-z0-9_-]*)\s*:(.*)$`) })

// ReadFile reads and parses the level book at path; the path as given
// names the book in errors. A file that cannot be read is an *Error too.
func ReadFile(name string) (*Book, error) {
	data, err := ReadBytes(name)
	if err != nil {
		return nil, err
	}
	return Parse(name, data)
}

// MaxBookBytes is the largest field book cairn reads: 32 MiB, some 300,000
// setups, fifteen times a long day's work of 20,000. The book is kept
// byte for byte in the register, so it is read whole; the cap bounds the
// memory a command needs (docs/reliability.md).
const MaxBookBytes = 32 << 20

// ReadBytes reads the bytes of the level book at path, refusing a book
// larger than MaxBookBytes before reading more than that (a file that grows
// while it is read, or a pipe, is stopped at the cap too). Errors are
// *Error.
func ReadBytes(name string) ([]byte, error) {
	f, err := os.Open(name)
	if err != nil {
		var pe *os.PathError
		if errors.As(err, &pe) {
			err = pe.Err
		}
		return nil, &Error{File: name, Msg: "cannot read the book: " + err.Error()}
	}
	defer f.Close()
	tooBig := func(size int64) error {
		return &Error{File: name, Msg: fmt.Sprintf("the book is %s; a field book may be at most %d MiB (split the work into several runs)",
			sizeText(size), MaxBookBytes>>20)}
	}
	// One buffer, of the file's size or else of the cap (its untouched
	// pages cost no memory), so reading never holds two copies.
	size := int64(MaxBookBytes)
	if fi, err := f.Stat(); err == nil && fi.Mode().IsRegular() {
		if fi.Size() > MaxBookBytes {
			return nil, tooBig(fi.Size())
		}
		size = fi.Size()
	}
	buf := make([]byte, size+1)
	n, err := io.ReadFull(f, buf)
	switch {
	case err == nil:
		// The buffer filled: the book is longer than measured.
		if size >= MaxBookBytes {
			return nil, tooBig(-1)
		}
		rest, err := io.ReadAll(io.LimitReader(f, MaxBookBytes-int64(n)+1))
		if err != nil {
			return nil, &Error{File: name, Msg: "cannot read the book: " + err.Error()}
		}
		if buf = append(buf[:n], rest...); len(buf) > MaxBookBytes {
			return nil, tooBig(-1)
		}
		return buf, nil
	case errors.Is(err, io.ErrUnexpectedEOF), errors.Is(err, io.EOF):
		return buf[:n], nil
	}
	return nil, &Error{File: name, Msg: "cannot read the book: " + err.Error()}
}

// sizeText writes a size in MiB; -1 is "larger than the cap".
func sizeText(size int64) string {
	if size < 0 {
		return fmt.Sprintf("more than %d MiB", MaxBookBytes>>20)
	}
	return fmt.Sprintf("%.1f MiB", float64(size)/(1<<20))
}

// Parse parses the level book data; name (usually the file's path) prefixes
// every error. The error, if any, is an *Error naming the line and field of
// the first fault found.
func Parse(name string, data []byte) (*Book, error) {
	sc, err := NewScanner(name, data)
	if err != nil {
		return nil, err
	}
	sc.p.book.Sightings = make([]Sighting, 0, bytes.Count(data, []byte("\n"))+1)
	for sc.Next() {
		sc.p.book.Sightings = append(sc.p.book.Sightings, *sc.Sighting())
	}
	if err := sc.Err(); err != nil {
		return nil, err
	}
	return sc.Book(), nil
}

// Summarize reads the level book data as Parse does, with the same checks
// and errors, but keeps none of its sightings: the book it returns has
// its metadata, its Points, Count and observations fingerprint
// (ObservationsSHA256), and no Sightings. A NewScanner over the same data
// gives the sightings again, one at a time, so that a book of any size
// is read in memory bounded by its number of distinct points.
func Summarize(name string, data []byte) (*Book, error) {
	sc, err := NewScanner(name, data)
	if err != nil {
		return nil, err
	}
	h := newObservationsHasher(sc.Book().Meta)
	for sc.Next() {
		h.add(sc.Sighting())
	}
	if err := sc.Err(); err != nil {
		return nil, err
	}
	b := sc.Book()
	sum := h.sum()
	b.observations = &sum
	return b, nil
}

// Scanner reads a level book's sightings one at a time, in field order,
// making every check of Parse: Next stops at the first fault, and Err then
// names it as Parse would (a fault in a row is reported before a fault in
// the shape of the run found on an earlier row, as Parse checks the shape
// once every row has been read, and no sighting is given after a fault of
// shape).
type Scanner struct {
	p     *parser
	r     *csv.Reader
	cols  map[string]int
	cur   Sighting
	count int
	err   error
	done  bool

	// The shape of the run so far (checkShape, a row at a time).
	shapeErr *Error
	open     int // line of the backsight of the open setup; 0 when none
	lastFS   Sighting
	hasFS    bool
	points   map[string]int // index in book.Points
	again    bool           // Rescan: the shape was checked already
	size     int
}

// NewScanner reads the book's metadata and is ready to read its rows; an
// error is an *Error (not UTF-8 text, a bad metadata line).
func NewScanner(name string, data []byte) (*Scanner, error) {
	p := &parser{book: &Book{Name: name}}
	size := len(data)
	data = bytes.TrimPrefix(data, []byte("\xEF\xBB\xBF"))
	if !utf8.Valid(data) {
		line := 1 + bytes.Count(data[:firstInvalid(data)], []byte("\n"))
		return nil, p.errorf(line, "", "not UTF-8 text")
	}
	if err := p.parseMeta(data); err != nil {
		return nil, err
	}
	r := csv.NewReader(bytes.NewReader(data))
	r.Comment = '#'
	r.FieldsPerRecord = -1
	r.ReuseRecord = true
	return &Scanner{p: p, r: r, points: map[string]int{}, size: size}, nil
}

// Rescan reads again, a sighting at a time, the bytes data that book
// was read from by Summarize (or Parse): the same sightings, without the
// checks of the run's shape and the table of its points, which were made
// on the first reading. Data of another length is refused; other bytes
// of the same length are the caller's fault.
func (b *Book) Rescan(data []byte) (*Scanner, error) {
	if b.Count == 0 || len(data) != b.size {
		return nil, fmt.Errorf("%s: rescan: not the bytes the book was read from", b.Name)
	}
	sc, err := NewScanner(b.Name, data)
	if err != nil {
		return nil, err
	}
	sc.again = true
	return sc, nil
}

// Book is the book being read: its metadata and header as soon as they
// are read; once Next has returned false with no error, its Points and
// Count too. Its Sightings are not kept.
func (sc *Scanner) Book() *Book { return sc.p.book }

// Sighting is the sighting Next has just read; it is overwritten by the
// next call.
func (sc *Scanner) Sighting() *Sighting { return &sc.cur }

// Err is the first fault found, as an *Error, or nil.
func (sc *Scanner) Err() error {
	if sc.err == nil {
		return nil
	}
	return sc.err
}

// Next reads the next sighting, reporting false at the end of the book
// or at its first fault (see Err).
func (sc *Scanner) Next() bool {
	if sc.done {
		return false
	}
	p := sc.p
	for {
		rec, err := sc.r.Read()
		if err == io.EOF {
			sc.finish()
			return false
		}
		if err != nil {
			var ce *csv.ParseError
			if errors.As(err, &ce) {
				return sc.fail(p.errorf(ce.Line, "", "bad CSV: %v", ce.Err))
			}
			return sc.fail(p.errorf(0, "", "bad CSV: %v", err))
		}
		line, _ := sc.r.FieldPos(0)
		if sc.cols == nil {
			if sc.cols, err = p.parseHeader(line, rec); err != nil {
				return sc.fail(err)
			}
			continue
		}
		s, err := p.parseRow(line, rec, sc.cols)
		if err != nil {
			return sc.fail(err)
		}
		sc.count++
		if sc.again {
			sc.cur = s
			return true
		}
		if sc.shapeErr != nil {
			continue // every row is still read, for a fault of its own
		}
		if err := sc.shape(&s); err != nil {
			sc.shapeErr = err
			continue
		}
		sc.cur = s
		return true
	}
}

func (sc *Scanner) fail(err error) bool {
	sc.err, sc.done = err, true
	return false
}

// finish makes the checks of the book as a whole, once every row is read.
func (sc *Scanner) finish() {
	sc.done = true
	p := sc.p
	switch {
	case sc.again:
		p.book.Count, p.book.size = sc.count, sc.size
	case sc.cols == nil:
		sc.err = p.errorf(0, "", "the book is empty: no header row")
	case sc.count == 0:
		sc.err = p.errorf(p.book.HeaderLine, "", "the book has no sightings after the header row")
	case sc.shapeErr != nil:
		sc.err = sc.shapeErr
	case sc.open > 0:
		sc.err = p.errorf(sc.open, "sight", "the book ends after this backsight: the setup has no foresight")
	case sc.lastFS.TurningPoint:
		sc.err = p.errorf(sc.lastFS.Line, "point", "the run ends on turning point %q; it must end on a mark", sc.lastFS.Point)
	default:
		p.book.Count, p.book.size = sc.count, sc.size
	}
	sc.points = nil
}

// shape checks the sighting s against those before it: the run begins
// with a backsight on a mark; setups are BS, any number of IS, FS; each BS
// is on the point of the FS before it; a point is a spot height on every
// row that sights it, or on none. It keeps the book's Points.
func (sc *Scanner) shape(s *Sighting) *Error {
	p := sc.p
	if len(p.book.Points) == 0 {
		if s.Sight != Backsight {
			return p.errorf(s.Line, "sight", "the run must begin with a backsight, not %s", s.Sight)
		}
		if s.TurningPoint {
			return p.errorf(s.Line, "point", "the run starts on turning point %q; it must start on a mark", s.Point)
		}
	}
	k, seen := sc.points[s.Point]
	if !seen {
		k = len(p.book.Points)
		name := strings.Clone(s.Point)
		sc.points[name] = k
		p.book.Points = append(p.book.Points, Point{Name: name, Line: s.Line, TurningPoint: s.TurningPoint, Spot: s.Spot})
	} else if f := p.book.Points[k]; s.Spot != f.Spot {
		if s.Spot {
			return p.errorf(s.Line, "kind", "%q is declared a spot height here but not on line %d (declare it %s on every row that sights it, or on none)", s.Point, f.Line, KindSpot)
		}
		return p.errorf(s.Line, "kind", "%q is declared a spot height on line %d but not here (declare it %s on every row that sights it, or on none)", s.Point, f.Line, KindSpot)
	}
	switch s.Sight {
	case Backsight:
		if sc.open > 0 {
			return p.errorf(s.Line, "sight", "a second backsight in a row: the setup begun on line %d has no foresight", sc.open)
		}
		if sc.hasFS && sc.lastFS.Point != s.Point {
			return p.errorf(s.Line, "point", "backsight on %q, but the foresight before it (line %d) was on %q", s.Point, sc.lastFS.Line, sc.lastFS.Point)
		}
		sc.open = s.Line
	case Intermediate:
		if sc.open == 0 {
			return p.errorf(s.Line, "sight", "an intermediate sight outside a setup: no backsight before it since line %d", sc.lastFS.Line)
		}
	case Foresight:
		if sc.open == 0 {
			return p.errorf(s.Line, "sight", "a foresight without a backsight: the setup ended on line %d", sc.lastFS.Line)
		}
		sc.open, sc.hasFS = 0, true
		sc.lastFS = Sighting{Line: s.Line, Point: p.book.Points[k].Name, TurningPoint: s.TurningPoint}
	}
	if s.Sight != Intermediate {
		p.book.Points[k].Carries = true
	}
	return nil
}

type parser struct {
	book *Book
	tp   []string // turning-point patterns, upper case
}

func (p *parser) errorf(line int, field, format string, a ...any) *Error {
	return &Error{File: p.book.Name, Line: line, Field: field, Msg: fmt.Sprintf(format, a...)}
}

func firstInvalid(b []byte) int {
	for i := 0; i < len(b); {
		r, n := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && n <= 1 {
			return i
		}
		i += n
	}
	return len(b)
}

// parseMeta reads the comment lines before the first line that is neither
// blank nor a comment (the header row).
func (p *parser) parseMeta(data []byte) error {
	m := &p.book.Meta
	m.StadiaFactor = standards.StadiaFactor
	m.StadiaConstant = standards.StadiaConstant
	m.Reading = DefaultReading
	m.TurningPoints = DefaultTurningPoints
	m.Lines = map[string]int{}
	headerLine := 0
	for line, rest := 1, data; len(rest) > 0; line++ {
		raw := rest
		if i := bytes.IndexByte(rest, '\n'); i >= 0 {
			raw, rest = rest[:i], rest[i+1:]
		} else {
			rest = nil
		}
		text := string(bytes.TrimRight(raw, "\r"))
		if strings.TrimSpace(text) == "" {
			continue
		}
		if !strings.HasPrefix(text, "#") {
			headerLine = line
			break
		}
		sm := metaLine().FindStringSubmatch(text)
		if sm == nil {
			continue // a free comment
		}
		key, value := strings.ToLower(sm[1]), strings.TrimSpace(sm[2])
		if prev, dup := m.Lines[key]; dup {
			return p.errorf(line, key, "set twice (first on line %d)", prev)
		}
		m.Lines[key] = line
		if err := p.setMeta(line, key, value); err != nil {
			return err
		}
	}
	if headerLine == 0 {
		return nil // empty: reported by parse
	}
	if m.Unit == "" {
		return p.errorf(headerLine, "units", "the book does not say its unit: add \"# units: m\" (or ft, usft) before the header row")
	}
	pats, err := compilePatterns(m.TurningPoints)
	if err != nil {
		return p.errorf(m.Lines["turning-points"], "turning-points", "%v", err)
	}
	p.tp = pats
	p.book.turningPoints = pats
	return nil
}

func (p *parser) setMeta(line int, key, value string) error {
	m := &p.book.Meta
	bad := func(format string, a ...any) error { return p.errorf(line, key, format, a...) }
	if strings.HasPrefix(key, "x-") {
		if m.Extra == nil {
			m.Extra = map[string]string{}
		}
		m.Extra[key] = value
		return nil
	}
	switch key {
	case "run":
		m.Run = value
	case "date":
		if _, err := time.Parse(time.DateOnly, value); err != nil {
			return bad("not a date %q (want YYYY-MM-DD)", value)
		}
		m.Date = value
	case "crew":
		m.Crew = value
	case "instrument":
		m.Instrument = value
	case "rod":
		m.Rod = value
	case "datum":
		m.Datum = value
	case "units":
		u, err := units.Parse(value)
		if err != nil {
			return bad("%v", err)
		}
		m.Unit = u
	case "stadia-factor":
		v, err := parseNumber(value)
		if err != nil {
			return bad("%v", err)
		}
		if v <= 0 {
			return bad("must be positive, not %s", value)
		}
		m.StadiaFactor = v
	case "stadia-constant":
		v, err := parseNumber(value)
		if err != nil {
			return bad("%v", err)
		}
		m.StadiaConstant = v
	case "class":
		c, err := standards.ParseClass(value)
		if err != nil {
			return bad("%v", err)
		}
		m.Class = c
	case "standards":
		if value == "" {
			return bad("empty: name a built-in profile (%s) or a profile file", strings.Join(builtinNames(), ", "))
		}
		m.Standards = value
	case "reading":
		switch r := ReadingMode(strings.ToLower(value)); r {
		case ReadMean, ReadMiddle:
			m.Reading = r
		default:
			return bad("unknown reading %q (want mean or middle)", value)
		}
	case "turning-points":
		if value == "" {
			return bad("empty pattern")
		}
		m.TurningPoints = value
	default:
		msg := "unknown key"
		if s := suggest.Nearest(key, Keys, typoLimit); s != "" {
			msg += fmt.Sprintf(" (did you mean %q?)", s)
		}
		return bad("%s; keys of your own start with \"x-\"", msg)
	}
	return nil
}

// compilePatterns splits a comma-separated list of shell patterns and
// checks each.
func compilePatterns(list string) ([]string, error) {
	var pats []string
	for _, f := range strings.Split(list, ",") {
		f = strings.ToUpper(strings.TrimSpace(f))
		if f == "" {
			return nil, fmt.Errorf("empty pattern in %q", list)
		}
		if _, err := path.Match(f, ""); err != nil {
			return nil, fmt.Errorf("bad pattern %q", f)
		}
		pats = append(pats, f)
	}
	return pats, nil
}

// IsTurningPoint reports whether point matches the book's turning-point
// pattern.
func (b *Book) IsTurningPoint(point string) bool {
	if b.turningPoints == nil {
		pats, err := compilePatterns(b.Meta.TurningPoints)
		if err != nil {
			return false
		}
		b.turningPoints = pats
	}
	return matchAny(b.turningPoints, point)
}

func matchAny(pats []string, point string) bool {
	up := strings.ToUpper(point)
	for _, p := range pats {
		if ok, _ := path.Match(p, up); ok {
			return true
		}
	}
	return false
}

func (p *parser) parseHeader(line int, rec []string) (map[string]int, error) {
	p.book.HeaderLine = line
	rec = trimTrailingEmpty(rec)
	cols := map[string]int{}
	for i, c := range rec {
		c = strings.ToLower(strings.TrimSpace(c))
		if c == "" {
			return nil, p.errorf(line, "", "column %d of the header row has no name", i+1)
		}
		if _, dup := cols[c]; dup {
			return nil, p.errorf(line, c, "column named twice")
		}
		known := strings.HasPrefix(c, "x-")
		for _, k := range Columns {
			known = known || c == k
		}
		if !known {
			msg := "unknown column"
			if s := suggest.Nearest(c, Columns, typoLimit); s != "" {
				msg += fmt.Sprintf(" (did you mean %q?)", s)
			}
			return nil, p.errorf(line, c, "%s; columns of your own start with \"x-\"", msg)
		}
		cols[c] = i
		p.book.Columns = append(p.book.Columns, c)
	}
	for _, c := range requiredColumns {
		if _, ok := cols[c]; !ok {
			return nil, p.errorf(line, c, "required column missing from the header row")
		}
	}
	return cols, nil
}

func trimTrailingEmpty(rec []string) []string {
	for len(rec) > 0 && strings.TrimSpace(rec[len(rec)-1]) == "" {
		rec = rec[:len(rec)-1]
	}
	return rec
}

func (p *parser) parseRow(line int, rec []string, cols map[string]int) (Sighting, error) {
	s := Sighting{Line: line, DistanceFrom: DistanceNone}
	if n := len(trimTrailingEmpty(rec)); n > len(p.book.Columns) {
		return s, p.errorf(line, "", "%d cells, but the header row names %d columns", n, len(p.book.Columns))
	}
	cell := func(name string) string {
		if i, ok := cols[name]; ok && i < len(rec) {
			return strings.TrimSpace(rec[i])
		}
		return ""
	}
	m := p.book.Meta

	s.Point = cell("point")
	if s.Point == "" {
		return s, p.errorf(line, "point", "no point name")
	}
	s.TurningPoint = matchAny(p.tp, s.Point)
	switch kind := strings.ToLower(cell("kind")); kind {
	case "":
	case KindSpot:
		if s.TurningPoint {
			return s, p.errorf(line, "kind", "%q is declared a spot height but its name matches the turning-point pattern %q: rename the point or leave the kind empty", s.Point, p.book.Meta.TurningPoints)
		}
		s.Spot = true
	default:
		return s, p.errorf(line, "kind", "unknown kind %q (want %s for a spot height, or leave it empty)", cell("kind"), KindSpot)
	}
	switch sight := Sight(strings.ToUpper(cell("sight"))); sight {
	case Backsight, Intermediate, Foresight:
		s.Sight = sight
	case "":
		return s, p.errorf(line, "sight", "no sight kind (want BS, IS or FS)")
	default:
		return s, p.errorf(line, "sight", "unknown sight %q (want BS, IS or FS)", cell("sight"))
	}
	if s.Spot && s.Sight != Intermediate {
		return s, p.errorf(line, "sight", "%s on spot height %q: a spot height takes intermediate sights only (the line is carried on marks and turning points)", s.Sight, s.Point)
	}
	s.Note = cell("note")

	num := func(field string) (float64, string, bool, error) {
		raw := cell(field)
		if raw == "" {
			return 0, "", false, nil
		}
		v, err := parseNumber(raw)
		if err != nil {
			return 0, raw, false, p.errorf(line, field, "%v", err)
		}
		return v, raw, true, nil
	}
	var err error
	var hasMiddle, hasUpper, hasLower, hasDist bool
	if s.Middle, s.Raw.Middle, hasMiddle, err = num("middle"); err != nil {
		return s, err
	}
	if !hasMiddle {
		return s, p.errorf(line, "middle", "no reading")
	}
	if s.Upper, s.Raw.Upper, hasUpper, err = num("upper"); err != nil {
		return s, err
	}
	if s.Lower, s.Raw.Lower, hasLower, err = num("lower"); err != nil {
		return s, err
	}
	if s.Distance, s.Raw.Distance, hasDist, err = num("distance"); err != nil {
		return s, err
	}
	switch {
	case hasUpper && !hasLower:
		return s, p.errorf(line, "lower", "no lower reading, though the upper is booked (book both stadia wires or neither)")
	case hasLower && !hasUpper:
		return s, p.errorf(line, "upper", "no upper reading, though the lower is booked (book both stadia wires or neither)")
	case hasUpper:
		if s.Upper < s.Lower {
			return s, p.errorf(line, "upper", "wires out of order: upper %s is below lower %s", s.Raw.Upper, s.Raw.Lower)
		}
		if s.Middle > s.Upper || s.Middle < s.Lower {
			return s, p.errorf(line, "middle", "wires out of order: middle %s is not between lower %s and upper %s", s.Raw.Middle, s.Raw.Lower, s.Raw.Upper)
		}
		s.ThreeWire = true
	}
	if hasDist && s.Distance < 0 {
		return s, p.errorf(line, "distance", "negative distance %s", s.Raw.Distance)
	}
	if s.ThreeWire {
		stadia := m.StadiaFactor*(s.Upper-s.Lower) + m.StadiaConstant
		if hasDist {
			// The booked and stadia distances must agree within the stadia
			// factor times the three-wire tolerance (a reading error of
			// standards.ThreeWireM on the interval), in the book's unit.
			tol := m.StadiaFactor * m.Unit.FromMetres(standards.ThreeWireM)
			if math.Abs(s.Distance-stadia) > tol+1e-9 {
				return s, p.errorf(line, "distance", "distance %s disagrees with the stadia distance %s by more than %s %s",
					s.Raw.Distance, strconv.FormatFloat(stadia, 'f', 2, 64), strconv.FormatFloat(tol, 'f', 2, 64), m.Unit)
			}
			s.DistanceFrom = DistanceMeasured
		} else {
			if stadia < 0 {
				return s, p.errorf(line, "upper", "negative stadia distance %s (check the stadia constant)", strconv.FormatFloat(stadia, 'f', 2, 64))
			}
			s.Distance = stadia
			s.DistanceFrom = DistanceStadia
		}
	} else if hasDist {
		s.DistanceFrom = DistanceMeasured
	}
	return s, nil
}

// maxMagnitude bounds every number of a book: no rod reading, sight length,
// stadia factor or constant comes near it, and sums of such numbers stay
// far from overflow.
const maxMagnitude = 1e5

// parseNumber reads a finite decimal number of at most maxMagnitude.
func parseNumber(s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || strings.ContainsAny(s, "xXpP_") {
		return 0, fmt.Errorf("not a number %q", s)
	}
	if math.Abs(v) > maxMagnitude {
		return 0, fmt.Errorf("out of range %q (more than %g)", s, maxMagnitude)
	}
	return v, nil
}

// typoLimit bounds the hint for an unknown key or column: the nearest
// known name is suggested when it is fewer than typoLimit edits
// (suggest.Levenshtein) away, close enough to be a likely typo (common
// practice).
const typoLimit = 3

func builtinNames() []string {
	var out []string
	for _, p := range standards.Builtins() {
		out = append(out, p.Name)
	}
	return out
}
