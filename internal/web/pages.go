package web

import (
	"bytes"
	"embed"
	"fmt"
	"html/template"
	"net/http"
	"net/url"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"

	"cairn/internal/register"
	"cairn/internal/sheet"
	"cairn/internal/sheetdata"
	"cairn/internal/store"
	"cairn/internal/units"
)

//go:embed templates/*.html
var templateFiles embed.FS

//go:embed static/site.css
var siteCSS []byte

// pageNames are the pages, each a template file defining "content".
var pageNames = []string{"home", "search", "map", "mark", "trace", "items", "conformance", "collections", "collection", "api", "error"}

// pages are the parsed pages, parsed on first use (not at the start of
// every cairn command: 2-3 ms of its start-up).
var pages = sync.OnceValue(func() map[string]*template.Template {
	funcs := template.FuncMap{
		"date": func(t *time.Time) string { return t.UTC().Format("2006-01-02") },
		"time": func(t time.Time) string { return t.UTC().Format(time.RFC3339) },
		"join": func(s []string) string { return visible(strings.Join(s, ", ")) },
		"vis":  visible,
		// markURL is set per request (it keeps as_of); this one is for
		// parsing.
		"markURL":       func(string) string { return "" },
		"conditionText": conditionText,
		"heightText":    heightText,
		"positionText":  positionText,
		"distanceText":  distanceText,
		"doubtWords":    doubtWords,
	}
	base := template.Must(template.New("layout").Funcs(funcs).ParseFS(templateFiles, "templates/layout.html", "templates/marklist.html"))
	out := map[string]*template.Template{}
	for _, n := range pageNames {
		out[n] = template.Must(template.Must(base.Clone()).ParseFS(templateFiles, "templates/"+n+".html"))
	}
	return out
})

// hidden is a query parameter the as-of form keeps.
type hidden struct{ Name, Value string }

// pageData is what the layout shows around a page's content.
type pageData struct {
	Title      string
	Path       string
	Hidden     []hidden
	AsOf       *time.Time
	AsOfValue  string // the date in the as-of field
	AsOfQuery  string // "?as_of=…" or ""
	AsOfAmp    string // "&as_of=…" or ""
	NowQuery   string // the request's query without as_of
	Alternates []link
	Links      []link
	State      register.RegisterState
	Statement  *Statement
	Cautions   []string
	Data       any
	// Map loads Leaflet and the map's script (the map page only).
	Map bool
}

// page writes the page name with data around it, with the ETag of state
// st.
//
// links are the resource's links (OGC API – Features /req/html/content:
// every link of the JSON in an a element of the body).
func (s *Server) page(w http.ResponseWriter, r *http.Request, st register.RegisterState, asOf *time.Time, name, title string, data any, links ...link) {
	b, err := s.render(r, st, asOf, name, title, data, links...)
	if err != nil {
		s.serverError(w, r, err)
		return
	}
	w.Header().Set("ETag", s.etag(st, r))
	s.writeHTML(w, r, http.StatusOK, b)
}

func (s *Server) writeHTML(w http.ResponseWriter, r *http.Request, status int, b []byte) {
	w.Header().Set("Content-Type", mediaHTML)
	w.Header().Set("Content-Length", strconv.Itoa(len(b)))
	w.WriteHeader(status)
	if r.Method != http.MethodHead {
		_, _ = w.Write(b)
	}
}

// render executes a page.
func (s *Server) render(r *http.Request, st register.RegisterState, asOf *time.Time, name, title string, data any, links ...link) ([]byte, error) {
	q := r.URL.Query()
	d := pageData{Title: title, Path: r.URL.Path, AsOf: asOf, State: st, Statement: s.cfg.Statement,
		Cautions: sheetdata.CautionSentences(), Data: data, Links: links, Map: name == "map"}
	rest := url.Values{}
	keys := make([]string, 0, len(q))
	for k := range q {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if k != "as_of" && k != "after" {
			d.Hidden = append(d.Hidden, hidden{k, q.Get(k)})
		}
		if k != "as_of" {
			rest[k] = q[k]
		}
	}
	if len(rest) > 0 {
		d.NowQuery = "?" + rest.Encode()
	}
	if a := q.Get("as_of"); a != "" && asOf != nil {
		d.AsOfValue = asOf.UTC().Format("2006-01-02")
		v := url.Values{"as_of": {a}}.Encode()
		d.AsOfQuery, d.AsOfAmp = "?"+v, "&"+v
	}
	if pathFormats(r.URL.Path)[0] == formatJSON {
		j := url.Values{}
		for k, v := range q {
			j[k] = v
		}
		j.Set("f", "json")
		d.Alternates = []link{{Href: withQuery(r.URL.Path, j), Type: mediaJSON}}
	}
	asOfQ := d.AsOfQuery
	t, err := pages()[name].Clone()
	if err != nil {
		return nil, err
	}
	t.Funcs(template.FuncMap{"markURL": func(designation string) string { return "/marks/" + url.PathEscape(designation) + asOfQ }})
	var b bytes.Buffer
	if err := t.ExecuteTemplate(&b, "layout", d); err != nil {
		return nil, fmt.Errorf("page %s: %w", name, err)
	}
	return b.Bytes(), nil
}

