package web

import (
	"cairn/internal/sheet"
	"cairn/internal/showtext"
)

// The register keeps text exactly as given, control characters
// included, and the JSON gives it back exactly. A page is read by people,
// so, as on a terminal (internal/showtext, the same rule), the
// characters that would hide or reorder text without showing are written
// visibly as \uXXXX: a right-to-left override in a description cannot
// make "evil" read "live", nor a control character hide what follows.
// Tabs and line breaks stay (the page wraps them as written).

// visible is s with every hidden character (showtext.Hidden) but
// carriage return written \uXXXX, and a byte that is not UTF-8 as \xNN.
func visible(s string) string {
	return showtext.Escape(s, func(r rune) bool { return r != '\r' && showtext.Hidden(r) })
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
