package levelbook

import (
	"crypto/sha256"
	"encoding/hex"
	"strings"
	"testing"
)

// fingerprintBook is an invented four-sighting line over two Orrin Bay
// marks: a three-wire backsight with a stadia distance, a three-wire
// foresight with a booked distance, and two middle-wire sightings, one with
// a distance and one without.
const fingerprintBook = `# run: Orrin Bay fingerprint line
# date: 2026-03-10
# units: m
point,sight,upper,middle,lower,distance,note
TC-0412,BS,1.650,1.500,1.350,,start
TP1,FS,1.350,1.200,1.050,30.0,
TP1,BS,,1.400,,25,
TC-0415,FS,,1.6,,,end
`

// The canonical form, written out by hand from the rules of docs/runs.md
// ("The observations fingerprint"), not by the code under test: numbers as
// the shortest decimal that reads back as the same double. The stadia
// distance of the first sighting is the double 100 × (1.650 − 1.350), which
// is 29.999999999999982, not 30 (Python's repr(100*(1.65-1.35)) gives the
// same shortest form). The SHA-256 was computed outside the project
// (Python's hashlib.sha256 over the UTF-8 text below).
const fingerprintCanonical = "cairn-observations-v1\n" +
	"unit=m\n" +
	"reading=mean\n" +
	"TC-0412\tBS\tmark\t1.65\t1.5\t1.35\tstadia\t29.999999999999982\n" +
	"TP1\tFS\ttp\t1.35\t1.2\t1.05\tmeasured\t30\n" +
	"TP1\tBS\ttp\t\t1.4\t\tmeasured\t25\n" +
	"TC-0415\tFS\tmark\t\t1.6\t\tnone\t\n"

const fingerprintSHA256 = "7a3c4ea654c7b4904cd6b94f7a041db50359197340cdd1ba2c37f99475f1953a"

func fingerprintOf(t *testing.T, book string) [sha256.Size]byte {
	t.Helper()
	b, err := Parse("f.csv", []byte(book))
	if err != nil {
		t.Fatal(err)
	}
	return b.ObservationsSHA256()
}

// The canonical form and its SHA-256 are those recomputed by hand from the
// documented rules.
func TestObservationsCanonicalForm(t *testing.T) {
	b, err := Parse("f.csv", []byte(fingerprintBook))
	if err != nil {
		t.Fatal(err)
	}
	if got := string(b.Observations()); got != fingerprintCanonical {
		t.Fatalf("canonical form\n%q\nwant\n%q", got, fingerprintCanonical)
	}
	if sum := sha256.Sum256([]byte(fingerprintCanonical)); hex.EncodeToString(sum[:]) != fingerprintSHA256 {
		t.Fatalf("the hand-written form hashes to %x, not the SHA-256 computed outside", sum)
	}
	if got := b.ObservationsSHA256(); hex.EncodeToString(got[:]) != fingerprintSHA256 {
		t.Fatalf("fingerprint %x, want %s", got, fingerprintSHA256)
	}
}

// What does not change the observations does not change the fingerprint;
// every observation does.
func TestObservationsFingerprint(t *testing.T) {
	want := fingerprintOf(t, fingerprintBook)
	reordered := `# units: m
# run: Orrin Bay fingerprint line
note,distance,lower,middle,upper,sight,point
start,,1.350,1.500,1.650,BS,TC-0412
,30.0,1.050,1.200,1.350,FS,TP1
,25,,1.400,,BS,TP1
end,,,1.6,,FS,TC-0415
`
	same := map[string]string{
		"CRLF":                  strings.ReplaceAll(fingerprintBook, "\n", "\r\n"),
		"byte-order mark":       "\ufeff" + fingerprintBook,
		"extra comment":         "# copied from the field book, page 12\n" + strings.Replace(fingerprintBook, "TP1,BS", "# a comment among the rows\nTP1,BS", 1),
		"reordered columns":     reordered,
		"trailing spaces":       strings.ReplaceAll(fingerprintBook, "\n", "   \n"),
		"spaces in cells":       strings.ReplaceAll(fingerprintBook, ",", " , "),
		"numbers written again": strings.NewReplacer("1.500", "1.5", "30.0", "30.000", ",25,", ",25.0,").Replace(fingerprintBook),
		"other notes":           strings.NewReplacer(",start", ",harbour wall", ",end", ",").Replace(fingerprintBook),
		"other description": strings.Replace(fingerprintBook, "# date: 2026-03-10",
			"# date: 2026-03-11\n# crew: J. Marsh\n# class: third\n# datum: NAVD 88\n# x-weather: fair", 1),
		"the same turning points by another pattern": strings.Replace(fingerprintBook, "# units: m", "# units: m\n# turning-points: TP?, CP*", 1),
		"the default reading written":                strings.Replace(fingerprintBook, "# units: m", "# units: m\n# reading: mean\n# stadia-factor: 100.0", 1),
		"lower-case sights":                          strings.ReplaceAll(fingerprintBook, ",BS,", ",bs,"),
		"blank lines":                                strings.Replace(fingerprintBook, "TP1,BS", "\n\nTP1,BS", 1),
	}
	for name, book := range same {
		if got := fingerprintOf(t, book); got != want {
			t.Errorf("%s: fingerprint changed", name)
		}
	}
	other := map[string]string{
		"one reading":          strings.Replace(fingerprintBook, "TC-0415,FS,,1.6,", "TC-0415,FS,,1.601,", 1),
		"one distance":         strings.Replace(fingerprintBook, ",25,", ",25.5,", 1),
		"a distance dropped":   strings.Replace(fingerprintBook, ",25,", ",,", 1),
		"another unit":         strings.Replace(fingerprintBook, "# units: m", "# units: ft", 1),
		"middle-wire reading":  strings.Replace(fingerprintBook, "# units: m", "# units: m\n# reading: middle", 1),
		"another stadia":       strings.Replace(fingerprintBook, "# units: m", "# units: m\n# stadia-constant: 0.3", 1),
		"a point renamed":      strings.ReplaceAll(fingerprintBook, "TC-0415", "TC-0416"),
		"a turning point kept": strings.Replace(fingerprintBook, "# units: m", "# units: m\n# turning-points: XX*", 1),
		"a side shot":          strings.Replace(fingerprintBook, "TP1,FS", "TP9,IS,,1.111,,,\nTP1,FS", 1),
	}
	for name, book := range other {
		if got := fingerprintOf(t, book); got == want {
			t.Errorf("%s: fingerprint unchanged", name)
		}
	}
}

// A point name with the separators of the canonical form in it is escaped,
// so that no two sightings write the same line.
func TestObservationsEscapesPoints(t *testing.T) {
	b := &Book{Meta: Meta{Unit: "m"}, Sightings: []Sighting{
		{Point: "A\tB%\r\nC", Sight: Backsight, Middle: -0.0, DistanceFrom: DistanceNone},
	}}
	want := "cairn-observations-v1\nunit=m\nreading=-\nA%09B%25%0D%0AC\tBS\tmark\t\t0\t\tnone\t\n"
	if got := string(b.Observations()); got != want {
		t.Fatalf("%q, want %q", got, want)
	}
}