// errorPage answers status with a page saying msg.
func (s *Server) errorPage(w http.ResponseWriter, r *http.Request, status int, msg string) {
	var st register.RegisterState
	if status != http.StatusInternalServerError {
		st, _ = s.cfg.Register.State(r.Context())
	}
	data := struct {
		Status     int
		StatusText string
		Message    string
	}{status, http.StatusText(status), msg}
	// The as-of field is not read again on an error page (it may be the
	// fault).
	b, err := s.render(&http.Request{URL: &url.URL{Path: "/"}}, st, nil, "error", http.StatusText(status)+" · cairn", data)
	if err != nil {
		s.log.Error("error page", "err", err.Error())
		http.Error(w, msg, status)
		return
	}
	s.writeHTML(w, r, status, b)
}

var (
	siteCSSFile  = newStatic(siteCSS, "text/css; charset=utf-8")
	sheetCSSFile = newStatic([]byte(sheet.CSS), "text/css; charset=utf-8")
)

// static serves the stylesheets, Leaflet's files and the map's script.
// Their ETag is a digest of their bytes, not the register's state: they
// change only with cairn, so a browser or a CDN keeps them across the
// register's commits.
func (s *Server) static(w http.ResponseWriter, r *http.Request) {
	if len(r.URL.RawQuery) > 0 {
		s.fail(w, r, http.StatusBadRequest, "a static file takes no parameter")
		return
	}
	name := r.PathValue("file")
	f, ok := staticFiles()[name]
	switch name {
	case "site.css":
		f, ok = siteCSSFile, true
	case "sheet.css":
		f, ok = sheetCSSFile, true
	}
	if !ok {
		s.fail(w, r, http.StatusNotFound, "no such file")
		return
	}
	h := w.Header()
	h.Set("ETag", f.etag)
	h.Del("Vary")
	h.Set("Cache-Control", "public, max-age=3600")
	if inm := r.Header.Get("If-None-Match"); inm != "" && matchesETag(inm, f.etag) {
		w.WriteHeader(http.StatusNotModified)
		return
	}
	h.Set("Content-Type", f.contentType)
	h.Set("Content-Length", strconv.Itoa(len(f.body)))
	if r.Method != http.MethodHead {
		_, _ = w.Write(f.body)
	}
}

// searchView is the search's page.
type searchView struct {
	Asked    string
	MapURL   string // the same point on the map, for a point search
	Features []register.Feature
	More     bool
}

// searchLimit is the most marks a search page lists.
const searchLimit = 200

// search finds marks by designation or alias (q), or within radius_m of
// lat, lon.
func (s *Server) search(w http.ResponseWriter, r *http.Request) {
	_, asOf, ok := s.begin(w, r, "q", "lat", "lon", "radius_m", "as_of")
	if !ok {
		return
	}
	q := r.URL.Query()
	p := register.SearchParams{Name: q.Get("q"), AsOf: asOf, Limit: searchLimit}
	var asked []string
	var mapURL string
	if p.Name != "" {
		if len(p.Name) > 200 {
			s.error(w, r, badParam("q", "%d characters: a name is at most 200", len(p.Name)))
			return
		}
		asked = append(asked, "named “"+visible(p.Name)+"”")
	}
	if q.Has("lat") || q.Has("lon") || q.Has("radius_m") {
		var ll store.LatLon
		var err error
		if ll.Lat, err = parseNumber("lat", q.Get("lat")); err != nil {
			s.error(w, r, err)
			return
		}
		if ll.Lon, err = parseNumber("lon", q.Get("lon")); err != nil {
			s.error(w, r, err)
			return
		}
		if p.RadiusM, err = parseNumber("radius_m", q.Get("radius_m")); err != nil {
			s.error(w, r, err)
			return
		}
		p.Near = &ll
		mq := url.Values{"lat": {q.Get("lat")}, "lon": {q.Get("lon")}, "radius_m": {q.Get("radius_m")}}
		if a := q.Get("as_of"); a != "" {
			mq.Set("as_of", a)
		}
		mapURL = withQuery("/map", mq)
		asked = append(asked, fmt.Sprintf("within %s m of %s, %s (nearest first)", units.Format(p.RadiusM, 1),
			strconv.FormatFloat(ll.Lat, 'f', -1, 64), strconv.FormatFloat(ll.Lon, 'f', -1, 64)))
	}
	res, err := s.cfg.Register.Search(r.Context(), p)
	if err != nil {
		s.error(w, r, err)
		return
	}
	s.page(w, r, res.State, asOf, "search", "Marks found · cairn",
		searchView{Asked: "Marks " + strings.Join(asked, " and ") + ":", MapURL: mapURL, Features: res.Features, More: res.More})
}

