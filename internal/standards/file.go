package standards

import (
	"bytes"
	"crypto/sha256"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"
)

// FormatMarker is the first key line of a profile file, naming the format
// and its version (docs/standards.md).
const FormatMarker = "cairn-standards: 1"

// Error is a fault in a profile file: the file, the 1-based line and the
// field (a key or a column) it concerns.
type Error struct {
	File  string
	Line  int
	Field string
	Msg   string
}

func (e *Error) Error() string {
	switch {
	case e.Line > 0 && e.Field != "":
		return fmt.Sprintf("%s:%d: %s: %s", e.File, e.Line, e.Field, e.Msg)
	case e.Line > 0:
		return fmt.Sprintf("%s:%d: %s", e.File, e.Line, e.Msg)
	}
	return fmt.Sprintf("%s: %s", e.File, e.Msg)
}

// The keys of a profile file's head.
var fileKeys = []string{"profile", "title", "source", "version"}

// Limits of a value in a profile file: a misclosure constant within
// (0, 100] mm·√km, a length within (0, 1000] m, a three-wire limit within
// (0, 0.1] m (common practice: no leveling rule lies outside them, so a
// value outside is a slip of the unit).
func limitOf(f Field) float64 {
	switch f {
	case FieldLoop, FieldSection, FieldCheckConnection, FieldAccuracy:
		return 100
	case FieldThreeWire:
		return 0.1
	}
	return 1000
}

// Parse reads a profile file (docs/standards.md): key lines, then a table
// with one row per class. file names the file in errors; the profile keeps
// data and its SHA-256.
func Parse(file string, data []byte) (*Profile, error) {
	bad := func(line int, field, format string, a ...any) error {
		return &Error{File: file, Line: line, Field: field, Msg: fmt.Sprintf(format, a...)}
	}
	if !utf8.Valid(data) {
		return nil, bad(0, "", "not UTF-8 text")
	}
	sum := sha256.Sum256(data)
	p := &Profile{File: file, SHA256: sum[:], Data: slices.Clone(data), rows: map[Class]Tolerances{}}
	lines := strings.Split(string(data), "\n")
	seen := map[string]int{}
	marker := false
	table := -1
	for i, raw := range lines {
		line := i + 1
		text := strings.TrimSpace(strings.TrimRight(raw, "\r"))
		if text == "" || strings.HasPrefix(text, "#") {
			continue
		}
		if !marker {
			if text != FormatMarker {
				return nil, bad(line, "", "not a cairn standards profile: the first line that is not a comment must be %q", FormatMarker)
			}
			marker = true
			continue
		}
		key, value, ok := strings.Cut(text, ":")
		if !ok || strings.Contains(key, ",") {
			table = i
			break
		}
		key = strings.ToLower(strings.TrimSpace(key))
		value = strings.TrimSpace(value)
		if !slices.Contains(fileKeys, key) {
			return nil, bad(line, key, "unknown key (want %s)", strings.Join(fileKeys, ", "))
		}
		if prev, dup := seen[key]; dup {
			return nil, bad(line, key, "given twice (first on line %d)", prev)
		}
		seen[key] = line
		if value == "" {
			return nil, bad(line, key, "empty")
		}
		switch key {
		case "profile":
			if strings.ContainsAny(value, " \t") {
				return nil, bad(line, key, "a name has no spaces: %q", value)
			}
			if _, builtin := Builtin(value); builtin {
				return nil, bad(line, key, "%q is the name of a built-in profile: name the office's own otherwise", value)
			}
			p.Name = value
		case "title":
			p.Title = value
		case "source":
			p.Source = value
		case "version":
			p.Edition = value
		}
	}
	if !marker {
		return nil, bad(0, "", "empty: a profile begins with %q", FormatMarker)
	}
	for _, k := range []string{"profile", "source"} {
		if _, ok := seen[k]; !ok {
			return nil, bad(0, k, "missing: a profile names itself (profile:) and its source (source:)")
		}
	}
	if table < 0 {
		return nil, bad(0, "", "no table of tolerances: after the keys, a header line (class,%s) and one row per class", strings.Join(fieldNames(), ","))
	}

	r := csv.NewReader(bytes.NewReader([]byte(strings.Join(lines[table:], "\n"))))
	r.Comment = '#'
	r.FieldsPerRecord = -1
	r.TrimLeadingSpace = true
	header, err := r.Read()
	if err != nil {
		return nil, csvErr(file, table, err)
	}
	headerLine := table + 1
	cols := make([]Field, len(header))
	have := map[Field]bool{}
	classCol := -1
	for j, h := range header {
		h = strings.ToLower(strings.TrimSpace(h))
		if h == "class" {
			classCol = j
			continue
		}
		f := Field(h)
		if !slices.Contains(Fields, f) {
			return nil, bad(headerLine, h, "unknown column (want class and %s)", strings.Join(fieldNames(), ", "))
		}
		if have[f] {
			return nil, bad(headerLine, h, "column given twice")
		}
		cols[j], have[f] = f, true
	}
	if classCol < 0 {
		return nil, bad(headerLine, "class", "missing column")
	}
	for _, f := range Fields {
		if !have[f] && !f.Optional() {
			return nil, bad(headerLine, string(f), "missing column (%s)", f.Words())
		}
	}
	classLine := map[Class]int{}
	for {
		rec, err := r.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, csvErr(file, table, err)
		}
		ln, _ := r.FieldPos(0)
		line := table + ln
		if len(rec) != len(header) {
			return nil, bad(line, "", "%d cells, but the header has %d columns", len(rec), len(header))
		}
		c, err := ParseClass(rec[classCol])
		if err != nil {
			return nil, bad(line, "class", "%v", err)
		}
		if prev, dup := classLine[c]; dup {
			return nil, bad(line, "class", "%s given twice (first on line %d)", c, prev)
		}
		classLine[c] = line
		t := Tolerances{Class: c, Profile: p.Name, Provenance: map[Field]Provenance{}}
		for j, cell := range rec {
			if j == classCol {
				continue
			}
			f := cols[j]
			cell = strings.TrimSpace(cell)
			if cell == "" {
				if f.Optional() {
					continue
				}
				return nil, bad(line, string(f), "empty (%s)", f.Words())
			}
			v, err := strconv.ParseFloat(cell, 64)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, bad(line, string(f), "not a number: %q", cell)
			}
			if v <= 0 || v > limitOf(f) {
				return nil, bad(line, string(f), "%s is outside (0, %g]: %s", cell, limitOf(f), f.Words())
			}
			t.set(f, v)
			t.Provenance[f] = Provenance{Source: p.Source, Status: Office}
		}
		p.rows[c] = t
	}
	if len(p.rows) == 0 {
		return nil, bad(headerLine, "", "no class: give one row per class the office uses")
	}
	for _, c := range Classes {
		if t, ok := p.rows[c]; ok {
			p.Classes = append(p.Classes, c)
			t.Source = p.Name + ": " + p.Source + " — " + t.Summary()
			p.rows[c] = t
		}
	}
	if p.Title == "" {
		p.Title = "the office's profile " + p.Name
	}
	return p, nil
}

