package cli

import (
	"fmt"
	"maps"
	"slices"
	"strconv"
	"strings"

	"cairn/internal/reduce"
	"cairn/internal/register"
	"cairn/internal/store"
	"cairn/internal/units"
)

// runHeldJSON is a held height in machine output: the height in the book's
// unit as the reduction used it, and where it came from ("typed", or
// "register" with the version held).
type runHeldJSON struct {
	Mark string `json:"mark"`
	// Height is the held height in Unit (the book's), as decimal text.
	Height string `json:"height"`
	Unit   string `json:"unit"`
	From   string `json:"from"`
	// HeightID, Version, Datum, PublishedValue and PublishedUnit name the
	// version held from the register (null for a typed height).
	HeightID       *int64  `json:"height_id"`
	Version        *int    `json:"version"`
	Datum          *string `json:"datum"`
	PublishedValue *string `json:"published_value"`
	PublishedUnit  *string `json:"published_unit"`
	// ConditionReason says why a mark in doubt was held ("" when it was
	// not in doubt).
	ConditionReason string `json:"condition_reason"`
}

// Where held heights come from.
const (
	heldTyped    = "typed"
	heldRegister = "register"
)

// checkHeldJSON describes the held heights of a check: typed ones in the
// book's unit, and those held from the register with their versions, by
// mark.
// A mark held in doubt carries reason, why it was allowed.
func checkHeldJSON(r *reduce.Result, hold map[string]float64, held []register.HeldHeight, reason string) []runHeldJSON {
	out := []runHeldJSON{}
	for _, name := range slices.Sorted(maps.Keys(hold)) {
		out = append(out, runHeldJSON{Mark: name, Height: strconv.FormatFloat(hold[name], 'f', -1, 64), Unit: string(r.Unit), From: heldTyped})
	}
	for _, h := range held {
		v := h.Version
		j := runHeldJSON{Mark: h.Designation, Height: h.Value, Unit: string(h.Unit), From: heldRegister,
			HeightID: &v.ID, Version: &v.Version, Datum: &v.DatumCode, PublishedValue: v.Value, PublishedUnit: v.Unit}
		if h.InDoubt {
			j.ConditionReason = reason
		}
		out = append(out, j)
	}
	slices.SortFunc(out, func(a, b runHeldJSON) int { return strings.Compare(a.Mark, b.Mark) })
	return out
}

// toHeldJSON describes the held heights a run keeps.
func toHeldJSON(unit string, held []store.RunHeld) []runHeldJSON {
	out := []runHeldJSON{}
	for _, h := range held {
		j := runHeldJSON{Mark: h.Designation, Height: h.Value, Unit: unit, From: heldTyped, ConditionReason: h.ConditionReason}
		if h.HeightID != nil {
			j.From, j.HeightID, j.Version, j.Datum, j.PublishedValue, j.PublishedUnit = heldRegister, h.HeightID, h.Version, h.DatumCode, h.PublishedValue, h.PublishedUnit
		}
		out = append(out, j)
	}
	return out
}

// heldNotes says, by mark, where the heights held from the register came
// from: "register NAVD88 v2: 3.512 m".
func heldNotes(held []runHeldJSON) map[string]string {
	out := map[string]string{}
	for _, h := range held {
		if h.From != heldRegister {
			continue
		}
		note := fmt.Sprintf("register %s v%d: %s %s", deref(h.Datum), deref(h.Version), deref(h.PublishedValue), deref(h.PublishedUnit))
		if h.ConditionReason != "" {
			note += ", held in doubt: " + h.ConditionReason
		}
		out[h.Mark] = note
	}
	return out
}

// heldTable lists a run's held heights.
func heldTable(unit string, held []runHeldJSON) Table {
	u := units.Unit(unit)
	t := Table{Headers: []string{"MARK", "HELD (" + unit + ")", "FROM", "DATUM", "VERSION", "AS PUBLISHED", "CONDITION REASON"}}
	for _, h := range held {
		shown := h.Height
		if v, err := strconv.ParseFloat(h.Height, 64); err == nil {
			shown = units.Format(v, reduce.Decimals(u))
		}
		datum, version, published := "-", "-", "-"
		if h.From == heldRegister {
			datum, version, published = deref(h.Datum), strconv.Itoa(deref(h.Version)), deref(h.PublishedValue)+" "+deref(h.PublishedUnit)
		}
		reason := h.ConditionReason
		if reason == "" {
			reason = "-"
		}
		t.AddRow(h.Mark, shown, h.From, datum, version, published, reason)
	}
	return t
}
