package cli

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// The two feet, as defined in Federal Register Vol. 85 No. 193, 5 October
// 2020, p. 62698 (docs/references.md#units): the words the refusal of
// "feet" must name.
const feetAdvice = `is ambiguous: write ft for the international foot (0.3048 m) or usft for the US survey foot (1200/3937 m)`

// metreBook is a short line in metres from TC-0420 to TC-0427, its units
// line as given.
func metreBook(t *testing.T, unit string) string {
	t.Helper()
	return writeBook(t, "line.csv", []byte(`# Tallis County, Orrin Bay: invented demo data.
# run: Orrin Bay levee line
# date: 2024-06-03
# units: `+unit+`
# class: third
point,sight,middle,distance
TC-0420,BS,1.500,30.0
TC-0427,FS,1.200,30.0
`))
}

// wantRefused checks one line on stderr, exit status 2, the message given
// in full, and that nothing was written.
func wantRefused(t *testing.T, db *pgtest.DB, want string, args ...string) {
	t.Helper()
	before := registertest.Counts(t, db.Pool)
	_, errOut := mustBin(t, db, ExitBadInput, args...)
	if got := strings.TrimRight(errOut, "\n"); got != want {
		t.Errorf("cairn %s:\n got %q\nwant %q", strings.Join(args, " "), got, want)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}

// "feet" and "foot" are refused wherever a unit is read: a field book's
// units line, and every flag that reads a unit (--unit of height set and
// adjust, --in of height show, --within of mark list and adjust), each
// naming both feet; nothing is written.
func TestFeetRefusedEverywhere(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	b := registertest.On(t, db)
	b.Datum(t, registertest.DatumOpts{Code: "NAVD88"})
	b.Marks(t, "TC-0420", "TC-0427")
	b.Height(t, registertest.HeightOpts{Designation: "TC-0420", Value: "3.512", Unit: "m"})
	for _, word := range []string{"feet", "foot"} {
		book := metreBook(t, word)
		q := strconv.Quote(word)
		wantRefused(t, db, "cairn: "+book+`:4: field "units": `+q+" "+feetAdvice,
			"run", "check", book, "--held-height", "TC-0420=3.512")
		wantRefused(t, db, "cairn: "+book+`:4: field "units": `+q+" "+feetAdvice,
			"run", "record", book, "--held-height", "TC-0420=3.512", "--by", "tester")
		wantRefused(t, db, "cairn: --unit: "+q+" "+feetAdvice,
			"height", "set", "--in-force-from", inForceNow(), "TC-0427", "5.104", "--unit", word, "--datum", "NAVD88", "--source", "book", "--reason", "r", "--by", "tester")
		wantRefused(t, db, "cairn: in: "+q+" "+feetAdvice,
			"height", "show", "TC-0420", "--in", word)
		wantRefused(t, db, "cairn: --unit: "+q+" "+feetAdvice,
			"adjust", "1", "--hold", "TC-0420", "--unit", word, "--by", "tester")
		wantRefused(t, db, "cairn: within: "+q+" "+feetAdvice,
			"mark", "list", "--near", "41.62,-97.95", "--within", "2 "+word)
		wantRefused(t, db, "cairn: within: "+q+" "+feetAdvice,
			"adjust", "--area", "41.62,-97.95", "--within", "2"+word, "--hold", "TC-0420", "--by", "tester")
	}
}

// --within reads m, km, ft, usft and mi. Marks are placed due north of
// the centre, where the great-circle distance is R·Δφ (R the mean radius
// the search uses, store.MeanEarthRadiusM), either side of the exact
// conversions: 2 mi = 10,560 ft × 0.3048 m = 3218.688 m (NIST Handbook 44,
// 2024, Appendix C: 1 mi = 5,280 ft; the foot 0.3048 m exactly, Federal
// Register Vol. 85 No. 193, 2020); 10,560 usft = 10,560 × 1200/3937 m =
// 3218.694437… m (derived). A mark 3 mm beyond 2 mi is out of 2mi and
// 10560ft but within 10560usft; one 0.3 m inside is within all three.
func TestWithinMiles(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	const lat0, lon0 = 41.6, -97.9
	north := func(m float64) string {
		return strconv.FormatFloat(lat0+m/store.MeanEarthRadiusM*180/math.Pi, 'f', 13, 64)
	}
	for _, m := range []struct {
		name string
		at   float64
	}{{"TC-0501", 3218.4}, {"TC-0502", 3218.691}, {"TC-0503", 3219.5}} {
		mustBin(t, db, 0, "mark", "add", m.name, "--lat", north(m.at), "--lon", strconv.FormatFloat(lon0, 'f', -1, 64))
	}
	for _, c := range []struct {
		within string
		want   []string
	}{
		{"2mi", []string{"TC-0501"}},
		{"2 mi", []string{"TC-0501"}},
		{"10560ft", []string{"TC-0501"}},
		{"10560 usft", []string{"TC-0501", "TC-0502"}},
		{"3218.692m", []string{"TC-0501", "TC-0502"}},
		{"3.2195 km", []string{"TC-0501", "TC-0502", "TC-0503"}},
	} {
		out, _ := mustBin(t, db, 0, "mark", "list", "--near", "41.6,-97.9", "--within", c.within, "-o", "json")
		var ms []struct {
			Designation string  `json:"mark"`
			DistanceKm  float64 `json:"distance_km"`
		}
		if err := json.Unmarshal([]byte(out), &ms); err != nil {
			t.Fatalf("%s: %v: %s", c.within, err, out)
		}
		var got []string
		for _, m := range ms {
			got = append(got, m.Designation)
		}
		if strings.Join(got, ",") != strings.Join(c.want, ",") {
			t.Errorf("--within %s: got %v, want %v", c.within, got, c.want)
		}
	}
	wantRefused(t, db, `cairn: within: unknown unit "yd" (want m, km, ft, usft, mi)`, "mark", "list", "--near", "41.6,-97.9", "--within", "2yd")
	wantRefused(t, db, `cairn: within: "2" needs a unit: m, km, ft, usft, mi (e.g. 2km)`, "mark", "list", "--near", "41.6,-97.9", "--within", "2")
	wantRefused(t, db, "cairn: within: a length must be more than 0 and at most 1000000 m (1000 km), not 1609344 m", "mark", "list", "--near", "41.6,-97.9", "--within", "1000mi")
}

// height set refuses a missing unit, a 400-digit value and heights
// outside -500 m to 9,000 m (docs/references.md#plausible-range), in
// metres and in US survey feet, and writes nothing; the ends of the range
// are accepted.
func TestHeightSetPlausible(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seed(t, db.URL)
	set := func(value, unit string) []string {
		args := []string{"height", "set", "--in-force-from", inForceNow(), "--datum", "NAVD88", "--source", "book", "--reason", "r", "--by", "tester"}
		if unit != "" {
			args = append(args, "--unit", unit)
		}
		return append(args, "--", "TC-0412", value)
	}
	wantRefused(t, db, "cairn: --unit is required: say which unit the value is published in: m, ft (international foot, 0.3048 m) or usft (US survey foot, 1200/3937 m)",
		set("769.83", "")...)
	wantRefused(t, db, `cairn: value: "11111111111111111111"… has 400 digits, too many for a measurement (at most 15)`,
		set(strings.Repeat("1", 400), "m")...)
	wantRefused(t, db, "cairn: value: 9500 m: a height of 9500 m is implausible: cairn accepts -500 m to 9000 m",
		set("9500", "m")...)
	wantRefused(t, db, "cairn: value: -500.001 m: a height of -500.001 m is implausible: cairn accepts -500 m to 9000 m",
		set("-500.001", "m")...)
	// 9500 m in US survey feet: 9500 × 3937/1200 = 31167.9166… usft
	// (1 usft = 1200/3937 m, Federal Register Vol. 85 No. 193, 2020;
	// derived), so 31167.92 usft = 9500.001016… m.
	wantRefused(t, db, "cairn: value: 31167.92 usft: a height of 9500.001016 m is implausible: cairn accepts -500 m to 9000 m",
		set("31167.92", "usft")...)
	// The ends are inside: -500 m, and 29527.5 usft = 9000 m exactly
	// (29527.5 × 1200 = 35,433,000 = 9000 × 3937; derived).
	mustBin(t, db, 0, set("29527.5", "usft")...)
	mustBin(t, db, 0, set("-500", "m")...)
}

// Held heights typed on run check and run record are bounded in metres,
// whatever the book's unit: 9500 m refused in a book in metres, and
// 31168 usft (9500.0006 m, derived) in one in US survey feet.
func TestHeldHeightPlausible(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	b := registertest.On(t, db)
	b.Marks(t, "TC-0420", "TC-0427")
	m := metreBook(t, "m")
	us := usftBook(t, "us.csv", "TC-0427")
	wantRefused(t, db, "cairn: --held-height: TC-0420=9500 m: a height of 9500 m is implausible: cairn accepts -500 m to 9000 m",
		"run", "check", m, "--held-height", "TC-0420=9500")
	wantRefused(t, db, "cairn: --held-height: TC-0420=9500 m: a height of 9500 m is implausible: cairn accepts -500 m to 9000 m",
		"run", "record", m, "--held-height", "TC-0420=9500", "--by", "tester")
	wantRefused(t, db, "cairn: --held-height: TC-0420=31168 usft: a height of 9500.0254 m is implausible: cairn accepts -500 m to 9000 m",
		"run", "check", us, "--held-height", "TC-0420=31168")
	wantRefused(t, db, "cairn: --held-height: TC-0420=31168 usft: a height of 9500.0254 m is implausible: cairn accepts -500 m to 9000 m",
		"run", "record", us, "--held-height", "TC-0420=31168", "--by", "tester")
	if _, errOut, st := runBin(t, db, "run", "check", m, "--held-height", "TC-0420=8999"); st == ExitBadInput {
		t.Errorf("8999 m refused: %s", errOut)
	}
}

// The offline network: a 1e308 height difference is refused naming the
// file, line and field (it used to give NaN heights and exit 3), and no
// heights file is written.
func TestNetworkFilePlausible(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	dir := t.TempDir()
	write := func(name, text string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	held := write("held.csv", "point,height_m\nA,10\n")
	out := filepath.Join(dir, "out.csv")
	for _, c := range []struct{ sections, held, want string }{
		{"from,to,dh_m,length_km\nA,B,1.5,1\nB,A,1e308,1\n", held,
			"s.csv:3: dh_m: a height difference of 1e+308 m is implausible: it must lie within ±9500 m (the range of heights cairn accepts, -500 m to 9000 m)"},
		{"from,to,dh_m,length_km\nA,B,1.5,2000\n", held,
			"s.csv:2: length_km: a length must be more than 0 and at most 1000000 m (1000 km), not 2000000 m"},
		{"from,to,dh_m,length_km\nA,B,1.5,1\n", write("held9500.csv", "point,height_m\nA,9500\n"),
			"held9500.csv:2: height_m: a height of 9500 m is implausible: cairn accepts -500 m to 9000 m"},
		// Inputs each in range whose sum is not: 8,990 m + 20 m.
		{"from,to,dh_m,length_km\nA,B,20,1\n", write("held8990.csv", "point,height_m\nA,8990\n"),
			"s.csv: the adjusted height of B: a height of 9010 m is implausible: cairn accepts -500 m to 9000 m; nothing was written (check the sections and the held heights)"},
	} {
		s := write("s.csv", c.sections)
		_, errOut := mustBin(t, db, ExitBadInput, "adjust", "--sections", s, "--held", c.held, "--out", out)
		want := "cairn: " + filepath.Join(dir, c.want)
		if got := strings.TrimRight(errOut, "\n"); got != want {
			t.Errorf("got  %q\nwant %q", got, want)
		}
		if _, err := os.Stat(out); !os.IsNotExist(err) {
			t.Errorf("%s written: %v", out, err)
		}
	}
}
