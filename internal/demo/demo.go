// Package demo builds a small register of the invented Tallis County, with
// the town of Orrin Bay on the Mere River.
//
// Everything here is invented: the county, the town, the river, the marks,
// their positions (placed around an arbitrary spot in open inland country,
// 41.62° N, 97.95° W, where no mark of these names exists), their heights,
// and every publication cited. None of it belongs to a real mark.
package demo

import (
	"context"
	"fmt"
	"time"

	"cairn/internal/register"
)

// Step is one stage of building the demo register.
type Step struct {
	Name string
	Run  func(ctx context.Context, r *register.Register) error
}

// Steps build the demo register in order. Later stages (recording field
// books, adjusting, publishing) are appended here.
var Steps = []Step{
	{"datums", addDatums},
	{"marks", addMarks},
	{"condition reports", addConditions},
	{"published heights", addHeights},
	{"field books", recordBooks},
	{"adjustments", adjustRuns},
	{"the life of a mark", markLife},
}

// ResetMark is the mark the demo resets in place; ReplacedMark the one it
// retires for a new mark, NewMark.
const (
	ResetMark    = "TC-0419"
	ReplacedMark = "TC-0405"
	NewMark      = "TC-0405A"
)

// markLife resets one mark in place after a flood cracked its headwall
// (its heights before the reset stay in the register, shown as before the
// reset and never held again), and retires one destroyed by road works for
// a new mark set beside it.
func markLife(ctx context.Context, r *register.Register) error {
	for _, x := range []struct{ cond, on, note string }{
		{"disturbed", "2025-03-10", "headwall cracked and shifted by the March flood"},
		{"reset", "2025-04-02", "headwall rebuilt on its old footing; square cut again at the same place, to be levelled again"},
	} {
		on, err := date(x.on)
		if err != nil {
			return err
		}
		if _, err := r.MarkCondition(ctx, register.MarkConditionParams{Designation: ResetMark, Condition: x.cond,
			Note: x.note, ObservedOn: on, RecordedBy: Clerk}); err != nil {
			return err
		}
	}
	on, err := date("2025-05-06")
	if err != nil {
		return err
	}
	if _, err := r.MarkCondition(ctx, register.MarkConditionParams{Designation: ReplacedMark, Condition: "destroyed",
		Note: "post broken out by the road works; disk found in the spoil", ObservedOn: on, RecordedBy: Clerk}); err != nil {
		return err
	}
	lat, lon := ll(41.61880, -97.94745)
	_, err = r.MarkRetire(ctx, register.MarkRetireParams{Designation: ReplacedMark, On: on, Today: time.Now(),
		Reason: "post broken out when Mere River Road was widened; a new disk set 15 m south-west",
		By:     Clerk,
		Replacement: &register.MarkAddParams{Designation: NewMark, Type: "bronze disk", Setting: "concrete post, flush with the ground",
			Stamping: "TC 0405A 2025", Directions: "Mere River Road, 55 m south of the grain elevator gate, new west verge",
			Lat: lat, Lon: lon, CreatedBy: Clerk}})
	return err
}

// HistoryMark is the mark whose history the demo shows: it has several
// versions, in two units.
const HistoryMark = "TC-0412"

// Clerk is who the demo records as having entered everything.
const Clerk = "demo (Tallis County survey office)"

func addDatums(ctx context.Context, r *register.Register) error {
	for _, d := range []register.DatumAddParams{
		{Code: "NAVD88", Name: "North American Vertical Datum of 1988",
			Note: "the national datum; county heights since 1994"},
		{Code: "OBLD61", Name: "Orrin Bay Local Datum 1961",
			Note: "invented local datum of the Orrin Bay town works department, zero near the Mere River low water of 1961"},
	} {
		d.By = Clerk
		if _, err := r.DatumAdd(ctx, d); err != nil {
			return err
		}
	}
	return nil
}

func ll(lat, lon float64) (*float64, *float64) { return &lat, &lon }

