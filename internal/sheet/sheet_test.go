package sheet

import (
	"bytes"
	"encoding/xml"
	"errors"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// hostile is a sheet whose text fields hold what a careless renderer
// would interpret: quotes, markup, a long text and non-Latin letters.
func hostile() Data {
	lat, lon := 41.2512, -72.4031
	rec := time.Date(2024, 5, 2, 0, 0, 0, 0, time.UTC)
	long := strings.Repeat("From the bridge go north 40 paces & turn left. ", 50)[:2000]
	return Data{
		Designation: "OB-17", Aliases: []string{"Orrin \"Old\" Post", "Μέρη-3"},
		Kind: "disk", Setting: "concrete post <b>flush</b>", Stamping: `OB 17 "1962"`,
		Description: `<script>alert("x")</script> Тест: bronze disk`,
		Directions:  long,
		Lat:         &lat, Lon: &lon, PositionSource: "hand-held GNSS",
		Neighbours: []Neighbour{{Designation: "OB-18", Lat: 41.2521, Lon: -72.4020, DistanceM: 130}},
		Unit:       "usft",
		Heights: []Height{{Datum: "NAVD88", Value: "12.35", Published: "3.764 m", Version: 2, Class: "second-I",
			Provenance: "adjustment", InForceFrom: time.Date(2023, 9, 1, 0, 0, 0, 0, time.UTC), Source: "adjustment 4"}},
		Conditions:    []Condition{{ObservedOn: rec, Condition: "good", Note: "cap cleaned", By: "mara"}},
		LastRecovered: &rec,
		Doubts:        []string{"WARNING: mark OB-17 was reported DISTURBED on 2024-06-01; do not rely on its height"},
		State:         State{Seq: 42, Head: strings.Repeat("ab", 32), CommittedAt: time.Date(2024, 6, 2, 10, 0, 0, 0, time.UTC)},
		Cautions:      []string{"Review by a licensed surveyor.", "Check into two marks."},
	}
}

func TestHTMLWellFormedNoScript(t *testing.T) {
	t.Parallel()
	d := hostile()
	var b bytes.Buffer
	if err := HTML(&b, d); err != nil {
		t.Fatal(err)
	}
	dec := xml.NewDecoder(bytes.NewReader(b.Bytes()))
	dec.Strict = true
	var text strings.Builder
	for {
		tok, err := dec.Token()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("HTML sheet is not well-formed: %v", err)
		}
		switch e := tok.(type) {
		case xml.StartElement:
			if strings.EqualFold(e.Name.Local, "script") {
				t.Fatal("HTML sheet has a script element")
			}
			for _, a := range e.Attr {
				if strings.HasPrefix(strings.ToLower(a.Name.Local), "on") {
					t.Fatalf("HTML sheet has an event attribute %s", a.Name.Local)
				}
			}
		case xml.CharData:
			text.Write(e)
		}
	}
	for _, want := range []string{d.Description, d.Directions, d.Setting, d.Stamping, d.Aliases[0], d.Aliases[1], "12.35", "3.764 m", d.Doubts[0], "ab"} {
		if !strings.Contains(text.String(), want) {
			t.Errorf("HTML sheet's text lacks %.60q", want)
		}
	}
}

func TestPDFText(t *testing.T) {
	t.Parallel()
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Fatal("pdftotext (poppler-utils) is needed: apt-get install poppler-utils")
	}
	d := hostile()
	var a, b bytes.Buffer
	if err := PDF(&a, d); err != nil {
		t.Fatal(err)
	}
	if err := PDF(&b, d); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a.Bytes(), b.Bytes()) {
		t.Error("the same sheet gave two different PDFs")
	}
	file := filepath.Join(t.TempDir(), "s.pdf")
	if err := os.WriteFile(file, a.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command("pdftotext", "-enc", "UTF-8", file, "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	// pdftotext breaks lines where the PDF wraps them: compare with white
	// space removed.
	got := squash(string(out))
	for _, want := range []string{d.Description, d.Directions, d.Setting, d.Stamping, d.Aliases[0], d.Aliases[1], "12.35 usft", "3.764 m",
		"second-I", "2023-09-01", "adjustment 4", "2024-05-02", d.Doubts[0], d.State.Head, "commit 42", "hand-held GNSS", "OB-18",
		d.Cautions[0], d.Cautions[1]} {
		if !strings.Contains(got, squash(want)) {
			t.Errorf("PDF text lacks %.60q", want)
		}
	}
	info, err := exec.Command("pdfinfo", file).Output()
	if err == nil && !strings.Contains(string(info), "2024") {
		t.Errorf("PDF's creation date is not the register state's: %s", info)
	}
}

func squash(s string) string { return strings.Join(strings.Fields(s), "") }

func TestRoundUp(t *testing.T) {
	t.Parallel()
	for _, c := range []struct{ in, want float64 }{{100, 100}, {101, 200}, {260, 500}, {0.7, 1}, {5001, 10000}} {
		if got := roundUp(c.in); got != c.want {
			t.Errorf("roundUp(%v) = %v, want %v", c.in, got, c.want)
		}
	}
}

// Sheets in one PDF: each page's footer names the sheet's own mark (the
// footer of a page is written as the next begins).
func TestPDFManyFooters(t *testing.T) {
	t.Parallel()
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Fatal("pdftotext (poppler-utils) is needed: apt-get install poppler-utils")
	}
	a, b := hostile(), hostile()
	b.Designation, b.Directions = "OB-18", "short"
	var buf bytes.Buffer
	if err := PDFMany(&buf, []Data{a, b}, a.State.Time()); err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(t.TempDir(), "m.pdf")
	if err := os.WriteFile(file, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	for page, want := range map[string]string{"2": "cairn datasheet of OB-17 · page 2", "3": "cairn datasheet of OB-18 · page 3"} {
		out, err := exec.Command("pdftotext", "-enc", "UTF-8", "-f", page, "-l", page, file, "-").Output()
		if err != nil {
			t.Fatal(err)
		}
		if !strings.Contains(squash(string(out)), squash(want)) {
			t.Errorf("page %s lacks %q:\n%s", page, want, out)
		}
	}
}

// Body is the sheet's content alone: what HTML writes between <body> and
// </body>, with no style element or attribute (a page with a
// Content-Security-Policy that allows no inline style shows it whole),
// and CSS is the stylesheet HTML writes inline.
func TestBodyIsTheSheetWithoutItsDocument(t *testing.T) {
	t.Parallel()
	d := hostile()
	var whole, body bytes.Buffer
	if err := HTML(&whole, d); err != nil {
		t.Fatal(err)
	}
	if err := Body(&body, d); err != nil {
		t.Fatal(err)
	}
	w := whole.String()
	inner := w[strings.Index(w, "<body>\n")+len("<body>\n") : strings.LastIndex(w, "</body>")]
	if inner != body.String() {
		t.Errorf("Body differs from HTML's body:\n%s\n---\n%s", body.String(), inner)
	}
	if b := body.String(); strings.Contains(b, "<style") || strings.Contains(b, "style=") || strings.Contains(b, "<script") || !strings.Contains(b, "&lt;script&gt;") {
		t.Errorf("Body holds a style or script, or the description unescaped: %s", b)
	}
	if !strings.Contains(w, "<style>\n"+CSS+"</style>") {
		t.Errorf("HTML does not write CSS inline")
	}
}
