package web

import (
	"fmt"
	"strings"
	"unicode/utf8"

	"cairn/internal/sheet"
)

// The register keeps text exactly as given, control characters
// included, and the JSON gives it back exactly. A page is read by people,
// so, as on a terminal (internal/cli/visible.go, the same rule), the
// characters that would hide or reorder text without showing are written
// visibly as \uXXXX: a right-to-left override in a description cannot
// make "evil" read "live", nor a control character hide what follows.
// Tabs and line breaks stay (the page wraps them as written).

// hiddenRune says whether r is made visible on a page: the C0 controls but
// tab, line feed and carriage return, DEL, the C1 controls, and the
// bidirectional embeddings, overrides, isolates and marks, and the line
// and paragraph separators.
func hiddenRune(r rune) bool {
	switch {
	case r == '\t' || r == '\n' || r == '\r':
		return false
	case r < 0x20, r >= 0x7f && r <= 0x9f:
		return true
	case r == 0x061c, r == 0x200e, r == 0x200f, r >= 0x202a && r <= 0x202e, r >= 0x2066 && r <= 0x2069,
		r == 0x2028, r == 0x2029:
		return true
	}
	return false
}

// visible is s with every hidden character written \uXXXX (and a byte
// that is not UTF-8 as \xNN).
func visible(s string) string {
	if !strings.ContainsFunc(s, func(r rune) bool { return r == utf8.RuneError || hiddenRune(r) }) {
		return s
	}
	var b strings.Builder
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		switch {
		case r == utf8.RuneError && n == 1:
			fmt.Fprintf(&b, `\x%02x`, s[i])
		case hiddenRune(r):
			fmt.Fprintf(&b, `\u%04x`, r)
		default:
			b.WriteString(s[i : i+n])
		}
		i += n
	}
	return b.String()
}

func visibleAll(ss []string) []string {
	out := make([]string, len(ss))
	for i, s := range ss {
		out[i] = visible(s)
	}
	return out
}

// visibleSheet is a sheet's data with every text from the register made
// visible.
func visibleSheet(d sheet.Data) sheet.Data {
	for _, p := range []*string{&d.Designation, &d.Kind, &d.Setting, &d.Stamping, &d.Description, &d.Directions, &d.PositionSource,
		&d.Retired, &d.Replaces} {
		*p = visible(*p)
	}
	d.Aliases, d.Doubts = visibleAll(d.Aliases), visibleAll(d.Doubts)
	d.Neighbours = append([]sheet.Neighbour(nil), d.Neighbours...)
	for i := range d.Neighbours {
		d.Neighbours[i].Designation = visible(d.Neighbours[i].Designation)
	}
	d.Heights = append([]sheet.Height(nil), d.Heights...)
	for i := range d.Heights {
		h := &d.Heights[i]
		h.Datum, h.Class, h.Provenance, h.Source = visible(h.Datum), visible(h.Class), visible(h.Provenance), visible(h.Source)
	}
	d.Conditions = append([]sheet.Condition(nil), d.Conditions...)
	for i := range d.Conditions {
		c := &d.Conditions[i]
		c.Condition, c.Note, c.By = visible(c.Condition), visible(c.Note), visible(c.By)
	}
	d.Photos = append([]sheet.Photo(nil), d.Photos...)
	for i := range d.Photos {
		p := &d.Photos[i]
		p.View, p.FileName = visible(p.View), visible(p.FileName)
	}
	return d
}
