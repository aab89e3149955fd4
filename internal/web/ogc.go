package web

import (
	"errors"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"

	"cairn/internal/register"
	"cairn/internal/sheetdata"
)

// The OGC API – Features – Part 1: Core service (OGC 17-069r4): its
// conformance classes Core, GeoJSON, HTML and OpenAPI 3.0, one
// collection, "marks".

// Conformance classes the service implements (/req/core/conformance-success).
var conformsTo = []string{
	"http://www.opengis.net/spec/ogcapi-features-1/1.0/conf/core",
	"http://www.opengis.net/spec/ogcapi-features-1/1.0/conf/geojson",
	"http://www.opengis.net/spec/ogcapi-features-1/1.0/conf/html",
	"http://www.opengis.net/spec/ogcapi-features-1/1.0/conf/oas30",
}

// Media types.
const (
	mediaJSON    = "application/json"
	mediaGeoJSON = "application/geo+json"
	mediaHTML    = "text/html; charset=utf-8"
	mediaOpenAPI = "application/vnd.oai.openapi+json;version=3.0"
)

const collectionID = "marks"

func (s *Server) routes() {
	m := s.mux
	m.HandleFunc("GET /{$}", s.landing)
	m.HandleFunc("GET /search", s.search)
	m.HandleFunc("GET /marks/{designation...}", s.markPage)
	m.HandleFunc("GET /trace/{designation...}", s.tracePage)
	m.HandleFunc("GET /conformance", s.conformance)
	m.HandleFunc("GET /api", s.api)
	m.HandleFunc("GET /collections", s.collections)
	m.HandleFunc("GET /collections/{id}", s.collection)
	m.HandleFunc("GET /collections/{id}/items", s.items)
	m.HandleFunc("GET /collections/{id}/items/{designation...}", s.item)
	m.HandleFunc("GET /map", s.mapPage)
	m.HandleFunc("GET /static/{file...}", s.static)
	m.HandleFunc("/", func(w http.ResponseWriter, r *http.Request) {
		s.fail(w, r, http.StatusNotFound, "no such page on this site")
	})
}

// withQuery is path with the query q, encoded.
func withQuery(path string, q url.Values) string {
	if len(q) == 0 {
		return path
	}
	return path + "?" + q.Encode()
}

// selfAndAlternate are the links to a resource in both encodings
// (/req/core/root-success, /req/core/fc-links and the like: self and
// alternate).
func selfAndAlternate(path string, q url.Values, f format, jsonType, title string) []link {
	j, h := url.Values{}, url.Values{}
	for k, v := range q {
		if k != "f" {
			j[k], h[k] = v, v
		}
	}
	j.Set("f", "json")
	h.Set("f", "html")
	lj := link{Href: withQuery(path, j), Type: jsonType, Title: title + " as JSON"}
	lh := link{Href: withQuery(path, h), Type: "text/html", Title: title + " as HTML"}
	if f == formatHTML {
		lh.Rel, lj.Rel = "self", "alternate"
		return []link{lh, lj}
	}
	lj.Rel, lh.Rel = "self", "alternate"
	return []link{lj, lh}
}

// asOfQuery is the as_of of a request, for links that keep it.
func asOfQuery(r *http.Request) url.Values {
	q := url.Values{}
	if a := r.URL.Query().Get("as_of"); a != "" {
		q.Set("as_of", a)
	}
	return q
}

// begin checks a request's parameters and format, and says which
// encoding to answer in; false when it has answered (an error).
func (s *Server) begin(w http.ResponseWriter, r *http.Request, params ...string) (format, *time.Time, bool) {
	allowed := pathFormats(r.URL.Path)
	q := r.URL.Query()
	if err := checkParams(q, params...); err != nil {
		s.error(w, r, err)
		return "", nil, false
	}
	if err := checkFormat(q, allowed); err != nil {
		s.error(w, r, err)
		return "", nil, false
	}
	asOf, err := asOfParam(q)
	if err != nil {
		s.error(w, r, err)
		return "", nil, false
	}
	return negotiate(r, allowed), asOf, true
}