func addMarks(ctx context.Context, r *register.Register) error {
	type m struct {
		des, typ, setting, stamping, toReach string
		lat, lon                             float64
	}
	for _, x := range []m{
		{"TC-0401", "bronze disk", "granite steps of the Orrin Bay town hall", "TC 0401 1961",
			"Orrin Bay town hall, Front Street; top step, east end, 0.3 m from the wall", 41.62410, -97.95120},
		{"TC-0405", "bronze disk", "concrete post, flush with the ground", "TC 0405 1961",
			"Mere River Road, 40 m south of the grain elevator gate, west verge", 41.61875, -97.94730},
		{"TC-0408", "brass rod", "driven rod in a sleeve with a logo cap", "TC 0408 1978",
			"Orrin Bay water tower compound, inside the gate, 2 m north of the fence post", 41.62760, -97.94260},
		{"TC-0412", "bronze disk", "north wingwall of the Mere River bridge", "TC 0412 1961",
			"Mere River bridge on County Road 9, north wingwall, upstream side, 0.5 m below the rail", 41.62050, -97.95860},
		{"TC-0415", "bronze disk", "concrete post, 0.2 m above the ground", "TC 0415 1978",
			"County Road 9, 1.1 km north of the Mere River bridge, east ditch by the culvert", 41.63040, -97.95880},
		{"TC-0419", "chiseled square", "top of the concrete headwall", "none (chiseled square)",
			"Orrin Bay storm drain outfall at the end of Mill Lane, downstream headwall", 41.61590, -97.96310},
		{"TC-0423", "bronze disk", "concrete footing of the old depot", "TC 0423 1961",
			"former rail depot lot, Depot Street, southwest corner of the footing", 41.62280, -97.93640},
		{"TC-0420", "bronze disk", "concrete post at the levee toe", "TC 0420 1988",
			"Mere River levee, landward toe at the pump station, 3 m west of the outlet pipe", 41.61720, -97.94410},
		{"TC-0427", "bronze disk", "top of the floodgate abutment", "TC 0427 1988",
			"Mere River levee floodgate at Ferry Lane, south abutment, downstream corner", 41.61240, -97.93180},
		{"TC-0430", "aluminium disk", "rod mark, 3 m deep, in a sleeve", "TC 0430 2019",
			"Tallis County road yard, Quarry Road, 15 m east of the fuel island", 41.63510, -97.92870},
	} {
		lat, lon := ll(x.lat, x.lon)
		if _, err := r.MarkAdd(ctx, register.MarkAddParams{Designation: x.des, Type: x.typ, Setting: x.setting,
			Stamping: x.stamping, Directions: x.toReach, Lat: lat, Lon: lon, CreatedBy: Clerk}); err != nil {
			return err
		}
	}
	return nil
}

func addConditions(ctx context.Context, r *register.Register) error {
	type c struct{ des, cond, on, note string }
	for _, x := range []c{
		{"TC-0401", "good", "2023-04-11", "disk clean and tight"},
		{"TC-0412", "good", "2019-06-03", "recovered for the county re-levelling"},
		{"TC-0412", "good", "2023-04-11", "disk sound, wingwall uncracked"},
		{"TC-0415", "good", "2019-06-04", "post plumb"},
		{"TC-0415", "disturbed", "2024-05-14", "post tilted about 10 degrees, struck by a mower"},
		{"TC-0419", "good", "2019-06-05", ""},
		{"TC-0423", "not-found", "2023-04-12", "depot footing removed; lot regraded"},
		{"TC-0430", "good", "2019-06-06", "set new for the 2019 re-levelling"},
		{"TC-0423", "good", "2024-06-03", "recovered under 0.2 m of fill while running the levee line"},
		{"TC-0420", "good", "2024-06-03", ""},
		{"TC-0427", "good", "2024-06-03", ""},
	} {
		on, err := date(x.on)
		if err != nil {
			return err
		}
		if _, err := r.MarkCondition(ctx, register.MarkConditionParams{Designation: x.des, Condition: x.cond,
			Note: x.note, ObservedOn: on, RecordedBy: Clerk}); err != nil {
			return err
		}
	}
	return nil
}

