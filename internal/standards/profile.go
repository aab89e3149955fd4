package standards

import (
	"encoding/hex"
	"fmt"
	"maps"
	"slices"
	"strings"
)

// Field names one tolerance of a profile, as the profile file's columns
// and the JSON keys of Tolerances write it.
type Field string

// The fields of a profile, in the order a profile is shown.
const (
	FieldLoop             Field = "loop_mm_sqrt_km"
	FieldSection          Field = "section_mm_sqrt_km"
	FieldSight            Field = "max_sight_m"
	FieldSetupImbalance   Field = "max_setup_imbalance_m"
	FieldSectionImbalance Field = "max_section_imbalance_m"
	FieldThreeWire        Field = "three_wire_m"
	FieldCheckConnection  Field = "check_connection_mm_sqrt_km"
	FieldGroundClearance  Field = "min_ground_clearance_m"
	FieldAccuracy         Field = "max_accuracy_mm_sqrt_km"
)

// Fields lists every field, in the order a profile is shown.
var Fields = []Field{FieldLoop, FieldSection, FieldSight, FieldSetupImbalance, FieldSectionImbalance,
	FieldThreeWire, FieldCheckConnection, FieldGroundClearance, FieldAccuracy}

// optionalFields may be left out of a profile (0: not given).
var optionalFields = []Field{FieldGroundClearance, FieldAccuracy}

// Optional reports whether a profile may leave f out.
func (f Field) Optional() bool { return slices.Contains(optionalFields, f) }

// Words names the field in plain words, with its unit.
func (f Field) Words() string {
	switch f {
	case FieldLoop:
		return "loop or line misclosure (mm·√km)"
	case FieldSection:
		return "double-run section, backward − forward (mm·√km)"
	case FieldSight:
		return "longest sight (m)"
	case FieldSetupImbalance:
		return "backsight − foresight length per setup (m)"
	case FieldSectionImbalance:
		return "backsight − foresight length accumulated per section (m)"
	case FieldThreeWire:
		return "three-wire half-intervals agree within (m)"
	case FieldCheckConnection:
		return "check connection between published marks (mm·√km)"
	case FieldGroundClearance:
		return "lowest line of sight above ground (m, not checked)"
	case FieldAccuracy:
		return "elevation-difference accuracy b = S/√d (mm/√km)"
	}
	return string(f)
}

// Value returns t's value of field f.
func (t Tolerances) Value(f Field) float64 {
	switch f {
	case FieldLoop:
		return t.LoopMmSqrtKm
	case FieldSection:
		return t.SectionMmSqrtKm
	case FieldSight:
		return t.MaxSightM
	case FieldSetupImbalance:
		return t.MaxSetupImbalanceM
	case FieldSectionImbalance:
		return t.MaxSectionImbalanceM
	case FieldThreeWire:
		return t.ThreeWireM
	case FieldCheckConnection:
		return t.CheckConnectionMmSqrtKm
	case FieldGroundClearance:
		return t.MinGroundClearanceM
	case FieldAccuracy:
		return t.MaxAccuracyMmSqrtKm
	}
	panic("standards: unknown field " + string(f))
}

func (t *Tolerances) set(f Field, v float64) {
	switch f {
	case FieldLoop:
		t.LoopMmSqrtKm = v
	case FieldSection:
		t.SectionMmSqrtKm = v
	case FieldSight:
		t.MaxSightM = v
	case FieldSetupImbalance:
		t.MaxSetupImbalanceM = v
	case FieldSectionImbalance:
		t.MaxSectionImbalanceM = v
	case FieldThreeWire:
		t.ThreeWireM = v
	case FieldCheckConnection:
		t.CheckConnectionMmSqrtKm = v
	case FieldGroundClearance:
		t.MinGroundClearanceM = v
	case FieldAccuracy:
		t.MaxAccuracyMmSqrtKm = v
	default:
		panic("standards: unknown field " + string(f))
	}
}

// Status says how sure cairn is of a value (docs/references.md, "How to
// read the status marks").
type Status string

// The statuses of a value.
const (
	// Read: the value was seen in the source named.
	Read Status = "read"
	// FromMemory: recalled, not checked against the source.
	FromMemory Status = "from memory"
	// Choice: the source gives no such value; cairn takes the one named.
	Choice Status = "cairn's choice"
	// Office: the office's own file gives it; the office answers for it.
	Office Status = "office's own"
)

// Provenance is where one value comes from and how sure we are of it.
type Provenance struct {
	Source string `json:"source"`
	Status Status `json:"status"`
}

// Profile is a named, versioned set of tolerances, one row per class it
// covers.
type Profile struct {
	// Name is the profile's name (fgcc-1984, en0593, or the file's
	// "profile:" line).
	Name string `json:"name"`
	// Title says in a few words what the profile is.
	Title string `json:"title"`
	// Source cites the publication (or, for a file, what the office says
	// its values come from).
	Source string `json:"source"`
	// Builtin is set for the profiles cairn carries.
	Builtin bool `json:"builtin"`
	// Edition is a built-in profile's version string, or the file's own
	// optional "version:" line.
	Edition string `json:"edition,omitempty"`
	// File is the path a file profile was read from, as given; SHA256 is
	// the file's digest and Data its bytes.
	File   string `json:"file,omitempty"`
	SHA256 []byte `json:"-"`
	Data   []byte `json:"-"`
	// Classes are the classes the profile covers, best first.
	Classes []Class `json:"classes"`
	// Notes are remarks kept with the profile (what a source says that
	// cairn does not follow).
	Notes []string `json:"notes,omitempty"`

	rows map[Class]Tolerances
}

