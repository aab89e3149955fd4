package levelbook

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/standards"
	"cairn/internal/units"
)

const books = "../../testdata/books"

// Each bad book names the exact line and field of its fault.
func TestBadBooks(t *testing.T) {
	tests := []struct {
		file, want string
		line       int
		field      string
	}{
		{"not-a-number.csv", `not-a-number.csv:3: field "middle": not a number "1.4x0"`, 3, "middle"},
		{"wires-out-of-order.csv", `wires-out-of-order.csv:3: field "upper": wires out of order: upper 1.280 is below lower 1.520`, 3, "upper"},
		{"fs-without-bs.csv", `fs-without-bs.csv:5: field "sight": a foresight without a backsight: the setup ended on line 4`, 5, "sight"},
		{"two-bs.csv", `two-bs.csv:4: field "sight": a second backsight in a row: the setup begun on line 3 has no foresight`, 4, "sight"},
		{"ends-after-bs.csv", `ends-after-bs.csv:5: field "sight": the book ends after this backsight: the setup has no foresight`, 5, "sight"},
		{"wrong-bs-point.csv", `wrong-bs-point.csv:5: field "point": backsight on "TP2", but the foresight before it (line 4) was on "TP1"`, 5, "point"},
		{"starts-on-tp.csv", `starts-on-tp.csv:3: field "point": the run starts on turning point "TP1"; it must start on a mark`, 3, "point"},
		{"empty.csv", `empty.csv: the book is empty: no header row`, 0, ""},
		{"unknown-unit.csv", `unknown-unit.csv:2: field "units": unknown unit "yd" (want m, ft or usft)`, 2, "units"},
		{"unknown-key.csv", `unknown-key.csv:2: field "clas": unknown key (did you mean "class"?); keys of your own start with "x-"`, 2, "clas"},
		{"negative-distance.csv", `negative-distance.csv:4: field "distance": negative distance -30`, 4, "distance"},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			data, err := os.ReadFile(filepath.Join(books, "bad", tt.file))
			if err != nil {
				t.Fatal(err)
			}
			_, err = Parse(tt.file, data)
			var pe *Error
			if !errors.As(err, &pe) {
				t.Fatalf("Parse error = %v, want *Error", err)
			}
			if err.Error() != tt.want {
				t.Errorf("error\n got %s\nwant %s", err, tt.want)
			}
			if pe.Line != tt.line || pe.Field != tt.field || pe.File != tt.file {
				t.Errorf("error at %s:%d field %q, want %s:%d field %q", pe.File, pe.Line, pe.Field, tt.file, tt.line, tt.field)
			}
		})
	}
}

