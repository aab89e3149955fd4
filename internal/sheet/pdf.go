package sheet

import (
	"bytes"
	_ "embed"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"

	"codeberg.org/go-pdf/fpdf"
)

// DejaVu Sans (Bitstream Vera licence, font/LICENSE): a font with Latin,
// Greek and Cyrillic, embedded so that the PDF writes any such text the
// register holds as given, on any machine.
var (
	//go:embed font/DejaVuSans.ttf
	fontRegular []byte
	//go:embed font/DejaVuSans-Bold.ttf
	fontBold []byte
)

// Page geometry of the PDF, in millimetres (A4, ISO 216).
const (
	pageW, pageH = 210.0, 297.0
	margin       = 15.0
	textW        = pageW - 2*margin
	lineH        = 5.0
	sketchMM     = 50.0
)

// PDF writes the sheet as a PDF (A4). The document's creation and
// modification dates are the register state's time, its catalogue sorted,
// so the same Data gives the same bytes.
func PDF(w io.Writer, d Data) error {
	f, cur := newPDF(d.State.Time())
	writeSheet(f, cur, d)
	if err := f.Error(); err != nil {
		return fmt.Errorf("sheet %s: %w", d.Designation, err)
	}
	return f.Output(w)
}

// PDFMany writes the sheets one after another in one PDF, each from a new
// page, dated at t.
func PDFMany(w io.Writer, ds []Data, t time.Time) error {
	f, cur := newPDF(t)
	for _, d := range ds {
		writeSheet(f, cur, d)
	}
	if err := f.Error(); err != nil {
		return fmt.Errorf("sheets: %w", err)
	}
	return f.Output(w)
}

// newPDF starts a document dated t. Its footer names the sheet in *cur,
// which writeSheet sets once the sheet's first page is begun (the footer
// of a page is written when the next page begins).
func newPDF(t time.Time) (*fpdf.Fpdf, *Data) {
	f := fpdf.New("P", "mm", "A4", "")
	cur := &Data{}
	f.SetFooterFunc(func() {
		f.SetY(-margin - 2)
		f.SetFont("dejavu", "", 7)
		f.MultiCell(textW, 3, fmt.Sprintf("cairn datasheet of %s · page %d · register commit %d, head %.16s", cur.Designation, f.PageNo(), cur.State.Seq, cur.State.Head), "", "L", false)
	})
	f.SetMargins(margin, margin, margin)
	f.SetAutoPageBreak(true, margin+5)
	f.AddUTF8FontFromBytes("dejavu", "", fontRegular)
	f.AddUTF8FontFromBytes("dejavu", "B", fontBold)
	f.SetCreationDate(t)
	f.SetModificationDate(t)
	f.SetCatalogSort(true)
	f.SetProducer("cairn", false)
	f.SetCreator("cairn datasheet", false)
	return f, cur
}

