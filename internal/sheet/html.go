package sheet

import (
	"bytes"
	"encoding/base64"
	"fmt"
	"html/template"
	"io"
	"strconv"
	"strings"
	"sync"
	"time"
)

// HTML writes the sheet as one self-contained HTML document that is also
// well-formed XML (every element closed), with a print stylesheet and no
// script. Everything from the register is escaped by html/template: a
// description holding markup is shown as written.
func HTML(w io.Writer, d Data) error {
	var b bytes.Buffer
	if err := htmlTmpl().Execute(&b, d); err != nil {
		return fmt.Errorf("sheet %s: %w", d.Designation, err)
	}
	_, err := w.Write(b.Bytes())
	return err
}

// Body writes the sheet's content alone, without the document around it
// and without its stylesheet (CSS), for a page that places the sheet in
// its own document: the web pages of cairn serve, whose Content Security
// Policy allows no inline style. Everything from the register is escaped
// as in HTML.
func Body(w io.Writer, d Data) error {
	var b bytes.Buffer
	if err := htmlTmpl().ExecuteTemplate(&b, "body", d); err != nil {
		return fmt.Errorf("sheet %s: %w", d.Designation, err)
	}
	_, err := w.Write(b.Bytes())
	return err
}

// CSS is the sheet's stylesheet, screen and print, as HTML writes it
// inline; a page around Body serves it as a file.
const CSS = `body { font-family: "DejaVu Sans", Verdana, sans-serif; font-size: 10pt; margin: 1.5em; color: #000; }
h1 { font-size: 16pt; margin: 0 0 0.3em 0; }
h2 { font-size: 11pt; border-bottom: 1px solid #444; margin: 1em 0 0.3em 0; }
table { border-collapse: collapse; }
th, td { text-align: left; vertical-align: top; padding: 2px 6px; border: 1px solid #999; }
.doubt { border: 3px solid #b00; background: #fee; color: #700; font-weight: bold; padding: 0.5em; margin: 0.5em 0; }
.fine { color: #333; font-size: 9pt; }
.text { white-space: pre-wrap; overflow-wrap: anywhere; }
.cautions { border: 1px solid #000; padding: 0.5em; }
.photo { max-width: 60mm; max-height: 60mm; margin: 4px; }
@media print {
  @page { size: A4; margin: 15mm; }
  body { margin: 0; }
  .doubt { background: none; }
  h2 { break-after: avoid; }
  table, .cautions { break-inside: avoid; }
}
`

// Title is the sheet's title.
func (d Data) Title() string { return "Mark " + d.Designation + " · cairn datasheet" }

// PositionText is the position in words.
func (d Data) PositionText() string {
	if d.Lat == nil || d.Lon == nil {
		return "no position in the register"
	}
	s := fmt.Sprintf("%s, %s (deg, approx.)", strconv.FormatFloat(*d.Lat, 'f', 6, 64), strconv.FormatFloat(*d.Lon, 'f', 6, 64))
	if d.PositionSource != "" {
		s += "; from " + d.PositionSource
	}
	return s
}

// AsOfText says what instant the heights are of.
func (d Data) AsOfText() string {
	s := "in force when the sheet was made"
	if d.State.AsOf != nil {
		s = "in force on " + d.State.AsOf.UTC().Format(time.RFC3339)
	}
	if d.State.KnownAt != nil {
		s += " as the register knew them on " + d.State.KnownAt.UTC().Format(time.RFC3339)
	}
	return s
}

// RecoveredText is the last recovery in words.
func (d Data) RecoveredText() string {
	if d.LastRecovered == nil {
		return "never reported found in good order"
	}
	return d.LastRecovered.Format("2006-01-02")
}

// StateText is the register state in words.
func (d Data) StateText() string {
	if d.State.Head == "" {
		return "a register with no commit in its evidence chain"
	}
	return fmt.Sprintf("commit %d, head %s, committed %s", d.State.Seq, d.State.Head, d.State.Time().Format(time.RFC3339Nano))
}

// DataURI is the photograph as a data: URL (RFC 2397) for an img
// element, "" unless it is a JPEG or PNG with content. Its bytes are
// base64, so nothing of them can leave the attribute.
func (p Photo) DataURI() template.URL {
	if len(p.Content) == 0 || (p.MediaType != "image/jpeg" && p.MediaType != "image/png") {
		return ""
	}
	return template.URL("data:" + p.MediaType + ";base64," + base64.StdEncoding.EncodeToString(p.Content))
}

// svgSketch is the sketch as SVG elements' coordinates, in a 200 × 200
// box with north up.
type svgSketch struct {
	Points []svgPoint
	ScaleM string
	BarPx  string
}

type svgPoint struct {
	Label string
	X, Y  string
}

// Sketch returns the sketch for the template; nil without a position.
func (d Data) Sketch() *svgSketch {
	pts, half, ok := d.sketch()
	if !ok {
		return nil
	}
	s := &svgSketch{ScaleM: strconv.FormatFloat(half/2, 'f', -1, 64) + " m", BarPx: "50"}
	for _, p := range pts {
		x := 100 + p.E/half*90
		y := 100 - p.N/half*90
		s.Points = append(s.Points, svgPoint{Label: p.Label, X: strconv.FormatFloat(x, 'f', 1, 64), Y: strconv.FormatFloat(y, 'f', 1, 64)})
	}
	return s
}