// More faults, written inline: each must name its line and field.
func TestBadInline(t *testing.T) {
	const h = "# units: ft\npoint,sight,upper,middle,lower,distance,note\n"
	tests := []struct{ name, book, want string }{
		{"upper without lower", h + "TC-0412,BS,4.31,4.16,,,\nTC-0413,FS,,4.00,,,\n", `b.csv:3: field "lower": no lower reading, though the upper is booked (book both stadia wires or neither)`},
		{"middle outside wires", h + "TC-0412,BS,4.31,4.40,4.02,,\nTC-0413,FS,,4.00,,,\n", `b.csv:3: field "middle": wires out of order: middle 4.40 is not between lower 4.02 and upper 4.31`},
		{"stadia disagrees with distance", h + "TC-0412,BS,4.31,4.16,4.02,35,\nTC-0413,FS,,4.00,,,\n", `b.csv:3: field "distance": distance 35 disagrees with the stadia distance 29.00 by more than 0.98 ft`},
		{"unknown sight", h + "TC-0412,BS,,4.16,,,\nTC-0413,XS,,4.00,,,\n", `b.csv:4: field "sight": unknown sight "XS" (want BS, IS or FS)`},
		{"no middle", h + "TC-0412,BS,,,,30,\nTC-0413,FS,,4.00,,,\n", `b.csv:3: field "middle": no reading`},
		{"no point", h + ",BS,,4.1,,30,\nTC-0413,FS,,4.00,,,\n", `b.csv:3: field "point": no point name`},
		{"ends on tp", h + "TC-0412,BS,,4.1,,,\nTP1,FS,,4.00,,,\n", `b.csv:4: field "point": the run ends on turning point "TP1"; it must end on a mark`},
		{"is outside setup", h + "TC-0412,BS,,4.1,,,\nTC-0413,FS,,4.00,,,\nX,IS,,4.00,,,\n", `b.csv:5: field "sight": an intermediate sight outside a setup: no backsight before it since line 4`},
		{"begins with fs", h + "TC-0412,FS,,4.1,,,\nTC-0413,FS,,4.00,,,\n", `b.csv:3: field "sight": the run must begin with a backsight, not FS`},
		{"no units", "point,sight,middle\nTC-0412,BS,1\nTC-0413,FS,1\n", `b.csv:1: field "units": the book does not say its unit: add "# units: m" (or ft, usft) before the header row`},
		{"missing column", "# units: m\npoint,middle\nTC-0412,1\n", `b.csv:2: field "sight": required column missing from the header row`},
		{"unknown column", "# units: m\npoint,sight,midle\n", `b.csv:2: field "midle": unknown column (did you mean "middle"?); columns of your own start with "x-"`},
		{"duplicate column", "# units: m\npoint,sight,middle,Middle\n", `b.csv:2: field "middle": column named twice`},
		{"key twice", "# units: m\n# units: ft\npoint,sight,middle\n", `b.csv:2: field "units": set twice (first on line 1)`},
		{"bad date", "# units: m\n# date: 14/05/2024\npoint,sight,middle\n", `b.csv:2: field "date": not a date "14/05/2024" (want YYYY-MM-DD)`},
		{"bad class", "# units: m\n# class: fourth\npoint,sight,middle\n", `b.csv:2: field "class": unknown accuracy class "fourth" (want first-I, first-II, second-I, second-II, third)`},
		{"bad reading", "# units: m\n# reading: top\npoint,sight,middle\n", `b.csv:2: field "reading": unknown reading "top" (want mean or middle)`},
		{"bad stadia factor", "# units: m\n# stadia-factor: -100\npoint,sight,middle\n", `b.csv:2: field "stadia-factor": must be positive, not -100`},
		{"bad pattern", "# units: m\n# turning-points: TP[\npoint,sight,middle\n", `b.csv:2: field "turning-points": bad pattern "TP["`},
		{"header only", "# units: m\npoint,sight,middle\n", `b.csv:2: the book has no sightings after the header row`},
		{"too many cells", "# units: m\npoint,sight,middle\nTC-0412,BS,1,2\n", `b.csv:3: 4 cells, but the header row names 3 columns`},
		{"bad quote", "# units: m\npoint,sight,middle\nTC-0412,BS,\"1\n", `b.csv:3: bad CSV: extraneous or missing " in quoted-field`},
		{"not utf8", "# units: m\npoint,sight,middle\nTC-\xff,BS,1\n", `b.csv:3: not UTF-8 text`},
		{"infinite", "# units: m\npoint,sight,middle\nTC-0412,BS,Inf\n", `b.csv:3: field "middle": not a number "Inf"`},
		{"huge", "# units: m\npoint,sight,middle\nTC-0412,BS,1e300\n", `b.csv:3: field "middle": out of range "1e300" (more than 100000)`},
		{"hex float", "# units: m\npoint,sight,middle\nTC-0412,BS,0x1p1\n", `b.csv:3: field "middle": not a number "0x1p1"`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := Parse("b.csv", []byte(tt.book))
			if err == nil {
				t.Fatalf("no error, want %s", tt.want)
			}
			if err.Error() != tt.want {
				t.Errorf("error\n got %s\nwant %s", err, tt.want)
			}
		})
	}
}