func writeSheet(f *fpdf.Fpdf, cur *Data, d Data) {
	if cur.Designation == "" {
		f.SetTitle(d.Title(), true)
	}
	f.AddPage()
	*cur = d
	f.SetFont("dejavu", "B", 16)
	f.MultiCell(textW, 8, "Mark "+d.Designation, "", "L", false)
	f.Ln(1)

	// The doubts, loud: white on red, before anything else.
	loud := d.Doubts
	if d.Retired != "" {
		loud = append([]string{"RETIRED: " + d.Retired}, loud...)
	}
	for _, s := range loud {
		banner(f, s)
	}
	if len(d.Heights) == 0 {
		banner(f, "No height in force on any datum.")
	}

	heading(f, "The mark")
	field(f, "designation", d.Designation)
	field(f, "other names", orDash(strings.Join(d.Aliases, ", ")))
	field(f, "kind of mark", orDash(d.Kind))
	field(f, "set in", orDash(d.Setting))
	field(f, "stamped", orDash(d.Stamping))
	field(f, "description", orDash(d.Description))
	if d.Replaces != "" {
		field(f, "replaces", d.Replaces)
	}

	heading(f, "Finding it")
	field(f, "position", d.PositionText())
	drawSketch(f, d)
	field(f, "directions", orDash(d.Directions))

	heading(f, "Heights ("+d.Unit+"), "+d.AsOfText())
	for _, h := range d.Heights {
		f.SetFont("dejavu", "B", 10)
		v := h.Value + " " + d.Unit
		if h.Withdrawn {
			v = "withdrawn"
		}
		f.MultiCell(textW, lineH+1, h.Datum+"   "+v, "", "L", false)
		f.SetFont("dejavu", "", 9)
		var parts []string
		if h.Published != "" {
			parts = append(parts, "as published "+h.Published)
		}
		parts = append(parts, "version "+strconv.Itoa(h.Version), "class "+orDash(h.Class), "provenance "+h.Provenance,
			"in force from "+h.InForceFrom.UTC().Format(time.RFC3339))
		f.MultiCell(textW, lineH, strings.Join(parts, "; "), "", "L", false)
		field(f, "source", orDash(h.Source))
		f.Ln(1)
	}

	heading(f, "Condition")
	field(f, "last found in good order", d.RecoveredText())
	if len(d.Conditions) == 0 {
		field(f, "reports", "none yet: the mark's condition is unverified")
	}
	for _, c := range d.Conditions {
		s := c.Condition + ", reported by " + c.By
		if c.Note != "" {
			s += ": " + c.Note
		}
		field(f, c.ObservedOn.UTC().Format("2006-01-02"), s)
	}

	if len(d.Photos) > 0 {
		heading(f, "Photographs")
		for _, p := range d.Photos {
			field(f, p.ObservedOn.UTC().Format("2006-01-02"), fmt.Sprintf("%s, %s, %d bytes, SHA-256 %s", p.View, p.FileName, p.Bytes, p.SHA256))
		}
		drawPhotos(f, d.Photos)
	}

	heading(f, "Register state")
	f.SetFont("dejavu", "", 9)
	f.MultiCell(textW, lineH, "Made from "+d.StateText()+". Check it with cairn audit verify.", "", "L", false)

	heading(f, "Before you use this height")
	f.SetFont("dejavu", "B", 9)
	f.MultiCell(textW, lineH, strings.Join(d.Cautions, "\n"), "1", "L", false)
}

func orDash(s string) string {
	if s == "" {
		return "—"
	}
	return s
}

func heading(f *fpdf.Fpdf, s string) {
	f.Ln(2)
	if f.GetY()+20 > pageH-margin-5 {
		f.AddPage()
	}
	f.SetFont("dejavu", "B", 11)
	f.MultiCell(textW, 6, s, "B", "L", false)
	f.Ln(1)
}

// field writes a label and its value, the value wrapped beside it.
func field(f *fpdf.Fpdf, label, value string) {
	const labelW = 45.0
	f.SetFont("dejavu", "B", 9)
	y := f.GetY()
	if y+lineH > pageH-margin-5 {
		f.AddPage()
		y = f.GetY()
	}
	f.SetXY(margin, y)
	f.CellFormat(labelW, lineH, label, "", 0, "L", false, 0, "")
	f.SetFont("dejavu", "", 9)
	f.SetXY(margin+labelW, y)
	f.MultiCell(textW-labelW, lineH, value, "", "L", false)
}

func banner(f *fpdf.Fpdf, s string) {
	f.SetFillColor(176, 0, 0)
	f.SetTextColor(255, 255, 255)
	f.SetFont("dejavu", "B", 10)
	f.MultiCell(textW, 6, s, "", "L", true)
	f.SetTextColor(0, 0, 0)
	f.Ln(1)
}