// landing is the landing page (/req/core/root-op, /req/core/root-success):
// in HTML the site's home, with the searches.
func (s *Server) landing(w http.ResponseWriter, r *http.Request) {
	f, asOf, ok := s.begin(w, r, "f", "as_of")
	if !ok {
		return
	}
	st, err := s.cfg.Register.State(r.Context())
	if err != nil {
		s.serverError(w, r, err)
		return
	}
	aq := asOfQuery(r)
	links := selfAndAlternate("/", aq, f, mediaJSON, "This document")
	links = append(links,
		link{Href: "/api?f=json", Rel: "service-desc", Type: mediaOpenAPI, Title: "The API definition (OpenAPI 3.0)"},
		link{Href: "/api?f=html", Rel: "service-doc", Type: "text/html", Title: "The API documentation"},
		link{Href: withQuery("/conformance", withF(aq, f)), Rel: "conformance", Type: mediaOf(f, mediaJSON), Title: "The conformance classes implemented"},
		link{Href: withQuery("/collections", withF(aq, f)), Rel: "data", Type: mediaOf(f, mediaJSON), Title: "The collections: the marks"},
	)
	if f == formatHTML {
		s.page(w, r, st, asOf, "home", "cairn · benchmark register", nil, links...)
		return
	}
	s.json(w, r, st, mediaJSON, map[string]any{
		"title":       "cairn benchmark register",
		"description": "The benchmarks of a survey office's register and their heights in force, read-only. " + cautionsLine(),
		"links":       links,
	})
}

// withF is q with f set.
func withF(q url.Values, f format) url.Values {
	out := url.Values{}
	for k, v := range q {
		out[k] = v
	}
	out.Set("f", string(f))
	return out
}

// mediaOf is the media type of encoding f: jsonType for JSON.
func mediaOf(f format, jsonType string) string {
	if f == formatHTML {
		return "text/html"
	}
	return jsonType
}

// conformance lists the conformance classes (/req/core/conformance-op,
// /req/core/conformance-success).
func (s *Server) conformance(w http.ResponseWriter, r *http.Request) {
	f, asOf, ok := s.begin(w, r, "f", "as_of")
	if !ok {
		return
	}
	st, err := s.cfg.Register.State(r.Context())
	if err != nil {
		s.serverError(w, r, err)
		return
	}
	links := selfAndAlternate("/conformance", asOfQuery(r), f, mediaJSON, "This document")
	if f == formatHTML {
		s.page(w, r, st, asOf, "conformance", "Conformance · cairn", conformsTo, links...)
		return
	}
	s.json(w, r, st, mediaJSON, map[string]any{"conformsTo": conformsTo, "links": links})
}

// collectionJSON is the description of the one collection
// (/req/core/sfc-md-success, /req/core/fc-md-items).
func collectionJSON(q url.Values, f format) map[string]any {
	items := url.Values{}
	for k, v := range q {
		if k != "f" {
			items[k] = v
		}
	}
	links := selfAndAlternate("/collections/"+collectionID, q, f, mediaJSON, "This collection")
	ij, ih := url.Values{}, url.Values{}
	for k, v := range items {
		ij[k], ih[k] = v, v
	}
	ij.Set("f", "json")
	ih.Set("f", "html")
	links = append(links,
		link{Href: withQuery("/collections/"+collectionID+"/items", ij), Rel: "items", Type: mediaGeoJSON, Title: "The marks as GeoJSON"},
		link{Href: withQuery("/collections/"+collectionID+"/items", ih), Rel: "items", Type: "text/html", Title: "The marks as HTML"})
	return map[string]any{
		"id":          collectionID,
		"title":       "Benchmarks",
		"description": "Every mark of the register with its approximate position (WGS 84), its latest condition, its heights in force and every doubt about them. " + cautionsLine(),
		"itemType":    "feature",
		"crs":         []string{"http://www.opengis.net/def/crs/OGC/1.3/CRS84"},
		"extent": map[string]any{
			"spatial": map[string]any{"bbox": [][4]float64{{-180, -90, 180, 90}}, "crs": "http://www.opengis.net/def/crs/OGC/1.3/CRS84"},
		},
		"links": links,
	}
}

