package standards

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

const tallis = "../../testdata/standards/tallis-county.std"

func TestParseOfficeFile(t *testing.T) {
	data, err := os.ReadFile(tallis)
	if err != nil {
		t.Fatal(err)
	}
	p, err := Parse("tallis-county.std", data)
	if err != nil {
		t.Fatal(err)
	}
	if p.Name != "tallis-county" || p.Builtin || p.Edition != "2024-1" || len(p.Classes) != 2 {
		t.Fatalf("profile %+v", p)
	}
	sum := sha256.Sum256(data)
	if p.Version() != "sha256:"+hex.EncodeToString(sum[:]) {
		t.Errorf("version %s", p.Version())
	}
	tol := mustFor(t, p, SecondII)
	if tol.LoopMmSqrtKm != 7 || tol.SectionMmSqrtKm != 8 || tol.MaxSightM != 60 || tol.MaxSetupImbalanceM != 5 ||
		tol.MaxSectionImbalanceM != 8 || tol.ThreeWireM != 0.002 || tol.CheckConnectionMmSqrtKm != 10 ||
		tol.MinGroundClearanceM != 0.5 || tol.MaxAccuracyMmSqrtKm != 0 {
		t.Errorf("second-II %+v", tol)
	}
	if tol.Provenance[FieldLoop].Status != Office || !strings.Contains(tol.Source, "the office's own values, which govern") {
		t.Errorf("second-II provenance %+v, source %q", tol.Provenance[FieldLoop], tol.Source)
	}
	// The misclosure check's function uses the office's constant: 7
	// mm·√km over 4 km is 14 mm.
	if got := tol.AllowableLoopM(4000); got < 0.014-1e-12 || got > 0.014+1e-12 {
		t.Errorf("allowable over 4 km %v m, want 0.014 m", got)
	}
	if third := mustFor(t, p, Third); third.MinGroundClearanceM != 0 {
		t.Errorf("third clearance %v, want not given", third.MinGroundClearanceM)
	}
	if _, err := p.For(FirstI); err == nil {
		t.Error("first-I given by a file that has no such row")
	}
	// A profile's text reads back with the same values.
	b := *mustBuiltin(t, FGCC1984)
	text := strings.Replace(b.Text(), "profile: fgcc-1984", "profile: copy", 1)
	back, err := Parse("copy.std", []byte(text))
	if err != nil {
		t.Fatalf("%v\n%s", err, text)
	}
	for _, c := range Classes {
		x, y := mustFor(t, &b, c), mustFor(t, back, c)
		for _, f := range Fields {
			if x.Value(f) != y.Value(f) {
				t.Errorf("%s %s: %v read back as %v", c, f, x.Value(f), y.Value(f))
			}
		}
	}
}

func TestParseOfficeFileErrors(t *testing.T) {
	head := "cairn-standards: 1\nprofile: p\nsource: s\n"
	cols := "class,loop_mm_sqrt_km,section_mm_sqrt_km,max_sight_m,max_setup_imbalance_m,max_section_imbalance_m,three_wire_m,check_connection_mm_sqrt_km\n"
	row := "third,12,12,90,10,10,0.003,12\n"
	for _, c := range []struct {
		name, text, want string
		line             int
		field            string
	}{
		{"no marker", "profile: p\n", "not a cairn standards profile", 1, ""},
		{"unknown key", "cairn-standards: 1\nprofil: p\n", "unknown key", 2, "profil"},
		{"built-in name", "cairn-standards: 1\nprofile: fgcc-1984\n", "built-in", 2, "profile"},
		{"no source", "cairn-standards: 1\nprofile: p\n" + cols + row, "missing", 0, "source"},
		{"no table", head, "no table", 0, ""},
		{"unknown column", head + strings.Replace(cols, "max_sight_m", "max_sight_ft", 1) + row, "unknown column", 4, "max_sight_ft"},
		{"missing column", head + strings.Replace(cols, ",three_wire_m", "", 1) + "third,12,12,90,10,10,12\n", "missing column", 4, "three_wire_m"},
		{"bad class", head + cols + "fourth,12,12,90,10,10,0.003,12\n", "unknown accuracy class", 5, "class"},
		{"twice", head + cols + row + row, "given twice", 6, "class"},
		{"not a number", head + cols + "third,12,twelve,90,10,10,0.003,12\n", "not a number", 5, "section_mm_sqrt_km"},
		{"in mm", head + cols + "third,12,12,90,10,10,3,12\n", "outside", 5, "three_wire_m"},
		{"zero", head + cols + "third,0,12,90,10,10,0.003,12\n", "outside", 5, "loop_mm_sqrt_km"},
		{"empty required", head + cols + "third,12,12,,10,10,0.003,12\n", "empty", 5, "max_sight_m"},
		{"short row", head + cols + "third,12,12\n", "cells", 5, ""},
		{"comments counted", head + "# a note\n\n" + cols + "# another\n" + "third,12,12,90,10,10,0.003,x\n", "not a number", 8, "check_connection_mm_sqrt_km"},
	} {
		_, err := Parse("office.std", []byte(c.text))
		var e *Error
		if !errors.As(err, &e) {
			t.Errorf("%s: error %v, want a standards.Error", c.name, err)
			continue
		}
		if e.File != "office.std" || e.Line != c.line || e.Field != c.field || !strings.Contains(e.Msg, c.want) {
			t.Errorf("%s: %q (line %d, field %q); want line %d, field %q, %q", c.name, err, e.Line, e.Field, c.line, c.field, c.want)
		}
	}
}

func TestResolve(t *testing.T) {
	if p, err := Resolve("", ""); err != nil || p != Default() {
		t.Errorf("empty name: %v, %v", p, err)
	}
	if p, err := Resolve("EN0593", ""); err != nil || p.Name != EN0593 {
		t.Errorf("en0593: %v, %v", p, err)
	}
	dir := filepath.Dir(tallis)
	p, err := Resolve("tallis-county.std", dir)
	if err != nil || p.Name != "tallis-county" || p.File != filepath.Join(dir, "tallis-county.std") {
		t.Errorf("file relative to dir: %v, %v", p, err)
	}
	if _, err := Resolve("nowhere.std", dir); err == nil || !strings.Contains(err.Error(), "neither a built-in profile") {
		t.Errorf("missing file: %v", err)
	}
}
