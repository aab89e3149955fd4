package cli

import (
	"archive/zip"
	"bytes"
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"encoding/json"
	"encoding/xml"
	"errors"
	"image"
	"image/png"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/register"
)

// hostileDirections is 2,000 characters of directions with quotes, markup
// and non-Latin letters, to be shown as written.
var hostileDirections = func() string {
	s := strings.Repeat(`From the "old" mill <b>&amp;</b> go 40 paces north; Дорога к мосту; Μέρη ποταμός. `, 40)
	r := []rune(s)
	return string(r[:2000])
}()

const hostileDescription = `<script>alert("cairn")</script> bronze disk, 'flush' & sound; Бронзовый диск, χάλκινος δίσκος`

// sheetRegister is a register with two marks near each other, one of them
// hostile: heights in force from 2001 and from 2019, a good report, a
// disturbed report (a doubt) with a photograph, and an alias.
func sheetRegister(t *testing.T) *pgtest.DB {
	t.Helper()
	db := pgtest.New(t)
	seed(t, db.URL)
	mustRun(t, db.URL, "mark", "add", "OB-17", "--type", `disk "A"`, "--setting", "concrete <post>", "--stamping", `OB 17 "1962"`,
		"--directions", hostileDirections, "--lat", "41.6212", "--lon", "-97.9579")
	mustRun(t, db.URL, "mark", "edit", "OB-17", "--reason", "described", "--description", hostileDescription)
	mustRun(t, db.URL, "mark", "alias", "OB-17", "MR 17/B", "--kind", "former")
	set := func(mark, value, unit, from, source string) {
		t.Helper()
		mustRun(t, db.URL, "height", "set", mark, value, "--unit", unit, "--datum", "NAVD88", "--kind", "authority",
			"--in-force-from", from, "--source", source, "--reason", "entered from "+source, "--by", "tester")
	}
	set("OB-17", "234.662", "m", "2001-03-01T00:00:00Z", "control sheet 2001 (invented)")
	set("OB-17", "234.671", "m", "2019-09-16T00:00:00Z", "control report 2019 (invented)")
	set("TC-0412", "769.83", "usft", "2005-07-15T00:00:00Z", "control sheet 2005 (invented)")
	mustRun(t, db.URL, "mark", "condition", "OB-17", "good", "--note", "cap cleaned", "--on", "2024-05-02", "--by", "mara")
	img := filepath.Join(t.TempDir(), "close.png")
	var pb bytes.Buffer
	if err := png.Encode(&pb, image.NewGray(image.Rect(0, 0, 4, 4))); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(img, pb.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	mustRun(t, db.URL, "mark", "condition", "OB-17", "disturbed", "--note", "post tilted", "--on", "2024-06-01", "--by", "mara",
		"--photo", "close-up="+img)
	return db
}

// pdfFooter is the footer of a sheet's page as pdftotext writes it.
var pdfFooter = regexp.MustCompile(`cairn\s+datasheet\s+of\s+\S+\s+·\s+page\s+\d+\s+·\s+register\s+commit\s+\d+,\s+head\s+[0-9a-f]{0,16}`)

// squashSpace removes white space: pdftotext breaks lines where the PDF
// wraps them.
func squashSpace(s string) string { return strings.Join(strings.Fields(s), "") }

// Through the command line: the PDF sheet of a hostile mark, read back by
// pdftotext (poppler-utils), holds every field as written; the HTML sheet
// is well-formed (parsed as XML, strictly) and has no script.
func TestDatasheetFields(t *testing.T) {
	t.Parallel()
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Fatal("pdftotext is needed (apt-get install poppler-utils; .ci/run installs it)")
	}
	db := sheetRegister(t)
	pdf, errOut, st := run(t, db.URL, "datasheet", "OB-17", "--unit", "usft", "-o", "pdf")
	if st != 0 {
		t.Fatalf("datasheet -o pdf: exit %d: %s", st, errOut)
	}
	if !strings.Contains(errOut, "DISTURBED") {
		t.Errorf("datasheet's stderr does not warn of the disturbed mark: %q", errOut)
	}
	file := filepath.Join(t.TempDir(), "OB-17.pdf")
	if err := os.WriteFile(file, []byte(pdf), 0o644); err != nil {
		t.Fatal(err)
	}
	txt, err := exec.Command("pdftotext", "-enc", "UTF-8", file, "-").Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	// The footer of each page falls inside text that runs on to the next.
	got := squashSpace(pdfFooter.ReplaceAllString(string(txt), ""))
	// 234.671 m = 234.671 / (1200/3937) usft = 769.9166… usft, to two
	// places 769.92 (US survey foot, 1200/3937 m: NIST Handbook 44,
	// Appendix C, 2019); the sheet's figures are exact conversions.
	head := headOf(t, db)
	for _, want := range []string{"OB-17", "MR 17/B", `disk "A"`, "concrete <post>", `OB 17 "1962"`, hostileDescription, hostileDirections,
		"41.621200", "-97.957900", "TC-0412", "769.92 usft", "234.671 m", "NAVD88", "2019-09-16", "control report 2019 (invented)",
		"2024-05-02", "cap cleaned", "2024-06-01", "post tilted", "DISTURBED", "close.png", head,
		"licensed surveyor", "two marks", "condition", "Local codes"} {
		if !strings.Contains(got, squashSpace(want)) {
			t.Errorf("datasheet PDF text lacks %.70q", want)
		}
	}
	if strings.Contains(got, "234.662") {
		t.Error("datasheet PDF shows the 2001 height, which is no longer in force")
	}
	if pp, err := exec.LookPath("pdftoppm"); err == nil {
		if out, err := exec.Command(pp, "-r", "30", "-png", "-f", "1", "-l", "1", file, filepath.Join(t.TempDir(), "p")).CombinedOutput(); err != nil {
			t.Errorf("pdftoppm cannot render the sheet: %v %s", err, out)
		}
	}

	// The photograph is drawn: pdfimages (poppler-utils) lists it.
	if pi, err := exec.LookPath("pdfimages"); err == nil {
		list, err := exec.Command(pi, "-list", file).Output()
		if lines := strings.Split(strings.TrimSpace(string(list)), "\n"); err != nil || len(lines) < 3 {
			t.Errorf("pdfimages -list finds no image on the sheet: %v\n%s", err, list)
		}
	}

	html := mustRun(t, db.URL, "datasheet", "OB-17", "--unit", "usft", "-o", "html")
	if !strings.Contains(html, `<img src="data:image/png;base64,`) {
		t.Error("datasheet HTML does not show the photograph")
	}
	text := wellFormedNoScript(t, []byte(html))
	for _, want := range []string{hostileDescription, hostileDirections, "MR 17/B", `OB 17 "1962"`, "769.92", head} {
		if !strings.Contains(text, want) {
			t.Errorf("datasheet HTML text lacks %.70q", want)
		}
	}

	dir := t.TempDir()
	mustRun(t, db.URL, "datasheet", "OB-17", "TC-0412", "--out", dir)
	for _, f := range []string{"OB-17.html", "OB-17.pdf", "TC-0412.html", "TC-0412.pdf"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Errorf("datasheet --out: %v", err)
		}
	}
	if _, errOut, st := run(t, db.URL, "datasheet", "OB-17", "TC-0412", "-o", "pdf"); st != ExitBadInput || !strings.Contains(errOut, "--out") {
		t.Errorf("datasheet of two marks to stdout: exit %d %q, want a refusal naming --out", st, errOut)
	}
}