// htmlTmpl is the sheet's template, parsed on first use (not at every
// command's start).
var htmlTmpl = sync.OnceValue(func() *template.Template {
	return template.Must(template.New("sheet").Funcs(template.FuncMap{
		"date": func(t time.Time) string { return t.UTC().Format("2006-01-02") },
		"time": func(t time.Time) string { return t.UTC().Format(time.RFC3339) },
		"join": func(s []string) string { return strings.Join(s, ", ") },
		"orDash": func(s string) string {
			if s == "" {
				return "—"
			}
			return s
		},
	}).Parse(`<!DOCTYPE html>
<html lang="en" xmlns="http://www.w3.org/1999/xhtml">
<head>
<meta charset="utf-8"/>
<title>{{.Title}}</title>
<style>
` + CSS + `</style>
</head>
<body>
{{template "body" .}}</body>
</html>
{{define "body"}}<h1>Mark {{.Designation}}</h1>
{{range .Doubts}}<p class="doubt">{{.}}</p>
{{end}}{{if .Retired}}<p class="doubt">RETIRED: {{.Retired}}</p>
{{end}}<h2>The mark</h2>
<table>
<tr><th>designation</th><td>{{.Designation}}</td></tr>
<tr><th>other names</th><td>{{orDash (join .Aliases)}}</td></tr>
<tr><th>kind of mark</th><td>{{orDash .Kind}}</td></tr>
<tr><th>set in</th><td>{{orDash .Setting}}</td></tr>
<tr><th>stamped</th><td>{{orDash .Stamping}}</td></tr>
<tr><th>description</th><td class="text">{{orDash .Description}}</td></tr>
{{if .Replaces}}<tr><th>replaces</th><td>{{.Replaces}}</td></tr>
{{end}}</table>
<h2>Finding it</h2>
<p>position: {{.PositionText}}</p>
<p class="text">{{orDash .Directions}}</p>
{{with .Sketch}}<svg xmlns="http://www.w3.org/2000/svg" width="220" height="220" viewBox="0 0 220 220" role="img" aria-label="sketch of the marks nearby">
<rect x="0.5" y="0.5" width="200" height="200" fill="none" stroke="#000"/>
<line x1="210" y1="30" x2="210" y2="5" stroke="#000"/><text x="206" y="42" font-size="9">N</text>
<line x1="10" y1="210" x2="60" y2="210" stroke="#000" stroke-width="2"/><text x="65" y="213" font-size="8">{{.ScaleM}}</text>
<polygon points="100,94 105,104 95,104" fill="#000"/>
{{range .Points}}<circle cx="{{.X}}" cy="{{.Y}}" r="2.5" fill="none" stroke="#000"/><text x="{{.X}}" y="{{.Y}}" dx="4" dy="-4" font-size="8">{{.Label}}</text>
{{end}}</svg>
<p class="fine">Sketch: this mark (triangle) and the marks near it (circles), north up, from the register's approximate positions; no map.</p>
{{end}}<h2>Heights ({{.Unit}}), {{.AsOfText}}</h2>
{{if .Heights}}<table>
<tr><th>datum</th><th>height ({{.Unit}})</th><th>as published</th><th>version</th><th>class</th><th>provenance</th><th>in force from (UTC)</th><th>source</th></tr>
{{range .Heights}}<tr><td>{{.Datum}}</td><td>{{if .Withdrawn}}withdrawn{{else}}{{.Value}}{{end}}</td><td>{{orDash .Published}}</td><td>{{.Version}}</td><td>{{orDash .Class}}</td><td>{{.Provenance}}</td><td>{{time .InForceFrom}}</td><td class="text">{{orDash .Source}}</td></tr>
{{end}}</table>
{{else}}<p class="doubt">No height in force on any datum.</p>
{{end}}<h2>Condition</h2>
<p>last found in good order: {{.RecoveredText}}</p>
{{if .Conditions}}<table>
<tr><th>observed on</th><th>condition</th><th>by</th><th>note</th></tr>
{{range .Conditions}}<tr><td>{{date .ObservedOn}}</td><td>{{.Condition}}</td><td>{{.By}}</td><td class="text">{{.Note}}</td></tr>
{{end}}</table>
{{else}}<p>No condition report yet: the mark's condition is unverified.</p>
{{end}}{{if .Photos}}<h2>Photographs</h2>
<table>
<tr><th>report of</th><th>view</th><th>file</th><th>bytes</th><th>SHA-256</th></tr>
{{range .Photos}}<tr><td>{{date .ObservedOn}}</td><td>{{.View}}</td><td>{{.FileName}}</td><td>{{.Bytes}}</td><td>{{.SHA256}}</td></tr>
{{end}}</table>
{{range .Photos}}{{with .DataURI}}<img src="{{.}}" alt="photograph" class="photo"/>
{{end}}{{end}}
{{end}}<h2>Register state</h2>
<p>Made from {{.StateText}}. <span class="fine">Check it with cairn audit verify.</span></p>
<h2>Before you use this height</h2>
<div class="cautions">{{range .Cautions}}<p>{{.}}</p>
{{end}}</div>
{{end}}`))
})
