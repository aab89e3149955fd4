// Package netfile reads and writes leveling networks as CSV files in the
// exchange format:
//
//	sections: from,to,dh_m,length_km   (optional column: setups)
//	held:     point,height_m           (optional column: sd_m)
//	heights:  point,height_m,sd_m
//
// dh_m is height(to) − height(from) in metres; columns are found by their
// header names, in any order; other columns are ignored. Every number is
// bounded (units.CheckHeightM, CheckDifferenceM, CheckLengthM): a height
// within -500 m to 9,000 m, a difference within ±9,500 m, a length or
// standard deviation positive and at most 1,000 km.
package netfile

import (
	"bufio"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"cairn/internal/adjust"
	"cairn/internal/units"
)

// Error is bad input at one place in a file.
type Error struct {
	File  string
	Line  int    // from 1; 0 when the file as a whole is wrong
	Field string // column name, or "" for the whole line
	Err   error
}

func (e *Error) Error() string {
	switch {
	case e.Line == 0:
		return fmt.Sprintf("%s: %v", e.File, e.Err)
	case e.Field == "":
		return fmt.Sprintf("%s:%d: %v", e.File, e.Line, e.Err)
	}
	return fmt.Sprintf("%s:%d: %s: %v", e.File, e.Line, e.Field, e.Err)
}
func (e *Error) Unwrap() error { return e.Err }

// table reads a CSV file whose header names the columns wanted.
type table struct {
	name string
	r    *csv.Reader
	col  map[string]int // column number by name, -1 if absent and optional
	rec  []string
}

// columns of a sections file, by position in the record
type sectionCols struct{ from, to, dh, km, setups int }

func open(r io.Reader, name string, required, optional []string) (*table, error) {
	cr := csv.NewReader(bufio.NewReaderSize(r, 1<<16))
	cr.ReuseRecord = true
	cr.FieldsPerRecord = -1
	t := &table{name: name, r: cr, col: map[string]int{}}
	head, err := cr.Read()
	if err == io.EOF {
		return nil, &Error{File: name, Err: fmt.Errorf("empty file; want a header %s", strings.Join(required, ","))}
	}
	if err != nil {
		return nil, t.csvError(err)
	}
	for i, h := range head {
		h = strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff")))
		if _, dup := t.col[h]; dup {
			return nil, &Error{File: name, Line: 1, Field: h, Err: errors.New("column named twice in the header")}
		}
		t.col[h] = i
	}
	for _, c := range required {
		if _, ok := t.col[c]; !ok {
			return nil, &Error{File: name, Line: 1, Err: fmt.Errorf("header has no column %q (want %s)", c, strings.Join(required, ","))}
		}
	}
	for _, c := range optional {
		if _, ok := t.col[c]; !ok {
			t.col[c] = -1
		}
	}
	return t, nil
}

func (t *table) csvError(err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &Error{File: t.name, Line: pe.Line, Err: pe.Err}
	}
	return &Error{File: t.name, Err: err}
}

// next reads a record; false at the end of the file.
func (t *table) next() (bool, error) {
	rec, err := t.r.Read()
	if err == io.EOF {
		return false, nil
	}
	if err != nil {
		return false, t.csvError(err)
	}
	t.rec = rec
	return true, nil
}

func (t *table) line() int {
	l, _ := t.r.FieldPos(0)
	return l
}

func (t *table) errorf(field, format string, a ...any) error {
	return &Error{File: t.name, Line: t.line(), Field: field, Err: fmt.Errorf(format, a...)}
}

// field returns the named column of the current record ("" if absent).
func (t *table) field(c string) (string, error) { return t.fieldAt(t.col[c], c) }

// fieldAt returns column i (named c) of the current record ("" if i < 0).
func (t *table) fieldAt(i int, c string) (string, error) {
	if i < 0 {
		return "", nil
	}
	if i >= len(t.rec) {
		return "", t.errorf(c, "missing (the line has %d fields)", len(t.rec))
	}
	return strings.TrimSpace(t.rec[i]), nil
}