// collections lists the collections (/req/core/fc-md-op,
// /req/core/fc-md-success, /req/core/fc-md-links, /req/core/fc-md-items).
func (s *Server) collections(w http.ResponseWriter, r *http.Request) {
	f, asOf, ok := s.begin(w, r, "f", "as_of")
	if !ok {
		return
	}
	st, err := s.cfg.Register.State(r.Context())
	if err != nil {
		s.serverError(w, r, err)
		return
	}
	aq := asOfQuery(r)
	links := selfAndAlternate("/collections", aq, f, mediaJSON, "This document")
	c := collectionJSON(aq, formatJSON)
	if f == formatHTML {
		s.page(w, r, st, asOf, "collections", "Collections · cairn", c, links...)
		return
	}
	s.json(w, r, st, mediaJSON, map[string]any{"links": links, "collections": []any{c}})
}

// collection describes the one collection (/req/core/sfc-md-op,
// /req/core/sfc-md-success); another id is 404.
func (s *Server) collection(w http.ResponseWriter, r *http.Request) {
	if r.PathValue("id") != collectionID {
		s.fail(w, r, http.StatusNotFound, "no collection "+strconv.Quote(r.PathValue("id"))+": the one collection is marks")
		return
	}
	f, asOf, ok := s.begin(w, r, "f", "as_of")
	if !ok {
		return
	}
	st, err := s.cfg.Register.State(r.Context())
	if err != nil {
		s.serverError(w, r, err)
		return
	}
	c := collectionJSON(asOfQuery(r), f)
	if f == formatHTML {
		s.page(w, r, st, asOf, "collection", "Benchmarks · cairn", c, c["links"].([]link)...)
		return
	}
	s.json(w, r, st, mediaJSON, c)
}

// items is one page of marks (/req/core/fc-op, /req/core/fc-response,
// /req/core/fc-limit-*, /req/core/fc-bbox-*, /req/core/fc-time-*,
// /req/core/fc-links, /req/core/fc-numberReturned), paged by a next link
// (/req/core/fc-next-*) whose "after" is the last designation given.
func (s *Server) items(w http.ResponseWriter, r *http.Request) {
	if r.PathValue("id") != collectionID {
		s.fail(w, r, http.StatusNotFound, "no collection "+strconv.Quote(r.PathValue("id"))+": the one collection is marks")
		return
	}
	f, asOf, ok := s.begin(w, r, "f", "as_of", "datetime", "bbox", "limit", "after")
	if !ok {
		return
	}
	q := r.URL.Query()
	bbox, err := parseBBox(q.Get("bbox"))
	if err != nil {
		s.error(w, r, err)
		return
	}
	limit, err := parseLimit(q.Get("limit"))
	if err != nil {
		s.error(w, r, err)
		return
	}
	pg, err := s.cfg.Register.Features(r.Context(), register.FeaturesParams{BBox: bbox, After: q.Get("after"), Limit: limit, AsOf: asOf})
	if err != nil {
		s.error(w, r, err)
		return
	}
	path := "/collections/" + collectionID + "/items"
	links := selfAndAlternate(path, q, f, mediaGeoJSON, "This page")
	if pg.More {
		next := url.Values{}
		for k, v := range q {
			next[k] = v
		}
		next.Set("after", pg.Features[len(pg.Features)-1].Designation)
		next.Set("f", string(f))
		typ := mediaGeoJSON
		if f == formatHTML {
			typ = "text/html"
		}
		links = append(links, link{Href: withQuery(path, next), Rel: "next", Type: typ, Title: "The next page"})
	}
	links = append(links, link{Href: "/collections/" + collectionID + "?f=json", Rel: "collection", Type: mediaJSON, Title: "The collection"})
	if f == formatHTML {
		s.page(w, r, pg.State, asOf, "items", "Marks · cairn", itemsView{Features: pg.Features, Links: links, Limit: limit, BBox: q.Get("bbox")}, links...)
		return
	}
	cautions := sheetdata.CautionSentences()
	fc := featureCollectionJSON{Type: "FeatureCollection", Features: []featureJSON{}, Links: links, NumberReturned: len(pg.Features)}
	for _, ft := range pg.Features {
		fc.Features = append(fc.Features, encodeFeature(ft, asOf, cautions))
	}
	s.json(w, r, pg.State, mediaGeoJSON, fc)
}

// itemsView is a page of marks in HTML.
type itemsView struct {
	Features []register.Feature
	Links    []link
	Limit    int
	BBox     string
}