func TestReadFileMissing(t *testing.T) {
	_, err := ReadFile(filepath.Join(t.TempDir(), "nope.csv"))
	var pe *Error
	if !errors.As(err, &pe) || !strings.Contains(err.Error(), "nope.csv: cannot read the book: no such file or directory") {
		t.Fatalf("ReadFile error = %v", err)
	}
}

// Mahun, "Elevations", ch. G (worked three-wire reduction, read): wires
// 4.31 / 4.16 / 4.02 ft give the mean 4.163 ft, the interval 0.29 ft and,
// with the stadia factor 100 (common practice), a distance of 29 ft.
func TestMahunThreeWire(t *testing.T) {
	b, err := Parse("mahun.csv", []byte("# units: ft\npoint,sight,upper,middle,lower\nBM1,BS,4.31,4.16,4.02\nBM2,FS,4.00,3.90,3.80\n"))
	if err != nil {
		t.Fatal(err)
	}
	s := b.Sightings[0]
	if got := s.Reading(ReadMean); math.Abs(got-4.163) > 0.0005 {
		t.Errorf("mean reading = %.4f ft, want 4.163 ft (Mahun)", got)
	}
	if got := s.Reading(ReadMiddle); got != 4.16 {
		t.Errorf("middle reading = %v, want 4.16", got)
	}
	if got := s.Upper - s.Lower; math.Abs(got-0.29) > 1e-9 {
		t.Errorf("interval = %v ft, want 0.29 ft (Mahun)", got)
	}
	if s.DistanceFrom != DistanceStadia || math.Abs(s.Distance-29) > 1e-9 {
		t.Errorf("distance = %v ft (%s), want 29 ft from stadia (Mahun)", s.Distance, s.DistanceFrom)
	}
}

func TestParseDefaultsAndMeta(t *testing.T) {
	book := "\xEF\xBB\xBF# Tallis County test book, a free comment\r\n" +
		"# run: Test run\r\n# date: 2024-05-14\r\n# crew: A, B\r\n# units: USFT\r\n" +
		"# class: Second-II\r\n# turning-points: TP*, cp?\r\n# x-weather: fair\r\n\r\n" +
		"Point, Sight ,middle,distance,note,x-temp,,\r\n" +
		"TC-0412,bs,1.5,30,\"disk, brass\",21,,\r\n" +
		"# a comment among the rows\r\n" +
		"CP1,FS,1.2,31\r\n" +
		"CP1,BS,1.3,29,,,\r\n" +
		"tp9,IS,1.1,,,\r\n" +
		"TC-0413,FS,1.4,30,,,\r\n"
	b, err := Parse("t.csv", []byte(book))
	if err != nil {
		t.Fatal(err)
	}
	m := b.Meta
	if m.Run != "Test run" || m.Date != "2024-05-14" || m.Crew != "A, B" || m.Unit != units.USSurveyFoot || m.Class != standards.SecondII {
		t.Errorf("meta = %+v", m)
	}
	if m.StadiaFactor != 100 || m.StadiaConstant != 0 || m.Reading != ReadMean {
		t.Errorf("defaults = factor %v constant %v reading %v", m.StadiaFactor, m.StadiaConstant, m.Reading)
	}
	if m.Extra["x-weather"] != "fair" || m.Lines["units"] != 5 {
		t.Errorf("extra = %v, lines = %v", m.Extra, m.Lines)
	}
	if b.HeaderLine != 10 || len(b.Sightings) != 5 {
		t.Fatalf("header line %d, %d sightings", b.HeaderLine, len(b.Sightings))
	}
	want := []struct {
		line  int
		point string
		sight Sight
		tp    bool
	}{{11, "TC-0412", Backsight, false}, {13, "CP1", Foresight, true}, {14, "CP1", Backsight, true}, {15, "tp9", Intermediate, true}, {16, "TC-0413", Foresight, false}}
	for i, w := range want {
		s := b.Sightings[i]
		if s.Line != w.line || s.Point != w.point || s.Sight != w.sight || s.TurningPoint != w.tp {
			t.Errorf("sighting %d = line %d %s %s tp=%v, want %+v", i, s.Line, s.Point, s.Sight, s.TurningPoint, w)
		}
	}
	if s := b.Sightings[0]; s.Note != "disk, brass" || s.Raw.Middle != "1.5" || s.DistanceFrom != DistanceMeasured || s.Distance != 30 {
		t.Errorf("first sighting = %+v", s)
	}
	if s := b.Sightings[3]; s.HasDistance() {
		t.Errorf("IS without distance has one: %+v", s)
	}
}

