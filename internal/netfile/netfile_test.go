package netfile_test

import (
	"bytes"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/adjust"
	"cairn/internal/netfile"
	"cairn/internal/netgen"
)

func TestReadSections(t *testing.T) {
	in := "From,TO,length_km,dh_m,note\n" +
		"TC-0001,TC-0002,1.250,+0.51234,first\n" +
		"\n" +
		"\"TC 0002, east\",TC-0001,0.3,-1e-3,x\n"
	var got []adjust.Section
	var lines []int
	err := netfile.ReadSections(strings.NewReader(in), "s.csv", func(s adjust.Section, line int) {
		got = append(got, s)
		lines = append(lines, line)
	})
	if err != nil {
		t.Fatal(err)
	}
	want := []adjust.Section{
		{From: "TC-0001", To: "TC-0002", DhM: 0.51234, LengthKm: 1.25},
		{From: "TC 0002, east", To: "TC-0001", DhM: -0.001, LengthKm: 0.3},
	}
	if len(got) != 2 || got[0] != want[0] || got[1] != want[1] || lines[0] != 2 || lines[1] != 4 {
		t.Fatalf("got %+v on lines %v, want %+v on lines 2, 4", got, lines, want)
	}
}

func TestBadSections(t *testing.T) {
	const head = "from,to,dh_m,length_km\n"
	for _, c := range []struct{ name, in, want string }{
		{"empty file", "", "s.csv: empty file"},
		{"no sections", head, "s.csv: no sections"},
		{"missing column", "from,to,dh_m\nA,B,1\n", `s.csv:1: header has no column "length_km"`},
		{"same point", head + "A,B,1,1\nA,A,1,1\n", "s.csv:3: to: the section begins and ends at A"},
		{"zero length", head + "A,B,1,0\n", "s.csv:2: length_km: length 0 km must be positive"},
		{"negative length", head + "A,B,1,-0.5\n", "s.csv:2: length_km: length -0.5 km must be positive"},
		{"NaN", head + "A,B,NaN,1\n", `s.csv:2: dh_m: "NaN" is not a finite number`},
		{"not a number", head + "A,B,1.2.3,1\n", `s.csv:2: dh_m: "1.2.3" is not a number`},
		{"empty name", head + ",B,1,1\n", "s.csv:2: from: empty point name"},
		{"short line", head + "A,B,1\n", "s.csv:2: length_km: missing"},
		{"bad quote", head + "A,\"B,1,1\n", "s.csv:2"},
		{"dh 1e308", head + "A,B,1e308,1\n", "s.csv:2: dh_m: a height difference of 1e+308 m is implausible: it must lie within ±9500 m"},
		{"dh 1e400", head + "A,B,1e400,1\n", `s.csv:2: dh_m: "1e400" is not a finite number`},
		{"dh 9500.5", head + "A,B,9500.5,1\n", "s.csv:2: dh_m: a height difference of 9500.5 m is implausible"},
		{"1001 km", head + "A,B,1,1001\n", "s.csv:2: length_km: a length must be more than 0 and at most 1000000 m (1000 km), not 1001000 m"},
		{"400 digits", head + "A,B," + strings.Repeat("1", 400) + ",1\n", `s.csv:2: dh_m: "11111111111111111111"… has 400 digits, too many`},
		{"bad setups", "from,to,dh_m,length_km,setups\nA,B,1,1,0\n", `s.csv:2: setups: "0" is not a positive whole number`},
	} {
		t.Run(c.name, func(t *testing.T) {
			err := netfile.ReadSections(strings.NewReader(c.in), "s.csv", func(adjust.Section, int) {})
			var fe *netfile.Error
			if !errors.As(err, &fe) || !strings.HasPrefix(err.Error(), c.want) {
				t.Fatalf("got %v, want %q", err, c.want)
			}
		})
	}
}

func TestReadHeld(t *testing.T) {
	rows, err := netfile.ReadHeld(strings.NewReader("point,height_m,sd_m\nA,10.5,\nB,12,0.002\n"), "h.csv")
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 2 || rows[0].HeightM != 10.5 || rows[0].SigmaM != 0 || rows[1].SigmaM != 0.002 || rows[1].Line != 3 {
		t.Fatalf("got %+v", rows)
	}
	for _, c := range []struct{ in, want string }{
		{"point,height_m\nA,1\nA,2\n", "h.csv:3: point: A is held twice (first on line 2)"},
		{"point,height_m\nA,inf\n", `h.csv:2: height_m: "inf" is not a finite number`},
		{"point,height_m\nA,9500\n", "h.csv:2: height_m: a height of 9500 m is implausible: cairn accepts -500 m to 9000 m"},
		{"point,height_m\nA,-500.5\n", "h.csv:2: height_m: a height of -500.5 m is implausible: cairn accepts -500 m to 9000 m"},
		{"point,height_m,sd_m\nA,1,1e308\n", "h.csv:2: sd_m: a length must be more than 0 and at most 1000000 m (1000 km), not 1e+308 m"},
		{"point,height_m,sd_m\nA,1,-1\n", "h.csv:2: sd_m: standard deviation -1 must not be negative"},
		{"point,height_m\n", "h.csv: no held marks"},
	} {
		if _, err := netfile.ReadHeld(strings.NewReader(c.in), "h.csv"); err == nil || err.Error() != c.want {
			t.Errorf("got %v, want %q", err, c.want)
		}
	}
}

func TestWriteHeights(t *testing.T) {
	var b bytes.Buffer
	err := netfile.WriteHeights(&b, []adjust.PointResult{
		{Point: "A", HeightM: 10.5, SDM: 0},
		{Point: `B "x", y`, HeightM: -0.0000004, SDM: 0.0012346},
	})
	if err != nil {
		t.Fatal(err)
	}
	want := "point,height_m,sd_m\nA,10.500000,0.000000\n\"B \"\"x\"\", y\",0.000000,0.001235\n"
	if b.String() != want {
		t.Errorf("got\n%s\nwant\n%s", b.String(), want)
	}
}

// TestGeneratedRoundTrip reads back what netgen writes.
func TestGeneratedRoundTrip(t *testing.T) {
	g := netgen.Generate(netgen.Options{Points: 500, Seed: 2})
	dir := t.TempDir()
	if err := g.WriteFiles(dir); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(filepath.Join(dir, "sections.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	k := 0
	err = netfile.ReadSections(f, "sections.csv", func(s adjust.Section, _ int) {
		w := g.Sections[k]
		if s.From != w.From || s.To != w.To || math.Abs(s.DhM-w.DhM) > 5e-6 || math.Abs(s.LengthKm-w.LengthKm) > 5e-4 {
			t.Fatalf("section %d: %+v, wrote %+v", k, s, w)
		}
		k++
	})
	if err != nil || k != len(g.Sections) {
		t.Fatalf("read %d of %d: %v", k, len(g.Sections), err)
	}
}

// BenchmarkReadSections reads about a million generated sections into a
// network.
func BenchmarkReadSections(b *testing.B) {
	g := netgen.Generate(netgen.Options{Points: 1_000_000, Seed: 1})
	dir := b.TempDir()
	if err := g.WriteFiles(dir); err != nil {
		b.Fatal(err)
	}
	data, err := os.ReadFile(filepath.Join(dir, "sections.csv"))
	if err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		net := adjust.NewNetwork(len(g.Sections))
		if err := netfile.ReadSections(bytes.NewReader(data), "sections.csv", func(s adjust.Section, _ int) { net.AddSection(s) }); err != nil {
			b.Fatal(err)
		}
	}
}