// drawSketch draws the mark and its neighbours in a square at the right,
// north up, with a scale bar of half the square's half-width.
func drawSketch(f *fpdf.Fpdf, d Data) {
	pts, half, ok := d.sketch()
	if !ok {
		return
	}
	if f.GetY()+sketchMM+8 > pageH-margin-5 {
		f.AddPage()
	}
	x0, y0 := margin, f.GetY()+1
	cx, cy := x0+sketchMM/2, y0+sketchMM/2
	f.SetDrawColor(0, 0, 0)
	f.SetFillColor(0, 0, 0)
	f.SetLineWidth(0.2)
	f.Rect(x0, y0, sketchMM, sketchMM, "D")
	// This mark: a filled triangle.
	f.Polygon([]fpdf.PointType{{X: cx, Y: cy - 1.8}, {X: cx + 1.6, Y: cy + 1.2}, {X: cx - 1.6, Y: cy + 1.2}}, "F")
	f.SetFont("dejavu", "", 6)
	scale := (sketchMM / 2 * 0.9) / half
	for _, p := range pts {
		x, y := cx+p.E*scale, cy-p.N*scale
		f.Circle(x, y, 0.8, "D")
		f.Text(x+1.2, y-1.2, p.Label)
	}
	// North arrow and scale bar.
	f.Line(x0+sketchMM+3, y0+8, x0+sketchMM+3, y0+1)
	f.Text(x0+sketchMM+2, y0+11, "N")
	bar := half / 2 * scale
	f.SetLineWidth(0.6)
	f.Line(x0, y0+sketchMM+3, x0+bar, y0+sketchMM+3)
	f.SetLineWidth(0.2)
	f.Text(x0+bar+2, y0+sketchMM+4, strconv.FormatFloat(half/2, 'f', -1, 64)+" m")
	f.SetXY(x0+sketchMM+10, y0)
	f.SetFont("dejavu", "", 8)
	f.MultiCell(textW-sketchMM-10, 4, "Sketch: this mark (triangle) and the marks near it (circles), north up, from the register's approximate positions; no map.", "", "L", false)
	f.SetXY(margin, y0+sketchMM+7)
}

// photoMM is the width of a photograph on the PDF sheet.
const photoMM = 45.0

// drawPhotos draws the photographs fpdf can read in a row (a new row, or
// page, when full). One it cannot read (an interlaced PNG, say) is tried
// on a scratch document first and left out with a note, so that it never
// spoils the sheet.
func drawPhotos(f *fpdf.Fpdf, ps []Photo) {
	x := margin
	rowH := 0.0
	for _, p := range ps {
		typ := map[string]string{"image/jpeg": "JPG", "image/png": "PNG"}[p.MediaType]
		if len(p.Content) == 0 || typ == "" {
			continue
		}
		opt := fpdf.ImageOptions{ImageType: typ}
		scratch := fpdf.New("P", "mm", "A4", "")
		scratch.RegisterImageOptionsReader("p", opt, bytes.NewReader(p.Content))
		if scratch.Err() {
			f.SetFont("dejavu", "", 8)
			f.MultiCell(textW, 4, p.FileName+": this image cannot be drawn here; its SHA-256 is above", "", "L", false)
			continue
		}
		name := "photo-" + p.SHA256
		info := f.RegisterImageOptionsReader(name, opt, bytes.NewReader(p.Content))
		if info == nil || info.Width() == 0 {
			continue
		}
		h := photoMM * info.Height() / info.Width()
		if x+photoMM > pageW-margin {
			f.SetY(f.GetY() + rowH + 2)
			x, rowH = margin, 0
		}
		if f.GetY()+h > pageH-margin-5 {
			f.AddPage()
			x, rowH = margin, 0
		}
		f.ImageOptions(name, x, f.GetY()+1, photoMM, h, false, opt, 0, "")
		x += photoMM + 3
		rowH = max(rowH, h)
	}
	if rowH > 0 {
		f.SetY(f.GetY() + rowH + 3)
	}
}