// banner is a loud warning at the top of a mark's page.
type banner struct{ Word, Text string }

// historyRow is one version in the history table.
type historyRow struct {
	Datum, Value, Change, Class, Provenance, InForceFrom, Recorded, Reason string
	Version                                                                int
	InForce                                                                bool
	Doubts                                                                 []string
}

// markView is a mark's page.
type markView struct {
	Banners  []banner
	FoundBy  string
	Sheet    template.HTML
	History  []historyRow
	JSONURL  string
	TraceURL string
}

// markPage is a mark's datasheet (internal/sheet) with the history of
// its heights, every doubt in a banner above it.
func (s *Server) markPage(w http.ResponseWriter, r *http.Request) {
	_, asOf, ok := s.begin(w, r, "as_of")
	if !ok {
		return
	}
	name := r.PathValue("designation")
	v, err := s.cfg.Register.MarkPage(r.Context(), name, asOf)
	if err != nil {
		s.error(w, r, err)
		return
	}
	m := v.Sheet.Mark
	if m.Designation != name {
		http.Redirect(w, r, withQuery("/marks/"+url.PathEscape(m.Designation), r.URL.Query()), http.StatusFound)
		return
	}
	d := visibleSheet(sheetdata.From(v.State, v.Sheet, asOf, nil, units.Metre))
	var body bytes.Buffer
	if err := sheet.Body(&body, d); err != nil {
		s.serverError(w, r, err)
		return
	}
	mv := markView{FoundBy: visible(m.FoundBy), Sheet: template.HTML(body.String()), // html/template escaped it (sheet.Body)
		TraceURL: withQuery("/trace/"+url.PathEscape(m.Designation), asOfQuery(r)),
		JSONURL: withQuery("/collections/"+collectionID+"/items/"+url.PathEscape(m.Designation), func() url.Values {
			q := asOfQuery(r)
			q.Set("f", "json")
			return q
		}())}
	seen := map[string]bool{}
	for _, dt := range v.Sheet.Doubts {
		txt := dt.Warning()
		if seen[txt] {
			continue
		}
		seen[txt] = true
		mv.Banners = append(mv.Banners, banner{Word: strings.ToUpper(strings.ReplaceAll(dt.Word, "-", " ")), Text: visible(txt)})
	}
	if m.Retired != nil {
		mv.Banners = append(mv.Banners, banner{Word: "RETIRED", Text: "since " + m.Retired.On.Format("2006-01-02") + ": " + visible(m.Retired.Reason)})
	}
	inForce := map[int64]bool{}
	for _, h := range v.Sheet.Heights {
		inForce[h.ID] = true
	}
	for _, e := range v.History {
		row := historyRow{Datum: e.DatumCode, Version: e.Version, Value: "withdrawn", Change: "—", Class: e.Class, Provenance: e.SourceKind,
			InForceFrom: e.InForceFrom.UTC().Format(time.RFC3339), Recorded: e.CommittedAt.UTC().Format(time.RFC3339), Reason: visible(e.Reason),
			InForce: inForce[e.ID]}
		if e.Value != nil {
			row.Value = *e.Value + " " + *e.Unit
		}
		if e.Change != nil {
			row.Change = *e.Change
		}
		if row.Class == "" {
			row.Class = "—"
		}
		for _, dt := range e.Doubts {
			if dt.Datum != "" {
				row.Doubts = append(row.Doubts, dt.Word)
			}
		}
		mv.History = append(mv.History, row)
	}
	s.page(w, r, v.State, asOf, "mark", "Mark "+m.Designation+" · cairn", mv)
}

