// Package sheetdata formats a mark's view from the register
// (register.Datasheet) into the values a datasheet shows (sheet.Data):
// heights converted exactly to the sheet's unit, doubts as their loud
// warnings, the cautions one a sentence. The command line (cairn
// datasheet, cairn pack) and the web pages (cairn serve) make their
// sheets here, so that a sheet says the same wherever it is read.
package sheetdata

import (
	"encoding/hex"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"time"
	"unicode/utf8"

	"cairn/internal/register"
	"cairn/internal/sheet"
	"cairn/internal/units"
)

// Cautions go with every height cairn gives out: in the help of the
// commands that give heights, the demo's output, reports, datasheets and
// web pages.
const Cautions = `Cautions: heights from this register need review by a licensed surveyor
before use. Check into two marks. Verify a mark's condition in the field
before relying on it. Local codes and regulations govern.`

// CautionSentences are the cautions, one a sentence.
func CautionSentences() []string {
	c := strings.TrimPrefix(strings.Join(strings.Fields(Cautions), " "), "Cautions: ")
	var out []string
	for _, s := range strings.SplitAfter(c, ". ") {
		if s = strings.TrimSpace(s); s != "" {
			out = append(out, strings.ToUpper(s[:1])+s[1:])
		}
	}
	return out
}

// From is a mark's sheet: the register's view formatted, each height
// converted exactly to u; asOf and knownAt (either may be nil) are the
// times it was asked for.
func From(st register.RegisterState, s register.Datasheet, asOf, knownAt *time.Time, u units.Unit) sheet.Data {
	m := s.Mark
	d := sheet.Data{Designation: m.Designation, Aliases: m.Aliases, Kind: m.Type, Setting: m.Setting, Stamping: m.Stamping,
		Description: m.Description, Directions: m.Directions, Lat: m.Lat, Lon: m.Lon, PositionSource: m.PositionSource,
		Replaces: m.Replaces, Unit: string(u), LastRecovered: s.LastRecovered(), Cautions: CautionSentences(),
		State: sheet.State{Seq: st.Seq, Head: st.Head, CommittedAt: st.CommittedAt, AsOf: asOf, KnownAt: knownAt}}
	if d.Aliases == nil {
		for _, a := range s.Aliases {
			d.Aliases = append(d.Aliases, a.Alias)
		}
	}
	if m.Retired != nil {
		d.Retired = "since " + m.Retired.On.Format("2006-01-02") + ": " + m.Retired.Reason
		if m.Retired.ReplacedBy != "" {
			d.Retired += "; replaced by " + m.Retired.ReplacedBy
		}
	}
	for _, n := range s.Neighbours {
		nb := sheet.Neighbour{Designation: n.Designation, Lat: *n.Lat, Lon: *n.Lon}
		if n.DistanceM != nil {
			nb.DistanceM = *n.DistanceM
		}
		d.Neighbours = append(d.Neighbours, nb)
	}
	for _, h := range s.Heights {
		sh := sheet.Height{Datum: h.DatumCode, Version: h.Version, Class: h.Class, Provenance: h.SourceKind,
			InForceFrom: h.InForceFrom, Source: SourceShown(h.SourceKind, h.Source)}
		if h.AdjustmentID != nil {
			// The source of a published version names its adjustment
			// already (register.AdjustmentSource); another is prefixed.
			if a := "adjustment " + strconv.FormatInt(*h.AdjustmentID, 10); !strings.HasPrefix(sh.Source, a+" ") && sh.Source != a {
				sh.Source = strings.TrimSpace(a + " " + sh.Source)
			}
		}
		if h.Value == nil {
			sh.Withdrawn = true
		} else {
			from := units.Unit(*h.Unit)
			dec := units.ConvertedDecimals(from, u, *h.Decimals)
			v, err := units.ConvertExact(*h.Value, from, u, dec)
			if err != nil {
				v = "unreadable value " + *h.Value + " " + *h.Unit
			}
			sh.Value = v
			if from != u {
				sh.Published = *h.Value + " " + *h.Unit
			}
		}
		d.Heights = append(d.Heights, sh)
	}
	seenDoubt := map[string]bool{}
	for _, dt := range s.Doubts {
		if w := dt.Warning(); !seenDoubt[w] {
			d.Doubts, seenDoubt[w] = append(d.Doubts, w), true
		}
	}
	for _, c := range s.Conditions {
		d.Conditions = append(d.Conditions, sheet.Condition{ObservedOn: c.ObservedOn, Condition: c.Condition, Note: c.Note, By: c.RecordedBy})
	}
	on := s.PhotoReportDates()
	for _, p := range s.Photos {
		d.Photos = append(d.Photos, sheet.Photo{ObservedOn: on[p.ID], View: p.View, FileName: p.FileName, MediaType: p.MediaType,
			Bytes: p.Bytes, SHA256: hex.EncodeToString(p.SHA256), Content: s.PhotoContent[p.ID]})
	}
	return d
}

// oldAdjustmentSource is the source text of a version published before
// adjustments named only their count of runs: every run's number.
var oldAdjustmentSource = sync.OnceValue(func() *regexp.Regexp {
	return regexp.MustCompile(`^adjustment ([0-9]+) \(([a-z-]+), run ([0-9]+(?:, [0-9]+)*)\)$`)
})

// MaxSourceShown is the most characters of a height's source text a table,
// the trace or a datasheet shows; JSON carries the whole text.
const MaxSourceShown = 200

// SourceShown is a height's source text as tables, the trace and
// datasheets show it: a version of an adjustment (kind "adjustment") that
// carries the whole run list, as versions published before schema v24's
// release did, reads as the versions published since do ("adjustment 12
// (least-squares, 2947 runs)"; the runs are in the trace), and any other
// text longer than MaxSourceShown characters is cut there, saying so. The
// text in the register is never changed: the history is append-only.
func SourceShown(kind, s string) string {
	if kind == register.KindAdjustment {
		if m := oldAdjustmentSource().FindStringSubmatch(s); m != nil {
			id, err := strconv.ParseInt(m[1], 10, 64)
			if err == nil {
				return register.AdjustmentSource(id, m[2], strings.Count(m[3], ",")+1)
			}
		}
	}
	if utf8.RuneCountInString(s) <= MaxSourceShown {
		return s
	}
	r := []rune(s)
	return string(r[:MaxSourceShown]) + "… (" + strconv.Itoa(len(r)) + " characters; the whole text with -o json)"
}