// headOf is the register's head as `audit head` states it.
func headOf(t *testing.T, db *pgtest.DB) string {
	t.Helper()
	var s struct {
		Head string `json:"head"`
	}
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "audit", "head")), &s); err != nil || len(s.Head) != 64 {
		t.Fatalf("audit head: %v %q", err, s.Head)
	}
	return s.Head
}

// wellFormedNoScript parses an HTML sheet strictly as XML, fails on a
// script element or an event attribute, and returns its text.
func wellFormedNoScript(t *testing.T, doc []byte) string {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(doc))
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
				if strings.HasPrefix(strings.ToLower(a.Name.Local), "on") || strings.Contains(strings.ToLower(a.Value), "javascript:") {
					t.Fatalf("HTML sheet has a scripting attribute %s=%q", a.Name.Local, a.Value)
				}
			}
		case xml.CharData:
			text.Write(e)
		}
	}
	return text.String()
}

// readZip returns a zip's files by name, in their order.
func readZip(t *testing.T, data []byte) (map[string][]byte, []string) {
	t.Helper()
	zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatalf("pack is not a zip: %v", err)
	}
	files, names := map[string][]byte{}, []string{}
	for _, f := range zr.File {
		rc, err := f.Open()
		if err != nil {
			t.Fatal(err)
		}
		b, err := io.ReadAll(rc)
		rc.Close()
		if err != nil {
			t.Fatal(err)
		}
		files[f.Name], names = b, append(names, f.Name)
	}
	return files, names
}

