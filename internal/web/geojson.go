package web

import (
	"encoding/json"
	"time"

	"cairn/internal/register"
	"cairn/internal/store"
)

// The site's own small GeoJSON encoder (RFC 7946): Points with
// [longitude, latitude], no crs member (§4: WGS 84 always), one Feature
// per mark whose id is its designation. A mark with no position is a
// Feature with a null geometry (§3.2). encoding/json writes every string
// as valid JSON, with <, > and & escaped, so no text of the register can
// leave its string.

type link struct {
	Href     string `json:"href"`
	Rel      string `json:"rel"`
	Type     string `json:"type,omitempty"`
	Title    string `json:"title,omitempty"`
	Hreflang string `json:"hreflang,omitempty"`
}

type geometry struct {
	Type        string     `json:"type"`
	Coordinates [2]float64 `json:"coordinates"`
}

type featureJSON struct {
	Type       string       `json:"type"`
	ID         string       `json:"id"`
	Geometry   *geometry    `json:"geometry"`
	Properties featureProps `json:"properties"`
	Links      []link       `json:"links,omitempty"`
}

// featureProps are a mark's properties, with the keys of the command
// line's JSON (docs/output.md: mark, snake_case, the unit last).
type featureProps struct {
	Mark           string       `json:"mark"`
	Aliases        []string     `json:"aliases"`
	Kind           string       `json:"kind"`
	Setting        string       `json:"setting"`
	Stamping       string       `json:"stamping"`
	Description    string       `json:"description"`
	Directions     string       `json:"directions"`
	PositionSource string       `json:"position_source"`
	Condition      string       `json:"condition"`
	ConditionOn    *string      `json:"condition_observed_on"`
	Retired        *string      `json:"retired_on"`
	Heights        []heightJSON `json:"heights"`
	Doubts         []doubtJSON  `json:"doubts"`
	AsOf           *string      `json:"as_of_utc"`
	Cautions       []string     `json:"cautions"`
}

type heightJSON struct {
	Datum       string  `json:"datum"`
	Value       *string `json:"height_in_unit"` // null for a withdrawal
	Unit        *string `json:"unit"`
	Version     int     `json:"version"`
	Class       string  `json:"class"`
	Provenance  string  `json:"provenance"`
	InForceFrom string  `json:"in_force_from_utc"`
	Withdrawn   bool    `json:"withdrawn"`
}

type doubtJSON struct {
	Kind    string `json:"kind"`
	Word    string `json:"word"`
	Datum   string `json:"datum,omitempty"`
	Version int    `json:"version,omitempty"`
	Warning string `json:"warning"`
}

type featureCollectionJSON struct {
	Type           string        `json:"type"`
	Features       []featureJSON `json:"features"`
	Links          []link        `json:"links"`
	NumberReturned int           `json:"numberReturned"`
}

func utcText(t time.Time) string { return t.UTC().Format(time.RFC3339Nano) }

// encodeFeature is a mark as a GeoJSON Feature.
func encodeFeature(f register.Feature, asOf *time.Time, cautions []string) featureJSON {
	m := f.Mark
	out := featureJSON{Type: "Feature", ID: m.Designation}
	if m.Lat != nil && m.Lon != nil {
		out.Geometry = &geometry{Type: "Point", Coordinates: [2]float64{*m.Lon, *m.Lat}}
	}
	p := featureProps{Mark: m.Designation, Aliases: m.Aliases, Kind: m.Type, Setting: m.Setting, Stamping: m.Stamping,
		Description: m.Description, Directions: m.Directions, PositionSource: m.PositionSource, Condition: "unknown",
		Heights: []heightJSON{}, Doubts: []doubtJSON{}, Cautions: cautions}
	if p.Aliases == nil {
		p.Aliases = []string{}
	}
	if c := m.Latest; c != nil {
		p.Condition = c.Condition
		on := c.ObservedOn.Format("2006-01-02")
		p.ConditionOn = &on
	}
	if m.Retired != nil {
		on := m.Retired.On.Format("2006-01-02")
		p.Retired = &on
	}
	if asOf != nil {
		s := utcText(*asOf)
		p.AsOf = &s
	}
	for _, h := range f.Heights {
		p.Heights = append(p.Heights, encodeHeight(h))
	}
	for _, d := range f.Doubts {
		p.Doubts = append(p.Doubts, doubtJSON{Kind: d.Kind, Word: d.Word, Datum: d.Datum, Version: d.Version, Warning: d.Warning()})
	}
	out.Properties = p
	return out
}

func encodeHeight(h store.Height) heightJSON {
	return heightJSON{Datum: h.DatumCode, Value: h.Value, Unit: h.Unit, Version: h.Version, Class: h.Class,
		Provenance: h.SourceKind, InForceFrom: utcText(h.InForceFrom), Withdrawn: h.Value == nil}
}

// marshal is v as JSON and a newline.
func marshal(v any) ([]byte, error) {
	b, err := json.Marshal(v)
	return append(b, '\n'), err
}
