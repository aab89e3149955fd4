package netfile_test

import (
	"math"
	"strings"
	"testing"

	"cairn/internal/adjust"
	"cairn/internal/netfile"
)

var sectionSeeds = []string{
	"from,to,dh_m,length_km\nTC-0001,TC-0002,0.512,1.25\n",
	"From,TO,length_km,dh_m,note,setups\nTC-0001,TC-0002,1.250,+0.51234,first,12\n\n\"TC 0002, east\",TC-0001,0.3,-1e-3,x,\n",
	"from,to,dh_m,length_km\nA,A,1,1\n",
	"from,to,dh_m,length_km\nA,B,NaN,1\n",
	"from,to,dh_m\nA,B,1\n",
	"\ufefffrom;to;dh_m;length_km\r\nA;B;1;2\r\n",
	"from,to,dh_m,length_km\n\"A,\"\"x\",B,1e308,1e-308\n",
}

// The sections reader never panics: it returns an error naming the file,
// or sections that each pass its own checks.
func FuzzReadSections(f *testing.F) {
	for _, s := range sectionSeeds {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		var got []adjust.Section
		err := netfile.ReadSections(strings.NewReader(string(data)), "fuzz.csv", func(s adjust.Section, line int) {
			if line < 2 {
				t.Errorf("section %+v on line %d, before the header's end", s, line)
			}
			got = append(got, s)
		})
		if err != nil {
			if !strings.Contains(err.Error(), "fuzz.csv") {
				t.Fatalf("error does not name the file: %v", err)
			}
			return
		}
		for _, s := range got {
			if s.From == "" || s.To == "" || s.From == s.To || math.IsNaN(s.DhM) || math.IsInf(s.DhM, 0) ||
				!(s.LengthKm > 0) || math.IsInf(s.LengthKm, 0) {
				t.Fatalf("accepted a section that fails the checks: %+v", s)
			}
		}
	})
}

// The held-marks reader never panics, names the file in its errors, and
// accepts each mark once with a finite height.
func FuzzReadHeld(f *testing.F) {
	for _, s := range []string{
		"point,height_m\nTC-0412,3.512\n",
		"point,height_m,sd_m\nTC-0412,3.512,0.002\nTC-0420,4,\n",
		"point,height_m\nTC-0412,3.512\nTC-0412,3.6\n",
		"point,height_m\nTC-0412,Inf\n",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		rows, err := netfile.ReadHeld(strings.NewReader(string(data)), "fuzz.csv")
		if err != nil {
			if !strings.Contains(err.Error(), "fuzz.csv") {
				t.Fatalf("error does not name the file: %v", err)
			}
			return
		}
		seen := map[string]bool{}
		for _, r := range rows {
			if r.Point == "" || seen[r.Point] || math.IsNaN(r.HeightM) || math.IsInf(r.HeightM, 0) {
				t.Fatalf("accepted a held row that fails the checks: %+v", r)
			}
			seen[r.Point] = true
		}
	})
}