// Through the command line: a pack built twice from the same state is
// byte-identical; its manifest holds every file's SHA-256; its CSV opens
// with encoding/csv with units in the headers; its GeoJSON is an RFC 7946
// FeatureCollection of Points, longitude first; --as-of gives the heights
// in force then.
func TestPack(t *testing.T) {
	t.Parallel()
	db := sheetRegister(t)
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.zip"), filepath.Join(dir, "b.zip")
	args := []string{"pack", "--near", "41.6208,-97.9583", "--within", "500m", "--unit", "usft"}
	mustRun(t, db.URL, append(args, "--out", a)...)
	mustRun(t, db.URL, append(args, "--out", b)...)
	da, _ := os.ReadFile(a)
	db2, _ := os.ReadFile(b)
	if len(da) == 0 || !bytes.Equal(da, db2) {
		t.Fatalf("two packs of the same state differ (%d and %d bytes)", len(da), len(db2))
	}
	files, names := readZip(t, da)
	for _, want := range []string{"README.txt", "datasheets.pdf", "marks.csv", "marks.geojson", "sheets/OB-17.html", "sheets/TC-0412.html", "SHA256SUMS"} {
		if !slices.Contains(names, want) {
			t.Errorf("pack lacks %s (has %v)", want, names)
		}
	}
	if slices.Contains(names, "statement.json") {
		t.Error("pack has a statement though no key is configured")
	}
	// The manifest: every other file, with its SHA-256 (FIPS 180-4).
	listed := 0
	for _, line := range strings.Split(strings.TrimSpace(string(files["SHA256SUMS"])), "\n") {
		sum, name, ok := strings.Cut(line, "  ")
		s := sha256.Sum256(files[name])
		if !ok || files[name] == nil || hex.EncodeToString(s[:]) != sum {
			t.Errorf("SHA256SUMS line %q does not match the file", line)
		}
		listed++
	}
	if listed != len(names)-1 {
		t.Errorf("SHA256SUMS lists %d files, the pack has %d others", listed, len(names)-1)
	}
	for _, w := range []string{"licensed surveyor", "two marks", headOf(t, db)} {
		if !strings.Contains(string(files["README.txt"]), w) {
			t.Errorf("README lacks %q", w)
		}
	}
	wellFormedNoScript(t, files["sheets/OB-17.html"])

	// The CSV (RFC 4180, read by encoding/csv).
	recs, err := csv.NewReader(bytes.NewReader(files["marks.csv"])).ReadAll()
	if err != nil {
		t.Fatalf("marks.csv: %v", err)
	}
	hdr := recs[0]
	for _, h := range []string{"mark", "lat_deg", "lon_deg", "height_usft", "height_in_unit", "unit", "in_force_from_utc", "distance_from_site_m"} {
		if !slices.Contains(hdr, h) {
			t.Errorf("marks.csv header %v lacks %s", hdr, h)
		}
	}
	col := func(rec []string, name string) string { return rec[slices.Index(hdr, name)] }
	heights := map[string]string{}
	for _, r := range recs[1:] {
		heights[col(r, "mark")] = col(r, "height_usft")
	}
	// 234.671 m in US survey feet (1200/3937 m, NIST Handbook 44 App. C):
	// 769.9166…, 769.92; TC-0412 published in usft stays 769.83.
	if heights["OB-17"] != "769.92" || heights["TC-0412"] != "769.83" {
		t.Errorf("marks.csv heights %v, want OB-17 769.92 and TC-0412 769.83", heights)
	}

	checkGeoJSON(t, files["marks.geojson"], 2)

	// --as-of 2010: OB-17's 2001 height, 234.662 m = 769.8873… usft.
	old := filepath.Join(dir, "old.zip")
	mustRun(t, db.URL, append(args, "--as-of", "2010-01-01", "--out", old)...)
	do, _ := os.ReadFile(old)
	of, _ := readZip(t, do)
	recs, err = csv.NewReader(bytes.NewReader(of["marks.csv"])).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range recs[1:] {
		if col(r, "mark") == "OB-17" && (col(r, "height_usft") != "769.89" || col(r, "height_in_unit") != "234.662") {
			t.Errorf("pack --as-of 2010: OB-17 %s usft (%s), want 769.89 (234.662 m, in force from 2001)", col(r, "height_usft"), col(r, "height_in_unit"))
		}
	}
	// Reports observed after 2010, and their photographs, are not on the
	// sheet as it stood then.
	if h := string(of["sheets/OB-17.html"]); strings.Contains(h, "cap cleaned") || strings.Contains(h, "close.png") {
		t.Error("pack --as-of 2010 shows the condition reports of 2024")
	}
	if h := string(files["sheets/OB-17.html"]); !strings.Contains(h, "cap cleaned") || !strings.Contains(h, "close.png") {
		t.Error("pack shows neither the 2024 reports nor the photograph")
	}
	if !strings.Contains(string(of["README.txt"]), "2010-01-01") {
		t.Error("pack --as-of: README does not say the instant")
	}
	if strings.Contains(string(files["README.txt"]), "MORE MARKS") {
		t.Error("a pack of every mark within the radius says there are more")
	}

	// --limit 1: the nearest mark alone, and the README and the error
	// stream say more are within the radius.
	one := filepath.Join(dir, "one.zip")
	_, errOut, status := run(t, db.URL, append(args, "--limit", "1", "--out", one)...)
	d1, _ := os.ReadFile(one)
	f1, n1 := readZip(t, d1)
	var sheets []string
	for _, n := range n1 {
		if strings.HasPrefix(n, "sheets/") {
			sheets = append(sheets, n)
		}
	}
	if status != ExitOK || len(sheets) != 1 || !strings.Contains(errOut, "more marks are within 500m of 41.6208,-97.9583 than the 1 nearest packed") ||
		!strings.Contains(string(f1["README.txt"]), "MORE MARKS ARE WITHIN 500m: this pack holds the 1 nearest only") {
		t.Errorf("pack --limit 1: exit %d, sheets %v, stderr %q, README:\n%s", status, sheets, errOut, f1["README.txt"])
	}
	checkGeoJSON(t, f1["marks.geojson"], 1)
	if _, errOut, status := run(t, db.URL, append(args, "--limit", "-1", "--out", one)...); status != ExitBadInput || !strings.Contains(errOut, "limit") {
		t.Errorf("pack --limit -1: exit %d, %s", status, errOut)
	}
}