func (t *table) pointName(i int, c string) (string, error) {
	s, err := t.fieldAt(i, c)
	if err == nil && s == "" {
		err = t.errorf(c, "empty point name")
	}
	return s, err
}

func (t *table) number(i int, c string) (float64, error) {
	s, err := t.fieldAt(i, c)
	if err != nil {
		return 0, err
	}
	if err := units.CheckDigits(s); err != nil {
		return 0, t.errorf(c, "%v", err)
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil && !errors.Is(err, strconv.ErrRange) {
		return 0, t.errorf(c, "%q is not a number", s)
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, t.errorf(c, "%q is not a finite number", s)
	}
	return v, nil
}

// bounded reads column i (named c) as a number and checks it with check
// (units.CheckHeightM, CheckDifferenceM or CheckLengthM) after scale
// converts it to metres.
func (t *table) bounded(i int, c string, scale float64, check func(float64) error) (float64, error) {
	v, err := t.number(i, c)
	if err != nil {
		return 0, err
	}
	if err := check(v * scale); err != nil {
		return 0, t.errorf(c, "%v", err)
	}
	return v, nil
}

// ReadSections reads a sections file (name is used in errors) and passes
// each section to add, in file order, with its line number. Each line is
// checked: two different, non-empty point names, a finite height
// difference, a positive finite length, a positive whole number of setups
// when given. Parsing runs on its own goroutine, a batch ahead of add.
func ReadSections(r io.Reader, name string, add func(s adjust.Section, line int)) error {
	t, err := open(r, name, []string{"from", "to", "dh_m", "length_km"}, []string{"setups"})
	if err != nil {
		return err
	}
	type batch struct {
		secs  []adjust.Section
		lines []int
		err   error
	}
	const size = 4096
	full := make(chan *batch, 2)
	free := make(chan *batch, 3)
	for range 3 {
		free <- &batch{secs: make([]adjust.Section, 0, size), lines: make([]int, 0, size)}
	}
	done := make(chan struct{})
	defer close(done)
	go func() {
		defer close(full)
		c := sectionCols{t.col["from"], t.col["to"], t.col["dh_m"], t.col["length_km"], t.col["setups"]}
		for {
			var b *batch
			select {
			case b = <-free:
			case <-done:
				return
			}
			b.secs, b.lines = b.secs[:0], b.lines[:0]
			for len(b.secs) < size {
				s, ok, err := t.section(c)
				if err != nil {
					b.err = err
					break
				}
				if !ok {
					break
				}
				b.secs = append(b.secs, s)
				b.lines = append(b.lines, t.line())
			}
			full <- b
			if b.err != nil || len(b.secs) < size {
				return
			}
		}
	}()
	n := 0
	for b := range full {
		for i, s := range b.secs {
			add(s, b.lines[i])
		}
		n += len(b.secs)
		if b.err != nil {
			return b.err
		}
		free <- b
	}
	if n == 0 {
		return &Error{File: name, Err: errors.New("no sections")}
	}
	return nil
}

// section reads and checks the next section; false at the end of the file.
func (t *table) section(c sectionCols) (s adjust.Section, ok bool, err error) {
	for {
		if ok, err = t.next(); err != nil || !ok {
			return s, false, err
		}
		if len(t.rec) != 1 || t.rec[0] != "" {
			break // not a blank line
		}
	}
	if s.From, err = t.pointName(c.from, "from"); err != nil {
		return s, false, err
	}
	if s.To, err = t.pointName(c.to, "to"); err != nil {
		return s, false, err
	}
	if s.From == s.To {
		return s, false, t.errorf("to", "the section begins and ends at %s", s.From)
	}
	if s.DhM, err = t.bounded(c.dh, "dh_m", 1, units.CheckDifferenceM); err != nil {
		return s, false, err
	}
	if s.LengthKm, err = t.number(c.km, "length_km"); err != nil {
		return s, false, err
	}
	if !(s.LengthKm > 0) {
		return s, false, t.errorf("length_km", "length %s km must be positive", strings.TrimSpace(t.rec[c.km]))
	}
	if err := units.CheckLengthM(s.LengthKm * 1000); err != nil {
		return s, false, t.errorf("length_km", "%v", err)
	}
	if f, err := t.fieldAt(c.setups, "setups"); err != nil {
		return s, false, err
	} else if f != "" {
		k, err := strconv.Atoi(f)
		if err != nil || k <= 0 {
			return s, false, t.errorf("setups", "%q is not a positive whole number", f)
		}
		s.Setups = k
	}
	return s, true, nil
}

// HeldRow is one held mark with the line it was read from.
type HeldRow struct {
	adjust.HeldMark
	Line int
}

// ReadHeld reads a held-marks file (name is used in errors). A mark named
// twice is an error; sd_m, when given, is the standard deviation of a
// weighted held height (0 or empty holds it fixed).
func ReadHeld(r io.Reader, name string) ([]HeldRow, error) {
	t, err := open(r, name, []string{"point", "height_m"}, []string{"sd_m"})
	if err != nil {
		return nil, err
	}
	var rows []HeldRow
	seen := map[string]int{}
	for {
		ok, err := t.next()
		if err != nil {
			return nil, err
		}
		if !ok {
			break
		}
		if len(t.rec) == 1 && t.rec[0] == "" {
			continue
		}
		h := HeldRow{Line: t.line()}
		if h.Point, err = t.pointName(t.col["point"], "point"); err != nil {
			return nil, err
		}
		if first, dup := seen[h.Point]; dup {
			return nil, t.errorf("point", "%s is held twice (first on line %d)", h.Point, first)
		}
		seen[h.Point] = h.Line
		if h.HeightM, err = t.bounded(t.col["height_m"], "height_m", 1, units.CheckHeightM); err != nil {
			return nil, err
		}
		if f, err := t.field("sd_m"); err != nil {
			return nil, err
		} else if f != "" {
			if h.SigmaM, err = t.number(t.col["sd_m"], "sd_m"); err != nil {
				return nil, err
			}
			if h.SigmaM < 0 {
				return nil, t.errorf("sd_m", "standard deviation %s must not be negative", f)
			}
			if h.SigmaM > 0 {
				if err := units.CheckLengthM(h.SigmaM); err != nil {
					return nil, t.errorf("sd_m", "%v", err)
				}
			}
		}
		rows = append(rows, h)
	}
	if len(rows) == 0 {
		return nil, &Error{File: name, Err: errors.New("no held marks")}
	}
	return rows, nil
}

// WriteHeights writes point,height_m,sd_m rows, heights and standard
// deviations in metres to 6 decimals (micrometres).
func WriteHeights(w io.Writer, points []adjust.PointResult) error {
	bw := bufio.NewWriterSize(w, 1<<16)
	bw.WriteString("point,height_m,sd_m\n")
	buf := make([]byte, 0, 128)
	for _, p := range points {
		buf = appendField(buf[:0], p.Point)
		buf = append(buf, ',')
		buf = appendMicro(buf, p.HeightM)
		buf = append(buf, ',')
		buf = appendMicro(buf, p.SDM)
		buf = append(buf, '\n')
		if _, err := bw.Write(buf); err != nil {
			return err
		}
	}
	return bw.Flush()
}

// appendMicro appends v to 6 decimals, without a sign on zero.
func appendMicro(b []byte, v float64) []byte {
	if math.Abs(v) < 5e-7 {
		v = 0
	}
	return strconv.AppendFloat(b, v, 'f', 6, 64)
}

// appendField appends s as a CSV field, quoted when it needs to be
// (RFC 4180).
func appendField(b []byte, s string) []byte {
	if s == "" || !strings.ContainsAny(s, ",\"\r\n") && s[0] != ' ' && s[len(s)-1] != ' ' {
		return append(b, s...)
	}
	b = append(b, '"')
	b = append(b, strings.ReplaceAll(s, `"`, `""`)...)
	return append(b, '"')
}
