package cli

import (
	"archive/zip"
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"fmt"
	"os"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/geojson"
	"cairn/internal/register"
	"cairn/internal/sheet"
	"cairn/internal/units"
)

// packOptions are the inputs of `cairn pack`.
type packOptions struct {
	f       *Factory
	ctx     context.Context
	near    string
	within  string
	asOf    *time.Time
	asOfArg string
	knownAt *time.Time
	known   string
	unit    units.Unit
	out     string
	key     string
	limit   int
}

// defaultPackLimit is how many marks a pack holds unless told.
const defaultPackLimit = 500

func newCmdPack(f *Factory, runF func(*packOptions) error) *cobra.Command {
	opts := &packOptions{f: f}
	var asOf, knownAt, unit string
	cmd := &cobra.Command{
		Use:   "pack --near LAT,LON --within R [--limit N] [--as-of TIME] [--known-at TIME] [--unit m|ft|usft] --out FILE.zip",
		Short: "Write a job pack for a site: the sheets, CSV and GeoJSON of the marks near it",
		Long: `Write a job pack (a zip file) for the marks within --within of a site:

  README.txt              what the pack is, the register state, the cautions
  datasheets.pdf          every mark's sheet, one after another
  sheets/MARK.html        every mark's sheet as HTML
  marks.csv               one row per mark and datum, heights in --unit
  marks.geojson           the same rows as an RFC 7946 FeatureCollection of
                          points (longitude, latitude)
  statement.json          the register's signed audit statement, when a key
                          is configured (--key, or CAIRN_AUDIT_KEY)
  SHA256SUMS              the SHA-256 of every other file (sha256sum -c)

The pack is reproducible: the same register state and arguments give the
same bytes (the files' times in the zip and the PDF's dates are the time of
the register's latest commit; marks by distance, then designation). A
signed statement says when it was made, so a pack with one differs in that
file and in SHA256SUMS. --as-of gives the pack as it would have been at a
past time: the heights in force then and the condition reports observed by
then, as the register knows them now. --known-at gives the pack as the
register knew it at a past time, as height show --known-at does: only the
marks added, the height versions committed and the condition reports
recorded by then (alone, the heights in force then; with --as-of, those in
force at --as-of). Together they rebuild what a crew was handed on a day,
from the register as it stood that day. The marks' descriptions, positions
and doubts are as known now. A pack holds at most the --limit nearest marks
(default 500; 0 for all); when more are within the radius, README.txt and
the error stream say so.

` + cautions,
		Example: `  cairn pack --near 41.62,-97.95 --within 2km --unit usft --out mere-bridge.zip
  cairn pack --near 41.62,-97.95 --within 2km --as-of 2020-06-01 --out as-in-force.zip
  cairn pack --near 41.62,-97.95 --within 2km --known-at 2020-06-01 --out as-handed.zip`,
		Args: exactArgs(0, "no arguments"),
		RunE: func(cmd *cobra.Command, _ []string) error {
			opts.ctx = cmd.Context()
			var err error
			if opts.near == "" {
				return badInput("--near LAT,LON is required: the site the pack is for")
			}
			if opts.out == "" {
				return badInput("--out FILE.zip is required")
			}
			if opts.limit < 0 {
				return badInput("limit: %d is not a number of marks (0 for all)", opts.limit)
			}
			if opts.asOf, err = parseAsOf(asOf); err != nil {
				return err
			}
			opts.asOfArg = asOf
			if opts.knownAt, err = parseKnownAt(knownAt); err != nil {
				return err
			}
			opts.known = knownAt
			if opts.unit, err = parseSheetUnit(unit); err != nil {
				return err
			}
			return dispatch(opts, runF, packRun)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&opts.near, "near", "", "LAT,LON in decimal degrees: the site")
	fl.StringVar(&opts.within, "within", "2km", "radius about the site, in m, km, ft, usft or mi (e.g. 2km, 500m)")
	fl.StringVar(&asOf, "as-of", "", asOfUsage("give the heights"))
	fl.StringVar(&knownAt, "known-at", "", knownAtUsage("give the marks, heights and condition reports"))
	fl.StringVar(&unit, "unit", "m", "unit of the heights: m, ft (international foot) or usft (US survey foot)")
	fl.IntVar(&opts.limit, "limit", defaultPackLimit, "pack at most this many marks, nearest first (0 for all)")
	fl.StringVar(&opts.out, "out", "", "the zip file to write")
	fl.StringVar(&opts.key, "key", "", "sign the statement with the Ed25519 key in FILE (default: the file CAIRN_AUDIT_KEY names; none: no statement)")
	return cmd
}

func packRun(opts *packOptions) error {
	ll, err := parseLatLon(opts.near)
	if err != nil {
		return err
	}
	radius, err := parseDistance(opts.within)
	if err != nil {
		return err
	}
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	// A bar of the sheets read, then of the sheets written, on a terminal.
	var bar *Bar
	defer func() { bar.Finish() }()
	dp := register.DatasheetParams{Near: &ll, RadiusM: radius, AsOf: opts.asOf, KnownAt: opts.knownAt,
		Progress: func(done, total int) {
			if bar == nil {
				bar = opts.f.IO.StartBar(int64(total), "pack: reading sheets", "marks")
			}
			bar.Add(1)
		}}
	if opts.limit > 0 {
		dp.Limit = opts.limit + 1 // one more, to know whether there are more
	}
	set, err := r.Datasheets(opts.ctx, dp)
	bar.Finish()
	if err != nil {
		return err
	}
	more := opts.limit > 0 && len(set.Sheets) > opts.limit
	if more {
		set.Sheets = set.Sheets[:opts.limit]
	}
	var stmt []byte
	if opts.key != "" || os.Getenv("CAIRN_AUDIT_KEY") != "" {
		s, err := makeStatement(opts.ctx, r, opts.key, opts.f)
		if err != nil {
			return err
		}
		if s.Seq != set.State.Seq || s.Head != set.State.Head {
			return fmt.Errorf("the register changed while the pack was made (commit %d, then %d): make it again", set.State.Seq, s.Seq)
		}
		stmt = s.Encode()
	}
	p := packInput{Near: opts.near, Within: opts.within, AsOf: opts.asOfArg, KnownAt: opts.known, Unit: opts.unit, Set: set, Statement: stmt, More: more}
	bar = opts.f.IO.StartBar(int64(2*len(set.Sheets)), "pack: writing sheets (PDF, HTML)", "sheets")
	p.Step = func() { bar.Add(1) }
	data, err := buildPack(p)
	bar.Finish()
	if err != nil {
		return err
	}
	ios := opts.f.IO
	for _, s := range set.Sheets {
		warnDoubts(ios, s.Doubts)
	}
	if err := os.WriteFile(opts.out, data, 0o644); err != nil {
		return err
	}
	ios.printf("wrote %s: %d mark(s) within %s of %s, register commit %d\n", opts.out, len(set.Sheets), opts.within, opts.near, set.State.Seq)
	if more {
		ios.printf("more marks are within %s of %s than the %d nearest packed (--limit 0 packs all)\n", opts.within, opts.near, opts.limit)
	}
	return nil
}

// packInput is what a pack is made of.
type packInput struct {
	Near, Within, AsOf, KnownAt string
	Unit                        units.Unit
	Set                         register.DatasheetSet
	Statement                   []byte // nil: none
	// Step, unless nil, is called after each sheet's PDF page and HTML
	// file, for a progress bar.
	Step func()
	// More: the radius holds more marks than the nearest packed (--limit).
	More bool
}

// packFile is one file of a pack.
type packFile struct {
	Name string
	Data []byte
}

// packEpoch is the files' time in a pack from a register with no commit:
// the earliest time a zip file can hold (MS-DOS dates start in 1980).
var packEpoch = time.Date(1980, 1, 1, 0, 0, 0, 0, time.UTC)

// buildPack makes the zip, in a fixed order with fixed times.
func buildPack(p packInput) ([]byte, error) {
	at := p.Set.State.CommittedAt.UTC()
	if at.Before(packEpoch) {
		at = packEpoch
	}
	step := p.Step
	if step == nil {
		step = func() {}
	}
	var ds []sheet.Data
	for _, s := range p.Set.Sheets {
		ds = append(ds, sheetData(p.Set.State, s, parsedInstant(p.AsOf), parsedInstant(p.KnownAt), p.Unit))
	}
	var files []packFile
	files = append(files, packFile{"README.txt", packReadme(p, len(ds))})
	var pdf bytes.Buffer
	if len(ds) > 0 {
		if err := sheet.PDFMany(&pdf, ds, at); err != nil {
			return nil, err
		}
		for range ds {
			step() // the PDF is made in one call
		}
		files = append(files, packFile{"datasheets.pdf", pdf.Bytes()})
	}
	rows := packRows(p.Set, p.Unit)
	c, err := packCSV(rows, p.Unit)
	if err != nil {
		return nil, err
	}
	files = append(files, packFile{"marks.csv", c})
	g, err := packGeoJSON(rows, p.Unit)
	if err != nil {
		return nil, err
	}
	files = append(files, packFile{"marks.geojson", g})
	used := map[string]int{}
	for _, d := range ds {
		var h bytes.Buffer
		if err := sheet.HTML(&h, d); err != nil {
			return nil, err
		}
		name := sheetFileName(d.Designation)
		if n := used[name]; n > 0 {
			name += "_" + strconv.Itoa(n+1)
		}
		used[sheetFileName(d.Designation)]++
		files = append(files, packFile{"sheets/" + name + ".html", h.Bytes()})
		step()
	}
	if p.Statement != nil {
		files = append(files, packFile{"statement.json", p.Statement})
	}
	var sums strings.Builder
	for _, f := range files {
		s := sha256.Sum256(f.Data)
		fmt.Fprintf(&sums, "%s  %s\n", hex.EncodeToString(s[:]), f.Name)
	}
	files = append(files, packFile{"SHA256SUMS", []byte(sums.String())})

	var b bytes.Buffer
	zw := zip.NewWriter(&b)
	for _, f := range files {
		w, err := zw.CreateHeader(&zip.FileHeader{Name: f.Name, Method: zip.Deflate, Modified: at})
		if err != nil {
			return nil, err
		}
		if _, err := w.Write(f.Data); err != nil {
			return nil, err
		}
	}
	if err := zw.Close(); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

// parsedInstant is the pack's --as-of or --known-at again (it was
// checked on the way in).
func parsedInstant(s string) *time.Time {
	if s == "" {
		return nil
	}
	t, err := parseInstant(s)
	if err != nil {
		return nil
	}
	return &t
}

// packRow is one mark and datum of a pack's CSV and GeoJSON; a mark with
// no height has one row with no datum.
type packRow struct {
	Mark          string
	Aliases       []string
	Lat, Lon      *float64
	DistanceM     *float64
	Condition     string
	LastGoodOn    string
	Datum         string
	Height        string // in the pack's unit
	Published     string // exactly as published
	PublishedUnit string
	Version       int
	Class         string
	InForceFrom   string
	Source        string
	Doubts        string
}

func packRows(set register.DatasheetSet, u units.Unit) []packRow {
	var out []packRow
	for _, s := range set.Sheets {
		out = append(out, packRowsOf(set.State, s, u)...)
	}
	return out
}

// packRowsOf is one mark's rows: one per datum, or one with no datum.
func packRowsOf(st register.RegisterState, s register.Datasheet, u units.Unit) []packRow {
	d := sheetData(st, s, nil, nil, u)
	base := packRow{Mark: s.Mark.Designation, Aliases: d.Aliases, Lat: s.Mark.Lat, Lon: s.Mark.Lon, DistanceM: s.Mark.DistanceM,
		Condition: condition(s.Mark), Doubts: s.Doubts.Words()}
	if base.Aliases == nil {
		base.Aliases = []string{}
	}
	if d.LastRecovered != nil {
		base.LastGoodOn = d.LastRecovered.Format("2006-01-02")
	}
	if len(s.Heights) == 0 {
		return []packRow{base}
	}
	out := make([]packRow, 0, len(s.Heights))
	for i, h := range s.Heights {
		row := base
		row.Datum, row.Version, row.Class, row.Source = h.DatumCode, h.Version, h.Class, d.Heights[i].Source
		row.InForceFrom = h.InForceFrom.UTC().Format(time.RFC3339)
		row.Doubts = s.Doubts.Of(h.DatumCode, h.Version).Words()
		if h.Value != nil {
			row.Height, row.Published, row.PublishedUnit = d.Heights[i].Value, *h.Value, *h.Unit
		}
		out = append(out, row)
	}
	return out
}

func fmtDeg(v *float64) string {
	if v == nil {
		return ""
	}
	return strconv.FormatFloat(*v, 'f', -1, 64)
}

// packCSV writes the rows with units in the headers (docs/output.md).
func packCSV(rows []packRow, u units.Unit) ([]byte, error) {
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	_ = w.Write(packCSVHeader(u))
	for _, r := range rows {
		_ = w.Write(r.csvRecord())
	}
	w.Flush()
	return b.Bytes(), w.Error()
}

// packCSVHeader is the header of a pack's (and an export's) CSV: units in
// the headers, the height's named after u.
func packCSVHeader(u units.Unit) []string {
	return []string{"mark", "aliases", "lat_deg", "lon_deg", "distance_from_site_m", "condition", "last_found_good_on",
		"datum", "height_" + string(u), "height_in_unit", "unit", "version", "class", "in_force_from_utc", "source", "doubts"}
}

// csvRecord is r's CSV record, in packCSVHeader's order.
func (r packRow) csvRecord() []string {
	dist, ver := "", ""
	if r.DistanceM != nil {
		dist = units.Format(*r.DistanceM, 1)
	}
	if r.Version > 0 {
		ver = strconv.Itoa(r.Version)
	}
	return []string{r.Mark, strings.Join(r.Aliases, ";"), fmtDeg(r.Lat), fmtDeg(r.Lon), dist, r.Condition, r.LastGoodOn,
		r.Datum, r.Height, r.Published, r.PublishedUnit, ver, r.Class, r.InForceFrom, r.Source, r.Doubts}
}

// packGeoJSON writes the rows that have a position as an RFC 7946
// FeatureCollection of Points (internal/geojson: [longitude, latitude], no
// crs member), one feature per row.
func packGeoJSON(rows []packRow, u units.Unit) ([]byte, error) {
	var b bytes.Buffer
	w := geojson.NewWriter(&b, " ")
	for _, r := range rows {
		if r.Lat == nil || r.Lon == nil {
			continue
		}
		if err := w.Write(r.feature(u)); err != nil {
			return nil, err
		}
	}
	if err := w.Close(); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

// feature is r as a GeoJSON feature (a null geometry without a position).
// Property names are fixed snake_case with units in them, in alphabetical
// order (as the pack always had them); the height's key names the unit u.
func (r packRow) feature(u units.Unit) geojson.Feature {
	var version any
	if r.Version > 0 {
		version = r.Version
	}
	var dist any
	if r.DistanceM != nil {
		dist = *r.DistanceM
	}
	props := []geojson.Property{
		{Name: "aliases", Value: r.Aliases},
		{Name: "class", Value: nullable(r.Class)},
		{Name: "condition", Value: r.Condition},
		{Name: "datum", Value: nullable(r.Datum)},
		{Name: "distance_from_site_m", Value: dist},
		{Name: "doubts", Value: r.Doubts},
		{Name: "height_in_unit", Value: nullable(r.Published)},
		{Name: "height_" + string(u), Value: nullable(r.Height)},
		{Name: "in_force_from_utc", Value: nullable(r.InForceFrom)},
		{Name: "last_found_good_on", Value: nullable(r.LastGoodOn)},
		{Name: "mark", Value: r.Mark},
		{Name: "source", Value: nullable(r.Source)},
		{Name: "unit", Value: nullable(r.PublishedUnit)},
		{Name: "version", Value: version},
	}
	slices.SortFunc(props, func(a, b geojson.Property) int { return strings.Compare(a.Name, b.Name) })
	return geojson.Feature{Lon: r.Lon, Lat: r.Lat, Properties: props}
}

// nullable is s, or JSON null for "".
func nullable(s string) any {
	if s == "" {
		return nil
	}
	return s
}

// packReadme is the pack's README.
func packReadme(p packInput, marks int) []byte {
	var b strings.Builder
	fmt.Fprintf(&b, "cairn job pack\n==============\n\n")
	fmt.Fprintf(&b, "Marks within %s of %s: %d.\n", p.Within, p.Near, marks)
	if p.More {
		fmt.Fprintf(&b, "MORE MARKS ARE WITHIN %s: this pack holds the %d nearest only (--limit).\n", p.Within, marks)
	}
	switch {
	case p.AsOf != "" && p.KnownAt != "":
		fmt.Fprintf(&b, "Heights in force at %s (--as-of), as the register knew them at %s\n(--known-at): marks added, versions committed and condition reports\nrecorded by then, reports observed by %s; descriptions and doubts as known now.\n", p.AsOf, p.KnownAt, p.AsOf)
	case p.KnownAt != "":
		fmt.Fprintf(&b, "The register as it knew the marks at %s (--known-at): marks added,\nheight versions committed and condition reports recorded by then, the\nheights in force then; descriptions and doubts as known now.\n", p.KnownAt)
	case p.AsOf != "":
		fmt.Fprintf(&b, "Heights in force at %s (--as-of), as the register knows them now;\ncondition reports observed by then; doubts as known now.\n", p.AsOf)
	default:
		b.WriteString("Heights in force when the register was at the state below.\n")
	}
	fmt.Fprintf(&b, "Heights in %s (%s), converted exactly from the published values.\n\n", p.Unit, p.Unit.Name())
	st := p.Set.State
	if st.Head != "" {
		fmt.Fprintf(&b, "Register state: commit %d, head %s,\ncommitted %s. Prove it with cairn audit verify", st.Seq, st.Head, st.CommittedAt.UTC().Format(time.RFC3339Nano))
		if p.Statement != nil {
			b.WriteString(" --against statement.json")
		}
		b.WriteString(".\n\n")
	}
	b.WriteString(`Files:
  datasheets.pdf     every mark's sheet
  sheets/*.html      every mark's sheet as HTML
  marks.csv          one row per mark and datum
  marks.geojson      the same rows, RFC 7946 points (longitude, latitude)
`)
	if p.Statement != nil {
		b.WriteString("  statement.json     the register's signed audit statement\n")
	}
	b.WriteString("  SHA256SUMS         the SHA-256 of every other file: sha256sum -c SHA256SUMS\n\n")
	b.WriteString("Read every sheet's doubts before using a height.\n\n")
	b.WriteString(cautions + "\n")
	return []byte(b.String())
}