// Version identifies the profile's values: a built-in's edition
// ("fgcc-1984 edition 2" is Version "2"), or a file's SHA-256 in hex,
// "sha256:…".
func (p *Profile) Version() string {
	if p.Builtin {
		return p.Edition
	}
	return "sha256:" + hex.EncodeToString(p.SHA256)
}

// Has reports whether the profile gives the tolerances of class c.
func (p *Profile) Has(c Class) bool {
	_, ok := p.rows[c]
	return ok
}

// For returns the tolerances of class c; an error when the profile does
// not cover c.
func (p *Profile) For(c Class) (Tolerances, error) {
	t, ok := p.rows[c]
	if !ok {
		names := make([]string, len(p.Classes))
		for i, k := range p.Classes {
			names[i] = string(k)
		}
		return Tolerances{}, fmt.Errorf("standards profile %s gives no tolerances for class %s (it covers %s)", p.Name, c, strings.Join(names, ", "))
	}
	t.Provenance = maps.Clone(t.Provenance)
	return t, nil
}

// Judged names the profile in one line for a report, with its version:
//
//	fgcc-1984 (edition 2)
//	tallis-county (file tallis.std, sha256:3f5a…)
func (p *Profile) Judged() string {
	if p.Builtin {
		return fmt.Sprintf("%s (built in, edition %s)", p.Name, p.Edition)
	}
	v := hex.EncodeToString(p.SHA256)
	if len(v) > 12 {
		v = v[:12] + "…"
	}
	return fmt.Sprintf("%s (office file %s, sha256:%s)", p.Name, p.File, v)
}

// Summary says in plain words how sure cairn is of the values of class c,
// grouping the fields by status:
//
//	read: three-wire (EN0593 §4), b (NGS); from memory, not checked against
//	the source: loop, section, sight, imbalances, ground clearance
func (t Tolerances) Summary() string {
	by := map[Status][]string{}
	var order []Status
	for _, f := range Fields {
		p, ok := t.Provenance[f]
		if !ok || t.Value(f) == 0 {
			continue
		}
		if _, seen := by[p.Status]; !seen {
			order = append(order, p.Status)
		}
		by[p.Status] = append(by[p.Status], f.Short())
	}
	slices.SortStableFunc(order, func(a, b Status) int { return statusRank(a) - statusRank(b) })
	var parts []string
	for _, s := range order {
		what := string(s)
		switch s {
		case FromMemory:
			what = "from memory, not checked against the source"
		case Office:
			what = "the office's own values, which govern"
		}
		parts = append(parts, what+": "+strings.Join(by[s], ", "))
	}
	return strings.Join(parts, "; ")
}

func statusRank(s Status) int {
	switch s {
	case Office:
		return 0
	case Read:
		return 1
	case Choice:
		return 2
	case FromMemory:
		return 3
	}
	return 4
}

// Short names the field in a word or two.
func (f Field) Short() string {
	switch f {
	case FieldLoop:
		return "loop"
	case FieldSection:
		return "section"
	case FieldSight:
		return "sight length"
	case FieldSetupImbalance:
		return "setup imbalance"
	case FieldSectionImbalance:
		return "section imbalance"
	case FieldThreeWire:
		return "three-wire"
	case FieldCheckConnection:
		return "check connection"
	case FieldGroundClearance:
		return "ground clearance"
	case FieldAccuracy:
		return "accuracy b"
	}
	return string(f)
}

// FromMemoryFields lists the fields of t whose value is from memory.
func (t Tolerances) FromMemoryFields() []Field {
	var out []Field
	for _, f := range Fields {
		if p, ok := t.Provenance[f]; ok && p.Status == FromMemory && t.Value(f) != 0 {
			out = append(out, f)
		}
	}
	return out
}

// Ref is what a run keeps of the profile that judged it.
type Ref struct {
	// Name is the profile's name; Version its Profile.Version.
	Name    string `json:"name"`
	Version string `json:"version"`
	// Title and Source describe it; Builtin says whether cairn carries it,
	// File where a file profile was read from.
	Title   string `json:"title"`
	Source  string `json:"source"`
	Builtin bool   `json:"builtin"`
	File    string `json:"file,omitempty"`
}

// Ref returns what a run keeps of p.
func (p *Profile) Ref() Ref {
	return Ref{Name: p.Name, Version: p.Version(), Title: p.Title, Source: p.Source, Builtin: p.Builtin, File: p.File}
}

// Words says in one line which profile judged a run and what kind of
// profile it is:
//
//	fgcc-1984, built in, edition 2
//	tallis-county, the office's file tallis.std, sha256:3f5a…
func (r Ref) Words() string {
	if r.Name == "" {
		return "not recorded (recorded before cairn kept the standards profile; the built-in 1984 table of the time, from memory)"
	}
	if r.Builtin {
		return fmt.Sprintf("%s, built in, edition %s", r.Name, r.Version)
	}
	return fmt.Sprintf("%s, the office's file %s, %s", r.Name, r.File, r.Version)
}