func csvErr(file string, offset int, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &Error{File: file, Line: offset + pe.Line, Msg: pe.Err.Error()}
	}
	return &Error{File: file, Msg: err.Error()}
}

func fieldNames() []string {
	out := make([]string, len(Fields))
	for i, f := range Fields {
		out[i] = string(f)
	}
	return out
}

// Resolve finds the profile a run names: a built-in by name, else a file,
// read from its path (relative paths from dir; "" for the working
// directory). An empty name is the default profile.
func Resolve(name, dir string) (*Profile, error) {
	name = strings.TrimSpace(name)
	if name == "" {
		return Default(), nil
	}
	if p, ok := Builtin(name); ok {
		return p, nil
	}
	path := name
	if dir != "" && !filepath.IsAbs(path) {
		path = filepath.Join(dir, path)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			names := make([]string, len(builtins))
			for i, b := range builtins {
				names[i] = b.Name
			}
			return nil, fmt.Errorf("standards %q: neither a built-in profile (%s) nor a file (%s not found)", name, strings.Join(names, ", "), path)
		}
		return nil, fmt.Errorf("standards %q: %w", name, err)
	}
	return Parse(path, data)
}

// Text writes the profile in the file format, so that an office can start
// its own from a built-in (the "profile:" line must then be renamed: a file
// may not take a built-in's name).
func (p *Profile) Text() string {
	var b strings.Builder
	fmt.Fprintf(&b, "# %s\n", p.Title)
	for _, n := range p.Notes {
		fmt.Fprintf(&b, "# %s\n", n)
	}
	b.WriteString(FormatMarker + "\n")
	fmt.Fprintf(&b, "profile: %s\n", p.Name)
	fmt.Fprintf(&b, "title: %s\n", p.Title)
	fmt.Fprintf(&b, "source: %s\n", p.Source)
	if p.Edition != "" {
		fmt.Fprintf(&b, "version: %s\n", p.Edition)
	}
	b.WriteString("\nclass," + strings.Join(fieldNames(), ",") + "\n")
	for _, c := range p.Classes {
		t := p.rows[c]
		b.WriteString(string(c))
		for _, f := range Fields {
			b.WriteString(",")
			if v := t.Value(f); v != 0 {
				b.WriteString(strconv.FormatFloat(v, 'g', -1, 64))
			}
		}
		b.WriteString("\n")
	}
	return b.String()
}