// Invented publications.
const (
	book1994 = "Tallis County Benchmark Book, 1994 edition (invented)"
	errata   = "Tallis County Surveyor, errata sheet 3 to the 1994 Benchmark Book, 1996 (invented)"
	report19 = "Tallis County Vertical Control Report 2019, table 4 (invented)"
	town1961 = "Orrin Bay Works Department level book 1961, abstract of heights (invented)"
	levee88  = "Mere River flood works 1988, levee benchmark sheet 2 (invented)"
)

func addHeights(ctx context.Context, r *register.Register) error {
	type h struct{ des, datum, value, unit, class, kind, source, reason, inForce string }
	for _, x := range []h{
		{"TC-0401", "OBLD61", "118.62", "ft", "third", "", town1961, "entered from the town's 1961 abstract", "1961-11-20"},
		{"TC-0412", "OBLD61", "112.47", "ft", "third", "", town1961, "entered from the town's 1961 abstract", "1961-11-20"},
		{"TC-0419", "OBLD61", "96.35", "ft", "third", "", town1961, "entered from the town's 1961 abstract", "1961-11-20"},
		{"TC-0420", "OBLD61", "3.512", "m", "second-I", "", levee88, "entered from the levee sheets", "1988-08-01"},
		{"TC-0427", "OBLD61", "5.104", "m", "second-I", "", levee88, "entered from the levee sheets", "1988-08-01"},
		{"TC-0401", "NAVD88", "776.12", "usft", "second-II", "", book1994 + ", p. 11", "entered from the 1994 benchmark book", "1994-06-01"},
		{"TC-0405", "NAVD88", "771.40", "usft", "second-II", "", book1994 + ", p. 11", "entered from the 1994 benchmark book", "1994-06-01"},
		{"TC-0408", "NAVD88", "781.07", "usft", "second-II", "", book1994 + ", p. 12", "entered from the 1994 benchmark book", "1994-06-01"},
		{"TC-0412", "NAVD88", "769.83", "usft", "second-II", "", book1994 + ", p. 12", "entered from the 1994 benchmark book", "1994-06-01"},
		{"TC-0415", "NAVD88", "768.29", "usft", "second-II", "", book1994 + ", p. 12", "entered from the 1994 benchmark book", "1994-06-01"},
		{"TC-0419", "NAVD88", "753.71", "usft", "second-II", "", book1994 + ", p. 13", "entered from the 1994 benchmark book", "1994-06-01"},
		{"TC-0423", "NAVD88", "778.36", "usft", "second-II", "", book1994 + ", p. 13", "entered from the 1994 benchmark book", "1994-06-01"},
		{"TC-0412", "NAVD88", "769.88", "usft", "second-II", register.KindCorrection, errata,
			"transcription error in the 1994 book: 769.83 should read 769.88", "1994-06-01"},
		{"TC-0412", "NAVD88", "234.662", "m", "second-I", "", report19, "county re-levelling of 2019, published in metres", "2019-09-16"},
		{"TC-0430", "NAVD88", "238.915", "m", "second-I", "", report19, "new mark of the 2019 re-levelling", "2019-09-16"},
		{"TC-0405", "NAVD88", "235.124", "m", "second-I", "", report19, "county re-levelling of 2019, published in metres", "2019-09-16"},
	} {
		// Each height is in force from the date its source gives (invented):
		// the errata sheet of 1996 corrects the 1994 book from the book's
		// own date, as a correction does.
		from, err := date(x.inForce)
		if err != nil {
			return err
		}
		if _, err := r.HeightSet(ctx, register.HeightSetParams{Designation: x.des, Datum: x.datum, Value: x.value,
			Unit: x.unit, Class: x.class, Kind: x.kind, Source: x.source, Reason: x.reason, RecordedBy: Clerk,
			InForceFrom: &from}); err != nil {
			return err
		}
	}
	return nil
}

// Build runs every step on r, an empty register.
func Build(ctx context.Context, r *register.Register) error {
	for _, s := range Steps {
		if err := s.Run(ctx, r); err != nil {
			return fmt.Errorf("demo %s: %w", s.Name, err)
		}
	}
	return nil
}

func date(s string) (t time.Time, err error) {
	t, err = time.Parse("2006-01-02", s)
	if err != nil {
		return t, fmt.Errorf("demo date %q: %w", s, err)
	}
	return t, nil
}
