package standards

import "strings"

// The built-in profiles. Each value carries its source and status; the
// tables and the passages read are in docs/references.md#accuracy-classes.
// A built-in's edition changes whenever one of its values or statuses
// does, so that a recorded run names the values that judged it.
const (
	// FGCC1984 is the Federal Geodetic Control Committee's 1984 table, the
	// default profile.
	FGCC1984 = "fgcc-1984"
	// EN0593 is the US Army Engineer School's course values.
	EN0593 = "en0593"
)

// Sources of the built-in values.
const (
	srcFGCC    = "FGCC 1984, Standards and Specifications for Geodetic Control Networks, §3.5 (geodetic leveling)"
	srcNGS     = "National Geodetic Survey, Standards & Requirements for Leveling (after FGCC 1984), elevation accuracy standards"
	srcEN0593  = "US Army Engineer School, subcourse EN0593, §4-3 (second-order leveling, classes I and II)"
	srcEN05934 = "US Army Engineer School, subcourse EN0593, §4 (three-wire and stadia sight lengths)"
	srcChoice  = "a check connection is a line between two published marks, judged by the loop-or-line column"
)

// fgccRow is one class of the 1984 field-procedure table as cairn holds it.
type fgccRow struct {
	c                                                 Class
	section, loop, setup, sectionImb, sight, clear, b float64
}

// The 1984 table (from memory, but b, which is read from the NGS page).
var fgccTable = []fgccRow{
	{FirstI, 3, 4, 2, 4, 50, 0.5, 0.5},
	{FirstII, 4, 5, 5, 10, 60, 0.5, 0.7},
	{SecondI, 6, 6, 5, 10, 60, 0.5, 1.0},
	{SecondII, 8, 8, 10, 10, 70, 0.5, 1.3},
	{Third, 12, 12, 10, 10, 90, 0.5, 2.0},
}

func fgccTolerances(r fgccRow, profile string) Tolerances {
	mem := Provenance{Source: srcFGCC, Status: FromMemory}
	t := Tolerances{Class: r.c, Profile: profile,
		SectionMmSqrtKm: r.section, LoopMmSqrtKm: r.loop, MaxSetupImbalanceM: r.setup, MaxSectionImbalanceM: r.sectionImb,
		MaxSightM: r.sight, MinGroundClearanceM: r.clear, MaxAccuracyMmSqrtKm: r.b,
		ThreeWireM: ThreeWireM, CheckConnectionMmSqrtKm: r.loop,
		Provenance: map[Field]Provenance{
			FieldLoop: mem, FieldSection: mem, FieldSight: mem, FieldSetupImbalance: mem,
			FieldSectionImbalance: mem, FieldGroundClearance: mem,
			FieldAccuracy:        {Source: srcNGS, Status: Read},
			FieldThreeWire:       {Source: srcEN05934 + "; FGCC 1984's own reading check was not read", Status: Read},
			FieldCheckConnection: {Source: srcChoice, Status: Choice},
		},
	}
	return t
}

func fgcc1984() *Profile {
	p := &Profile{
		Name:    FGCC1984,
		Title:   "Federal Geodetic Control Committee, 1984 leveling table",
		Source:  "Federal Geodetic Control Committee, Standards and Specifications for Geodetic Control Networks, Rockville MD, September 1984, §3.5",
		Builtin: true,
		Edition: "2",
		Notes: []string{
			"The closure constants, sight lengths, imbalances and ground clearance are from memory: the stored copy of the NGS text of the 1984 publication could be read only as far as its preface.",
			"The loop column is applied also to a line closing between two held marks: cairn's choice.",
			"Montana State University's ITCM 410 lab applies 3/4/6/8/12 mm·√km to the loop perimeter, where this table's first-order loop column says 4 and 5.",
		},
		rows: map[Class]Tolerances{},
	}
	for _, r := range fgccTable {
		p.Classes = append(p.Classes, r.c)
		p.rows[r.c] = fgccTolerances(r, FGCC1984)
	}
	return p
}

// en0593 gives the course's second-order values; what the course does not
// give is taken from the 1984 table and marked so.
func en0593() *Profile {
	p := &Profile{
		Name:    EN0593,
		Title:   "US Army Engineer School, subcourse EN0593, second-order leveling",
		Source:  "US Army Engineer School, subcourse EN0593, Precise Differential Leveling, §4-3 and §4",
		Builtin: true,
		Edition: "1",
		Notes: []string{
			"EN0593 gives 8.4 mm·√K for second order class I as well as class II, K the length of the line between ties to existing bench marks.",
			"EN0593 accepts half-intervals differing by exactly 3 mm only after reobservation; cairn cannot tell a reobservation in a book and accepts exactly 3 mm.",
			"Values EN0593 does not give (section, sight length, section imbalance, ground clearance, b) are the fgcc-1984 profile's, with their status.",
		},
		rows: map[Class]Tolerances{},
	}
	read := Provenance{Source: srcEN0593, Status: Read}
	for _, r := range fgccTable {
		if r.c != SecondI && r.c != SecondII {
			continue
		}
		t := fgccTolerances(r, EN0593)
		t.LoopMmSqrtKm, t.CheckConnectionMmSqrtKm = 8.4, 8.4
		t.Provenance[FieldLoop] = read
		t.Provenance[FieldCheckConnection] = Provenance{Source: srcChoice + " (EN0593's 8.4 mm·√K is for the line between ties)", Status: Choice}
		t.MaxSetupImbalanceM = 10
		t.Provenance[FieldSetupImbalance] = Provenance{Source: srcEN05934 + ": about 10 m (30 stadia intervals at 1/300)", Status: Read}
		t.Provenance[FieldThreeWire] = Provenance{Source: srcEN05934 + "; exactly 3 mm only after reobservation", Status: Read}
		for _, f := range []Field{FieldSection, FieldSight, FieldSectionImbalance, FieldGroundClearance} {
			t.Provenance[f] = Provenance{Source: srcFGCC + " (EN0593 gives none)", Status: FromMemory}
		}
		p.Classes = append(p.Classes, r.c)
		p.rows[r.c] = t
	}
	return p
}

var builtins = []*Profile{fgcc1984(), en0593()}

func init() {
	for _, p := range builtins {
		for c, t := range p.rows {
			t.Source = p.Name + ": " + p.Source + " — " + t.Summary()
			p.rows[c] = t
		}
	}
}

// Builtins returns the built-in profiles, the default first.
func Builtins() []*Profile { return builtins }

// Builtin returns the built-in profile of that name (case-insensitive).
func Builtin(name string) (*Profile, bool) {
	for _, p := range builtins {
		if strings.EqualFold(p.Name, strings.TrimSpace(name)) {
			return p, true
		}
	}
	return nil, false
}

// Default is the profile that judges a run that names none: fgcc-1984.
func Default() *Profile { return builtins[0] }