// traceNode is a version of a trace as the page shows it, its text made
// visible (hidden characters shown), html/template escaping the rest.
type traceNode struct {
	Datum, Value, Provenance, InForceFrom, Recorded, Source, Reason string
	Version                                                         int
	Doubts                                                          []string
	Import                                                          string
	Repeated                                                        bool
	Adjustment                                                      string
	Runs                                                            []string
	Held                                                            []traceNode
}

type traceView struct {
	Banners     []banner
	Designation string
	When        string
	Versions    []traceNode
	MarkURL     string
}

func toTraceNode(v *register.TraceVersion, doubts register.Doubts) traceNode {
	n := traceNode{Datum: v.DatumCode, Version: v.Version, Value: "withdrawn", Provenance: v.SourceKind,
		InForceFrom: v.InForceFrom.UTC().Format(time.RFC3339), Recorded: v.CommittedAt.UTC().Format(time.RFC3339),
		Source: visible(sheetdata.SourceShown(v.SourceKind, v.Source)), Reason: visible(v.Reason), Repeated: v.Repeated}
	if v.Value != nil {
		n.Value = *v.Value + " " + *v.Unit
	}
	for _, d := range doubts.Of(v.DatumCode, v.Version) {
		if d.Datum != "" {
			n.Doubts = append(n.Doubts, d.Word)
		}
	}
	if v.Import != nil {
		n.Import = strconv.FormatInt(v.Import.ID, 10) + " of " + v.Import.RecordedAt.UTC().Format("2006-01-02") + " by " + visible(v.Import.RecordedBy)
	}
	if a := v.Adjustment; a != nil {
		n.Adjustment = strconv.FormatInt(a.ID, 10) + " (" + a.Method + ")"
		for _, r := range a.Runs {
			n.Runs = append(n.Runs, strconv.FormatInt(r.ID, 10)+" ("+visible(r.FileName)+")")
		}
		for _, h := range a.Held {
			n.Held = append(n.Held, toTraceNode(h, nil))
		}
	}
	return n
}

// tracePage is a mark's trace: how each height in force was derived.
func (s *Server) tracePage(w http.ResponseWriter, r *http.Request) {
	_, asOf, ok := s.begin(w, r, "as_of")
	if !ok {
		return
	}
	name := r.PathValue("designation")
	st, t, err := s.cfg.Register.TracePage(r.Context(), name, asOf)
	if err != nil {
		s.error(w, r, err)
		return
	}
	m := t.Mark
	if m.Designation != name {
		http.Redirect(w, r, withQuery("/trace/"+url.PathEscape(m.Designation), r.URL.Query()), http.StatusFound)
		return
	}
	tv := traceView{Designation: visible(m.Designation), When: "now",
		MarkURL: withQuery("/marks/"+url.PathEscape(m.Designation), asOfQuery(r))}
	if asOf != nil {
		tv.When = "on " + asOf.UTC().Format(time.RFC3339)
	}
	seen := map[string]bool{}
	for _, dt := range t.Doubts {
		if txt := dt.Warning(); !seen[txt] {
			seen[txt] = true
			tv.Banners = append(tv.Banners, banner{Word: strings.ToUpper(strings.ReplaceAll(dt.Word, "-", " ")), Text: visible(txt)})
		}
	}
	for _, v := range t.Versions {
		tv.Versions = append(tv.Versions, toTraceNode(v, t.Doubts))
	}
	s.page(w, r, st, asOf, "trace", "Trace of "+m.Designation+" · cairn", tv)
}

// conditionText is a mark's latest condition in words.
func conditionText(f register.Feature) string {
	if f.Latest == nil {
		return "no report yet"
	}
	return visible(f.Latest.Condition) + " (" + f.Latest.ObservedOn.Format("2006-01-02") + ")"
}

// heightText is a version in force in words.
func heightText(h store.Height) string {
	if h.Value == nil {
		return h.DatumCode + ": withdrawn"
	}
	return h.DatumCode + ": " + *h.Value + " " + *h.Unit + " (v" + strconv.Itoa(h.Version) + ")"
}

func positionText(f register.Feature) string {
	if f.Lat == nil || f.Lon == nil {
		return "—"
	}
	return strconv.FormatFloat(*f.Lat, 'f', 6, 64) + ", " + strconv.FormatFloat(*f.Lon, 'f', 6, 64)
}

func distanceText(f register.Feature) string {
	if f.DistanceM == nil {
		return ""
	}
	return units.Format(*f.DistanceM, 1)
}

// doubtWords are the doubts' words, each once, in capitals.
func doubtWords(ds register.Doubts) []string {
	var out []string
	for _, w := range strings.Split(ds.Words(), ",") {
		if w != "" {
			out = append(out, strings.ToUpper(w))
		}
	}
	return out
}