func TestDemoBooksParse(t *testing.T) {
	for _, name := range []string{"tallis-north-loop.csv", "mere-river-line.csv", "usm-ukur-aras.csv"} {
		if _, err := ReadFile(filepath.Join(books, name)); err != nil {
			t.Errorf("%s: %v", name, err)
		}
	}
}

// A spot height is declared by the kind column, in any case: a point that
// is neither a mark nor a turning point. Books without the column read as
// before.
func TestSpotHeights(t *testing.T) {
	data, err := os.ReadFile(filepath.Join(books, "orrin-bay-spot-heights.csv"))
	if err != nil {
		t.Fatal(err)
	}
	b, err := Parse("spot.csv", data)
	if err != nil {
		t.Fatal(err)
	}
	var spots []string
	for _, s := range b.Sightings {
		if s.Spot {
			spots = append(spots, s.Point)
			if s.TurningPoint || s.Sight != Intermediate {
				t.Errorf("spot %s: %+v", s.Point, s)
			}
		}
	}
	if strings.Join(spots, ",") != "FL-1,INV-3" {
		t.Errorf("spot heights %v, want FL-1 and INV-3", spots)
	}
	old, err := os.ReadFile(filepath.Join(books, "usm-ukur-aras.csv"))
	if err != nil {
		t.Fatal(err)
	}
	ob, err := Parse("old.csv", old)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range ob.Sightings {
		if s.Spot {
			t.Errorf("a book without the kind column has spot %s", s.Point)
		}
	}

	const h = "# units: m\npoint,kind,sight,middle\n"
	for _, tt := range []struct{ name, book, want string }{
		{"spot on a backsight", h + "A,,BS,1.0\nFL1,spot,FS,1.2\n",
			`b.csv:4: field "sight": FS on spot height "FL1": a spot height takes intermediate sights only (the line is carried on marks and turning points)`},
		{"unknown kind", h + "A,,BS,1.0\nFL1,floor,IS,1.2\nB,,FS,1.1\n",
			`b.csv:4: field "kind": unknown kind "floor" (want spot for a spot height, or leave it empty)`},
		{"spot named like a turning point", h + "A,,BS,1.0\nTP9,spot,IS,1.2\nB,,FS,1.1\n",
			`b.csv:4: field "kind": "TP9" is declared a spot height but its name matches the turning-point pattern "TP*": rename the point or leave the kind empty`},
		{"spot, then a mark", h + "A,,BS,1.0\nFL1,spot,IS,1.2\nFL1,,IS,1.3\nB,,FS,1.1\n",
			`b.csv:5: field "kind": "FL1" is declared a spot height on line 4 but not here (declare it spot on every row that sights it, or on none)`},
		{"a mark, then a spot", h + "A,,BS,1.0\nB,,IS,1.2\nB,spot,IS,1.3\nB,,FS,1.1\n",
			`b.csv:5: field "kind": "B" is declared a spot height here but not on line 4 (declare it spot on every row that sights it, or on none)`},
	} {
		if _, err := Parse("b.csv", []byte(tt.book)); err == nil || err.Error() != tt.want {
			t.Errorf("%s: error\n got %v\nwant %s", tt.name, err, tt.want)
		}
	}
}
