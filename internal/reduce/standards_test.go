package reduce

import (
	"os"
	"strings"
	"testing"

	"cairn/internal/standards"
)

// A second-II loop of 200 m misclosing by −3.7 mm, between the 1984
// table's 8 mm·√E (3.578 mm, from memory) and EN0593's 8.4 mm·√K
// (3.757 mm, read, §4-3; derived: √0.2 = 0.447214): the profile decides.
// A → B → C → A, so that no section is levelled back (a double run).
const loop200 = `# units: m
# class: second-II
%s
point,sight,middle,distance
A,BS,1.5000,40
B,FS,1.0000,40
B,BS,1.2000,30
C,FS,1.4000,30
C,BS,1.3000,30
A,FS,1.6037,30
`

func TestProfileJudgesMisclosure(t *testing.T) {
	book := func(header string) string { return strings.Replace(loop200, "%s\n", header, 1) }
	fgcc := reduce(t, parse(t, book("")), Options{})
	if fgcc.Passed() || fgcc.Standards.Name != standards.FGCC1984 || fgcc.Standards.Version != "2" {
		t.Errorf("default profile: passed %v, standards %+v", fgcc.Passed(), fgcc.Standards)
	}
	if m := fgcc.Misclosures[0]; m.AllowableM < 0.003577 || m.AllowableM > 0.003578 {
		t.Errorf("fgcc-1984 allowable %.6f m, want 0.003578 m", m.AllowableM)
	}
	// Named in the book.
	en := reduce(t, parse(t, book("# standards: en0593\n")), Options{})
	if !en.Passed() || en.Standards.Name != standards.EN0593 {
		t.Errorf("en0593 in the book: passed %v, standards %+v, failures %+v", en.Passed(), en.Standards, en.Failures)
	}
	if m := en.Misclosures[0]; m.AllowableM < 0.0037565 || m.AllowableM > 0.0037567 {
		t.Errorf("en0593 allowable %.7f m, want 0.0037566 m", m.AllowableM)
	}
	for _, c := range en.Checks {
		if c.Kind == CheckMisclosure && !strings.Contains(c.Source, "en0593") {
			t.Errorf("misclosure check source %q does not name the profile", c.Source)
		}
	}
	// Given by the caller, over the book's.
	p, _ := standards.Builtin(standards.FGCC1984)
	if r := reduce(t, parse(t, book("# standards: en0593\n")), Options{Standards: p}); r.Passed() || r.Standards.Name != standards.FGCC1984 {
		t.Errorf("caller's profile over the book's: passed %v, %+v", r.Passed(), r.Standards)
	}
	// A class the profile does not cover, and a file the caller did not read.
	if _, err := Reduce(parse(t, book("# standards: en0593\n")), Options{Class: standards.Third}); err == nil || !strings.Contains(err.Error(), "no tolerances for class third") {
		t.Errorf("en0593 third: %v", err)
	}
	if _, err := Reduce(parse(t, book("# standards: office.std\n")), Options{}); err == nil || !strings.Contains(err.Error(), "was not read") {
		t.Errorf("unread file: %v", err)
	}
}

// The office's file governs the three-wire check too: its 0.002 m fails
// half-intervals 2.5 mm apart that the built-in 0.003 m (EN0593 §4) passes.
func TestOfficeProfileThreeWire(t *testing.T) {
	data, err := os.ReadFile("../../testdata/standards/tallis-county.std")
	if err != nil {
		t.Fatal(err)
	}
	office, err := standards.Parse("tallis-county.std", data)
	if err != nil {
		t.Fatal(err)
	}
	const book = `# units: m
# class: second-II
point,sight,upper,middle,lower
A,BS,1.6000,1.5000,1.4025
B,FS,1.1000,1.0000,0.9000
B,BS,1.3000,1.2000,1.1000
A,FS,1.8000,1.7000,1.6000
`
	if r := reduce(t, parse(t, book), Options{}); len(failuresOf(r, CheckThreeWire)) != 0 {
		t.Errorf("fgcc-1984: three-wire failures %+v", failuresOf(r, CheckThreeWire))
	}
	r := reduce(t, parse(t, book), Options{Standards: office})
	if f := failuresOf(r, CheckThreeWire); len(f) != 1 || f[0].LimitM != 0.002 {
		t.Errorf("tallis-county: three-wire failures %+v", f)
	}
	if r.Standards.Builtin || !strings.HasPrefix(r.Standards.Version, "sha256:") {
		t.Errorf("standards %+v", r.Standards)
	}
}

func failuresOf(r *Result, k CheckKind) []Failure {
	var out []Failure
	for _, f := range r.Failures {
		if f.Kind == k {
			out = append(out, f)
		}
	}
	return out
}