// checkGeoJSON checks a FeatureCollection against RFC 7946 (Butler et al.,
// IETF 2016): type FeatureCollection, no crs member (§4), features of
// type Feature with Point geometries whose coordinates are [longitude,
// latitude] in range (§3.1.1, §4), and property names snake_case.
func checkGeoJSON(t *testing.T, data []byte, wantFeatures int) {
	t.Helper()
	var fc map[string]json.RawMessage
	if err := json.Unmarshal(data, &fc); err != nil {
		t.Fatalf("marks.geojson: %v", err)
	}
	if _, ok := fc["crs"]; ok {
		t.Error("marks.geojson has a crs member (RFC 7946 §4 removed it)")
	}
	var typ string
	_ = json.Unmarshal(fc["type"], &typ)
	var feats []struct {
		Type     string `json:"type"`
		Geometry struct {
			Type        string    `json:"type"`
			Coordinates []float64 `json:"coordinates"`
		} `json:"geometry"`
		Properties map[string]any `json:"properties"`
	}
	if err := json.Unmarshal(fc["features"], &feats); err != nil || typ != "FeatureCollection" {
		t.Fatalf("marks.geojson: type %q, features %v", typ, err)
	}
	if len(feats) != wantFeatures {
		t.Errorf("marks.geojson has %d features, want %d", len(feats), wantFeatures)
	}
	for _, f := range feats {
		c := f.Geometry.Coordinates
		if f.Type != "Feature" || f.Geometry.Type != "Point" || len(c) != 2 || c[0] < -180 || c[0] > 180 || c[1] < -90 || c[1] > 90 {
			t.Fatalf("marks.geojson feature %+v is not a Point in range", f)
		}
		// The marks are near 41.6° N, 97.96° W: longitude first.
		if c[0] > -97 || c[0] < -99 || c[1] < 41 || c[1] > 42 {
			t.Errorf("marks.geojson coordinates %v are not [longitude, latitude]", c)
		}
		for k := range f.Properties {
			if k != strings.ToLower(k) || strings.ContainsAny(k, " -") {
				t.Errorf("marks.geojson property %q is not snake_case", k)
			}
		}
		if _, ok := f.Properties["height_usft"]; !ok {
			t.Errorf("marks.geojson feature lacks height_usft: %v", f.Properties)
		}
	}
}

// A pack made with a signing key carries the register's statement, signed
// (Ed25519, RFC 8032), of the same head as its sheets, and lists it in
// SHA256SUMS.
func TestPackSigned(t *testing.T) {
	t.Parallel()
	db := sheetRegister(t)
	dir := t.TempDir()
	key := filepath.Join(dir, "office.key")
	mustRun(t, db.URL, "audit", "key", "new", key)
	out := filepath.Join(dir, "p.zip")
	mustRun(t, db.URL, "pack", "--near", "41.6208,-97.9583", "--within", "1km", "--key", key, "--out", out)
	data, _ := os.ReadFile(out)
	files, _ := readZip(t, data)
	st, signed, err := register.ParseStatement(files["statement.json"], "")
	if err != nil || !signed {
		t.Fatalf("pack's statement.json: signed %v, %v", signed, err)
	}
	if !strings.Contains(string(files["README.txt"]), st.Head) || !strings.Contains(string(files["SHA256SUMS"]), "  statement.json\n") {
		t.Errorf("pack's README or SHA256SUMS does not match its statement of head %s", st.Head)
	}
}
