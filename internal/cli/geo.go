package cli

import (
	"time"

	"cairn/internal/geojson"
	"cairn/internal/register"
	"cairn/internal/units"
)

// The GeoJSON of the listing commands (docs/output.md, "GeoJSON"): one
// feature per row of the listing, its geometry the mark's current position
// (null for a mark with none, RFC 7946 §3.2), its properties the row's
// fields under fixed snake_case names with the unit last. Doubts are
// their words, as in the DOUBT column ("" for none).

// markFeature is mark list's feature of a mark.
func markFeature(lm register.ListedMark, near bool) geojson.Feature {
	m := lm.Mark
	var retiredOn, replacedBy any
	if m.Retired != nil {
		retiredOn = m.Retired.On.Format("2006-01-02")
		replacedBy = nullable(m.Retired.ReplacedBy)
	}
	aliases := m.Aliases
	if aliases == nil {
		aliases = []string{}
	}
	props := []geojson.Property{
		{Name: "mark", Value: m.Designation},
		{Name: "type", Value: m.Type},
		{Name: "setting", Value: m.Setting},
		{Name: "stamping", Value: m.Stamping},
		{Name: "directions", Value: m.Directions},
		{Name: "description", Value: m.Description},
		{Name: "position_source", Value: m.PositionSource},
		{Name: "description_version", Value: m.Version},
		{Name: "aliases", Value: aliases},
		{Name: "condition", Value: condition(m)},
		{Name: "retired_on", Value: retiredOn},
		{Name: "replaced_by", Value: replacedBy},
		{Name: "replaces", Value: nullable(m.Replaces)},
		{Name: "doubts", Value: lm.Doubts.Words()},
	}
	if near && m.DistanceM != nil {
		props = append(props, geojson.Property{Name: "distance_km", Value: *m.DistanceM / 1000})
	}
	return geojson.Feature{Lon: m.Lon, Lat: m.Lat, Properties: props}
}

// heightFeature is height list's feature of a version: as published
// (height_in_unit and unit) and converted exactly to metres (height_m); a
// withdrawal has null heights.
func heightFeature(h register.CurrentHeight) geojson.Feature {
	j := toHeightJSON(h.Height, units.Metre)
	var metres any
	if j.Converted != nil {
		metres = j.Converted.Value
	}
	f := geojson.Feature{Properties: []geojson.Property{
		{Name: "mark", Value: h.Designation},
		{Name: "datum", Value: h.DatumCode},
		{Name: "version", Value: h.Version},
		{Name: "withdrawn", Value: h.Value == nil},
		{Name: "height_m", Value: metres},
		{Name: "height_in_unit", Value: h.Value},
		{Name: "unit", Value: h.Unit},
		{Name: "decimals", Value: h.Decimals},
		{Name: "class", Value: h.Class},
		{Name: "source_kind", Value: h.SourceKind},
		{Name: "source", Value: h.Source},
		{Name: "in_force_from_utc", Value: h.InForceFrom.UTC().Format(time.RFC3339)},
		{Name: "recorded_utc", Value: h.CommittedAt.UTC().Format(time.RFC3339)},
		{Name: "current", Value: h.Current},
		{Name: "doubts", Value: h.Doubts.Words()},
	}}
	if h.Position != nil {
		f.Lon, f.Lat = &h.Position.Lon, &h.Position.Lat
	}
	return f
}
