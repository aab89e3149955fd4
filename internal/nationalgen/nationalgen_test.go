package nationalgen_test

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"cairn/internal/nationalgen"
	"cairn/internal/register"
	"cairn/internal/registertest"
)

// The generated register: the same count and seed give the same bytes;
// every position lies in the region; `cairn import`'s use case takes the
// files whole (marks, reports and five versions a mark, in recorded
// order), the evidence and the hash chains verify, and a mark's height in
// force in 2000 is its 1994 version.
func TestGeneratedRegisterImports(t *testing.T) {
	t.Parallel()
	const n = 1200
	a, b := t.TempDir(), t.TempDir()
	lay, err := nationalgen.Write(a, n, 7)
	if err != nil || lay != (nationalgen.Layout{Marks: n, Conditions: 3 * n, Heights: 5 * n}) {
		t.Fatalf("Write: %+v %v", lay, err)
	}
	if _, err := nationalgen.Write(b, n, 7); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{"marks.csv", "conditions.csv", "heights.csv"} {
		x, _ := os.ReadFile(filepath.Join(a, f))
		y, _ := os.ReadFile(filepath.Join(b, f))
		if !bytes.Equal(x, y) {
			t.Errorf("%s differs between two runs of the same seed", f)
		}
	}
	marks, err := os.ReadFile(filepath.Join(a, "marks.csv"))
	if err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(bytes.NewReader(marks)).ReadAll()
	if err != nil || len(recs) != n+1 {
		t.Fatalf("marks.csv: %v, %d records", err, len(recs))
	}
	for _, r := range recs[1:] {
		lat, _ := strconv.ParseFloat(r[6], 64)
		lon, _ := strconv.ParseFloat(r[7], 64)
		if lat < nationalgen.Region.South || lat > nationalgen.Region.North || lon < nationalgen.Region.West || lon > nationalgen.Region.East {
			t.Fatalf("%s at %v, %v: outside the region", r[0], lat, lon)
		}
	}

	fx := registertest.Setup(t)
	fx.Datum(t, registertest.DatumOpts{})
	res, err := fx.Reg.Import(fx.Ctx, register.ImportParams{Dir: a, RecordedBy: "generator"})
	if err != nil || res.Counts.Marks != n || res.Counts.Conditions != 3*n || res.Counts.Heights != 5*n {
		t.Fatalf("import: %+v %v", res.Counts, err)
	}
	if rep, err := fx.Reg.EvidenceVerify(fx.Ctx, nil); err != nil || len(rep.Breaks) != 0 {
		t.Fatalf("evidence: %v %+v", err, rep.Breaks)
	}
	if rep, err := fx.Reg.AuditVerify(fx.Ctx); err != nil || len(rep.Breaks) != 0 || rep.Versions != 5*n || rep.Chains != n {
		t.Fatalf("audit: %v, %d chains of %d versions, %+v", err, rep.Chains, rep.Versions, rep.Breaks)
	}
	asOf := time.Date(2000, 1, 1, 0, 0, 0, 0, time.UTC)
	v, err := fx.Reg.HeightShow(fx.Ctx, register.HeightShowParams{Designation: nationalgen.Designation(n - 1), Datum: "NAVD88", AsOf: &asOf})
	if err != nil || len(v.Heights) != 1 || v.Heights[0].Version != 3 {
		t.Fatalf("in force in 2000: %+v %v, want version 3 (1994)", v.Heights, err)
	}
}

// "Did you mean" among generated designations that share their prefixes
// by the hundred (more than the hint reads for one prefix), and the case
// of issue 15: AB0826X named AA0826, a mark elsewhere, when the first
// designations of the letter were read and AB0826 was not among them.
// The answers are worked by hand: each typo is one edit (OSA distance:
// a letter left out, one too many, two neighbours swapped) from the mark
// named and at least two from every other; a typo two edits from its
// mark may be answered by that mark or by none, never by another.
func TestDidYouMeanAmongGeneratedNames(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	const n = 600
	if _, err := nationalgen.Write(dir, n, 3); err != nil {
		t.Fatal(err)
	}
	// AA0000 to AA0299 sort before AB0826 and AB0862, as the marks of a
	// letter filled the old hint's read.
	f, err := os.OpenFile(filepath.Join(dir, "marks.csv"), os.O_APPEND|os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	for i := range 300 {
		fmt.Fprintf(f, "AA%04d,,brass disk,,,,,,,generator\n", i)
	}
	fmt.Fprintf(f, "AB0826,,brass disk,,,,,,,generator\nAB0862,,brass disk,,,,,,,generator\n")
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	fx := registertest.Setup(t)
	fx.Datum(t, registertest.DatumOpts{})
	if _, err := fx.Reg.Import(fx.Ctx, register.ImportParams{Dir: dir, RecordedBy: "generator"}); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		typed, want string
		mayBeNone   bool
	}{
		{"TC-0000417X", "TC-0000417", false}, // one letter too many
		{"TC-0000599X", "TC-0000599", false},
		{"TC-000417", "TC-0000417", true},    // a digit left out: the prefixes read hold no mark, so none may be said
		{"AB0826X", "AB0826", false},         // issue 15's case
		{"AB8026", "AB0826", false},          // two neighbours swapped
		{"AA0826X", "", true},                // AA0826 does not exist: AA0082, AA0026... are two edits away
		{"TC-0000417XY", "TC-0000417", true}, // two edits: that mark or none
	} {
		_, err := fx.Reg.MarkShow(fx.Ctx, c.typed)
		if err == nil {
			t.Fatalf("%s: found", c.typed)
		}
		msg := err.Error()
		hint := ""
		if _, after, ok := strings.Cut(msg, "(did you mean "); ok {
			hint, _, _ = strings.Cut(after, "?)")
		}
		switch {
		case hint == "" && c.mayBeNone:
		case c.want != "" && hint == c.want:
		default:
			t.Errorf("%s: hint %q, want %q (or none: %v): %s", c.typed, hint, c.want, c.mayBeNone, msg)
		}
	}
}