// item is one mark (/req/core/f-op, /req/core/f-success, /req/core/f-links);
// an unknown designation is 404. A mark asked for by an alias is
// redirected to its designation's URL, the stable one.
func (s *Server) item(w http.ResponseWriter, r *http.Request) {
	if r.PathValue("id") != collectionID {
		s.fail(w, r, http.StatusNotFound, "no collection "+strconv.Quote(r.PathValue("id"))+": the one collection is marks")
		return
	}
	f, asOf, ok := s.begin(w, r, "f", "as_of", "datetime")
	if !ok {
		return
	}
	name := r.PathValue("designation")
	st, ft, err := s.cfg.Register.FeatureOne(r.Context(), name, asOf)
	if err != nil {
		s.error(w, r, err)
		return
	}
	path := "/collections/" + collectionID + "/items/" + url.PathEscape(ft.Designation)
	if ft.Designation != name {
		http.Redirect(w, r, withQuery(path, r.URL.Query()), http.StatusFound)
		return
	}
	if f == formatHTML {
		// The mark's page is its HTML.
		http.Redirect(w, r, withQuery("/marks/"+url.PathEscape(ft.Designation), asOfQuery(r)), http.StatusSeeOther)
		return
	}
	fj := encodeFeature(ft, asOf, sheetdata.CautionSentences())
	fj.Links = append(selfAndAlternate(path, r.URL.Query(), f, mediaGeoJSON, "This mark"),
		link{Href: "/collections/" + collectionID + "?f=json", Rel: "collection", Type: mediaJSON, Title: "The collection"},
		link{Href: withQuery("/marks/"+url.PathEscape(ft.Designation), asOfQuery(r)), Rel: "describedby", Type: "text/html", Title: "The mark's datasheet"})
	s.json(w, r, st, mediaGeoJSON, fj)
}

// json writes v as the response, with the ETag of state st.
func (s *Server) json(w http.ResponseWriter, r *http.Request, st register.RegisterState, mediaType string, v any) {
	b, err := marshal(v)
	if err != nil {
		s.serverError(w, r, err)
		return
	}
	w.Header().Set("Content-Type", mediaType)
	w.Header().Set("ETag", s.etag(st, r))
	w.Header().Set("Content-Length", strconv.Itoa(len(b)))
	w.WriteHeader(http.StatusOK)
	if r.Method != http.MethodHead {
		_, _ = w.Write(b)
	}
}

// error answers a failed request: 400 for a parameter or input at fault,
// 404 for an unknown mark, 500 (logged, not shown) for the rest.
func (s *Server) error(w http.ResponseWriter, r *http.Request, err error) {
	var pe *paramError
	var ie *register.InputError
	var nf *register.MarkNotFoundError
	switch {
	case errors.As(err, &pe):
		s.fail(w, r, http.StatusBadRequest, pe.Error())
	case errors.As(err, &nf):
		s.fail(w, r, http.StatusNotFound, nf.Error())
	case errors.As(err, &ie):
		s.fail(w, r, http.StatusBadRequest, "parameter "+ie.Field+": "+ie.Msg)
	default:
		s.serverError(w, r, err)
	}
}

// serverError logs err and answers 500 without its text.
func (s *Server) serverError(w http.ResponseWriter, r *http.Request, err error) {
	s.log.Error("request failed", "path", r.URL.Path, "err", err.Error())
	s.fail(w, r, http.StatusInternalServerError, "the register could not be read; try again later")
}

// fail answers status with a message: an OGC exception (code,
// description) in JSON, or a page in HTML.
func (s *Server) fail(w http.ResponseWriter, r *http.Request, status int, msg string) {
	h := w.Header()
	h.Del("ETag")
	h.Set("Cache-Control", "no-store")
	if negotiate(r, pathFormats(r.URL.Path)) == formatHTML {
		s.errorPage(w, r, status, msg)
		return
	}
	b, _ := marshal(map[string]any{"code": http.StatusText(status), "description": msg})
	h.Set("Content-Type", mediaJSON)
	w.WriteHeader(status)
	if r.Method != http.MethodHead {
		_, _ = w.Write(b)
	}
}

// cautionsLine is the cautions in one line, for a description.
func cautionsLine() string { return strings.Join(sheetdata.CautionSentences(), " ") }
