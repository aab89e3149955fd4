package web_test

import (
	"encoding/json"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// The tests of this file follow the abstract test suite of OGC API –
// Features – Part 1: Core (OGC 17-069r4, 2022, Annex A), requirement by
// requirement; each names the requirement it checks (the identifiers of
// the standard, opengeospatial/ogcapi-features,
// core/standard/requirements).

type landingJSON struct {
	Title string
	Links []linkJSON
}

// /req/core/root-op, /req/core/root-success: the landing page answers
// GET / with 200 and links to the API definition (service-desc or
// service-doc), the conformance declaration (conformance) and the
// collections (data).
func TestLandingPage(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	var l landingJSON
	s.getJSON(t, "/", "application/json", &l)
	for _, rel := range []string{"self", "alternate", "service-desc", "service-doc", "conformance", "data"} {
		if _, ok := hasLink(l.Links, rel, ""); !ok {
			t.Errorf("/req/core/root-success: no link rel %q in %+v", rel, l.Links)
		}
	}
	if d, _ := hasLink(l.Links, "service-desc", ""); d.Type != "application/vnd.oai.openapi+json;version=3.0" {
		t.Errorf("/req/oas30/oas-definition-2: service-desc type %q", d.Type)
	}
	// Each link leads somewhere that answers 200.
	for _, lk := range l.Links {
		if resp, b := s.get(t, lk.Href, ""); resp.StatusCode != http.StatusOK {
			t.Errorf("link %s (%s): %s %s", lk.Href, lk.Rel, resp.Status, b)
		}
	}
	// /req/html/definition: the same resource in HTML when a browser asks.
	_, doc, _ := s.getHTML(t, "/")
	if len(elements(doc, "form")) < 2 {
		t.Errorf("the home page has no search forms")
	}
}

// /req/core/conformance-op, /req/core/conformance-success: GET
// /conformance lists the conformance classes: Core, GeoJSON, HTML and
// OpenAPI 3.0 (/conf/core, /conf/geojson, /conf/html, /conf/oas30).
func TestConformance(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	var c struct{ ConformsTo []string }
	s.getJSON(t, "/conformance", "application/json", &c)
	for _, cls := range []string{"core", "geojson", "html", "oas30"} {
		if !slices.Contains(c.ConformsTo, "http://www.opengis.net/spec/ogcapi-features-1/1.0/conf/"+cls) {
			t.Errorf("/req/core/conformance-success: %s not in %v", cls, c.ConformsTo)
		}
	}
}

// /req/core/api-definition-op, /req/core/api-definition-success,
// /req/oas30/oas-definition-1 (an OpenAPI 3.0 document, media type
// application/vnd.oai.openapi+json;version=3.0), /req/oas30/completeness
// (every resource and parameter the server has is in it).
func TestAPIDefinition(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	var doc struct {
		OpenAPI    string
		Paths      map[string]map[string]json.RawMessage
		Components struct {
			Parameters map[string]struct{ Name, In string }
		}
	}
	s.getJSON(t, "/api", "application/vnd.oai.openapi+json;version=3.0", &doc)
	if !strings.HasPrefix(doc.OpenAPI, "3.0.") {
		t.Errorf("/req/oas30/oas-definition-1: openapi %q", doc.OpenAPI)
	}
	for _, p := range []string{"/", "/conformance", "/api", "/collections", "/collections/{collectionId}",
		"/collections/{collectionId}/items", "/collections/{collectionId}/items/{featureId}", "/search", "/map", "/marks/{designation}", "/trace/{designation}"} {
		if _, ok := doc.Paths[p]["get"]; !ok {
			t.Errorf("/req/oas30/completeness: no GET %s", p)
		}
	}
	for _, p := range []string{"f", "bbox", "limit", "datetime", "as_of", "after"} {
		if doc.Components.Parameters[p].Name != p {
			t.Errorf("/req/oas30/completeness: parameter %s missing", p)
		}
	}
	// The items' parameters, as each resource checks them, are the
	// document's (/req/core/query-param-unknown refuses the others).
	var items struct {
		Get struct {
			Parameters []struct {
				Ref string `json:"$ref"`
			}
		}
	}
	raw, _ := json.Marshal(doc.Paths["/collections/{collectionId}/items"])
	if err := json.Unmarshal(raw, &items); err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, p := range items.Get.Parameters {
		names = append(names, strings.TrimPrefix(p.Ref, "#/components/parameters/"))
	}
	slices.Sort(names)
	if want := []string{"after", "as_of", "bbox", "collectionId", "datetime", "f", "limit"}; !slices.Equal(names, want) {
		t.Errorf("items parameters %v, want %v", names, want)
	}
}

// /req/core/http: HTTP 1.1 methods: GET and HEAD are answered; the site
// writes nothing, so any other method is 405 with Allow.
func TestHTTPMethods(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	resp, err := http.Head(s.srv.URL + "/collections/marks/items")
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK || resp.Header.Get("Content-Type") != "application/geo+json" {
		t.Errorf("HEAD items: %s %s", resp.Status, resp.Header.Get("Content-Type"))
	}
	for _, m := range []string{http.MethodPost, http.MethodPut, http.MethodDelete, http.MethodPatch} {
		req, _ := http.NewRequest(m, s.srv.URL+"/collections/marks/items", strings.NewReader(`{"type":"Feature"}`))
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != http.StatusMethodNotAllowed || resp.Header.Get("Allow") != "GET, HEAD" {
			t.Errorf("%s: %s, Allow %q", m, resp.Status, resp.Header.Get("Allow"))
		}
	}
}

// /req/core/query-param-unknown (400 for a parameter the API definition
// does not have), /req/core/query-param-invalid (400 for a value out of
// its range), and the limits of a request: 414 for a query past 2,048
// bytes.
func TestQueryParameters(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	for _, c := range []struct {
		path, want string
		status     int
	}{
		{"/collections/marks/items?colour=red", "colour", 400},
		{"/collections?bbox=1,2,3,4", "bbox", 400},
		{"/conformance?limit=5", "limit", 400},
		{"/collections/marks/items?limit=0", "limit", 400},
		{"/collections/marks/items?limit=10001", "1 to 10000", 400},
		{"/collections/marks/items?limit=ten", "limit", 400},
		{"/collections/marks/items?limit=5&limit=6", "once", 400},
		{"/collections/marks/items?bbox=1,2,3", "four", 400},
		{"/collections/marks/items?bbox=-98,41,-97,42,0,10", "six", 400},
		{"/collections/marks/items?bbox=-98,42,-97,41", "south", 400},
		{"/collections/marks/items?bbox=-98,41,-97,NaN", "bbox", 400},
		{"/collections/marks/items?bbox=-198,41,-97,42", "longitudes", 400},
		{"/collections/marks/items?datetime=yesterday", "datetime", 400},
		{"/collections/marks/items?datetime=2019-01-01T00:00:00Z/..", "interval", 400},
		{"/collections/marks/items?as_of=2019-06-01&datetime=2020-01-01", "different", 400},
		{"/collections/marks/items?f=xml", "json or html", 400},
		{"/marks/TC-0412?as_of=13/2019", "as_of", 400},
		{"/search?lat=91&lon=0&radius_m=10", "lat", 400},
		{"/search?lat=41&lon=-97&radius_m=1000000", "radius", 400},
		{"/search", "designation", 400},
		{"/collections/marks/items?after=" + strings.Repeat("x", 2100), "2048", 414},
	} {
		resp, b := s.get(t, c.path, "application/json")
		if resp.StatusCode != c.status || !strings.Contains(string(b), c.want) {
			t.Errorf("GET %.80s: %s %s, want %d naming %q", c.path, resp.Status, b, c.status, c.want)
		}
		// The site's own pages are HTML only, their errors too.
		if page := strings.HasPrefix(c.path, "/search") || strings.HasPrefix(c.path, "/marks/"); page != strings.HasPrefix(string(b), "<!DOCTYPE html>") || !page && !json.Valid(b) {
			t.Errorf("GET %.80s: the error is not in the resource's encoding: %.100s", c.path, b)
		}
	}
}

type collectionJSON struct {
	ID, Title, ItemType string
	Extent              struct{ Spatial struct{ BBox [][]float64 } }
	Links               []linkJSON
}

// /req/core/fc-md-op, /req/core/fc-md-success, /req/core/fc-md-links
// (self, alternate), /req/core/fc-md-items (each collection with its id
// and an items link), /req/core/fc-md-extent; /req/core/sfc-md-op and
// /req/core/sfc-md-success (the collection alone, the same as in the
// list); a collection that is not there is 404.
func TestCollections(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	var cs struct {
		Links       []linkJSON
		Collections []collectionJSON
	}
	s.getJSON(t, "/collections", "application/json", &cs)
	for _, rel := range []string{"self", "alternate"} {
		if _, ok := hasLink(cs.Links, rel, ""); !ok {
			t.Errorf("/req/core/fc-md-links: no %s link", rel)
		}
	}
	if len(cs.Collections) != 1 || cs.Collections[0].ID != "marks" {
		t.Fatalf("/req/core/fc-md-items: collections %+v", cs.Collections)
	}
	c := cs.Collections[0]
	if _, ok := hasLink(c.Links, "items", "application/geo+json"); !ok {
		t.Errorf("/req/core/fc-md-items-links: no items link in GeoJSON: %+v", c.Links)
	}
	if len(c.Extent.Spatial.BBox) != 1 || len(c.Extent.Spatial.BBox[0]) != 4 {
		t.Errorf("/req/core/fc-md-extent: %+v", c.Extent)
	}
	var one collectionJSON
	s.getJSON(t, "/collections/marks", "application/json", &one)
	if one.ID != c.ID || one.Title != c.Title || one.ItemType != "feature" {
		t.Errorf("/req/core/sfc-md-success: %+v differs from %+v", one, c)
	}
	if resp, _ := s.get(t, "/collections/heights", ""); resp.StatusCode != http.StatusNotFound {
		t.Errorf("an unknown collection: %s", resp.Status)
	}
}

type featureJSON struct {
	Type     string
	ID       string
	Geometry *struct {
		Type        string
		Coordinates []float64
	}
	Properties struct {
		Mark        string
		Description string
		Directions  string
		Condition   string
		Heights     []struct {
			Datum        string
			HeightInUnit *string `json:"height_in_unit"`
			Unit         *string
			Version      int
		}
		Doubts []struct {
			Kind, Word, Warning string
		}
		Cautions []string
	}
	Links []linkJSON
}

type collectionItems struct {
	Type           string
	Features       []featureJSON
	Links          []linkJSON
	NumberReturned *int
}

// members are the top-level names of a JSON object.
func members(t *testing.T, b []byte) []string {
	t.Helper()
	var m map[string]json.RawMessage
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	var out []string
	for k := range m {
		out = append(out, k)
	}
	slices.Sort(out)
	return out
}

// /req/core/fc-op, /req/core/fc-response, /req/core/fc-links,
// /req/core/fc-numberReturned, /req/core/fc-limit-definition (default 10,
// at most 10,000), /req/core/fc-limit-response-1 (no more features than
// the limit), /rec/core/fc-next-1 (a next link while there are more),
// and /req/geojson/definition and /req/geojson/content: a FeatureCollection
// of RFC 7946 (IETF, 2016) Features, application/geo+json, positions
// longitude first (§3.1.1), no "crs" member (§4), a null geometry for a
// mark with no position (§3.2).
func TestItemsAndPaging(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	var fc collectionItems
	s.getJSON(t, "/collections/marks/items", "application/geo+json", &fc)
	if fc.Type != "FeatureCollection" || len(fc.Features) != 10 || fc.NumberReturned == nil || *fc.NumberReturned != 10 {
		t.Fatalf("/req/core/fc-limit-definition: default page of %d features (numberReturned %v), want 10", len(fc.Features), fc.NumberReturned)
	}
	for _, rel := range []string{"self", "alternate", "next"} {
		if _, ok := hasLink(fc.Links, rel, ""); !ok {
			t.Errorf("/req/core/fc-links: no %s link", rel)
		}
	}
	// Paging by the next links visits every mark once, in order.
	var seen []string
	path := "/collections/marks/items?limit=4"
	for pages := 0; path != ""; pages++ {
		if pages > 10 {
			t.Fatal("the next links do not end")
		}
		var p collectionItems
		_, body := s.get(t, path, "")
		if err := json.Unmarshal(body, &p); err != nil {
			t.Fatal(err)
		}
		if len(p.Features) > 4 {
			t.Errorf("/req/core/fc-limit-response-1: %d features for limit 4", len(p.Features))
		}
		if m := members(t, body); slices.Contains(m, "crs") {
			t.Errorf("RFC 7946 §4: a crs member")
		}
		for _, f := range p.Features {
			seen = append(seen, f.ID)
			if f.Type != "Feature" || f.Properties.Mark != f.ID {
				t.Errorf("/req/geojson/content: feature %+v", f)
			}
		}
		path = ""
		if n, ok := hasLink(p.Links, "next", "application/geo+json"); ok {
			path = n.Href
		}
	}
	want := []string{"TC-0412", "TC-0413", "TC-0414", "TC-0415"}
	for i := 416; i <= 427; i++ {
		want = append(want, "TC-0"+strconv.Itoa(i))
	}
	if !slices.Equal(seen, want) {
		t.Errorf("paging gave %v, want %v", seen, want)
	}
	// RFC 7946 §3.1.1: longitude, latitude.
	var one featureJSON
	s.getJSON(t, "/collections/marks/items/TC-0412", "application/geo+json", &one)
	if one.Geometry == nil || one.Geometry.Type != "Point" || len(one.Geometry.Coordinates) != 2 ||
		one.Geometry.Coordinates[0] != -97.95 || one.Geometry.Coordinates[1] != 41.62 {
		t.Errorf("RFC 7946 §3.1.1: TC-0412's geometry %+v, want [-97.95, 41.62]", one.Geometry)
	}
	var none featureJSON
	_, b := s.get(t, "/collections/marks/items/TC-0415", "")
	if err := json.Unmarshal(b, &none); err != nil || none.Geometry != nil || !strings.Contains(string(b), `"geometry":null`) {
		t.Errorf("RFC 7946 §3.2: a mark with no position: %s", b)
	}
	// The maximum is served.
	var all collectionItems
	s.getJSON(t, "/collections/marks/items?limit=10000", "application/geo+json", &all)
	if len(all.Features) != 16 {
		t.Errorf("limit 10000: %d features, want all 16", len(all.Features))
	}
	if _, ok := hasLink(all.Links, "next", ""); ok {
		t.Errorf("a next link on the last page")
	}
}

// /req/core/fc-bbox-definition, /req/core/fc-bbox-response: only the
// marks whose position is in the box, given west,south,east,north in
// CRS84; a mark with no position is in no box.
func TestItemsBBox(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	var fc collectionItems
	// 41.625 to 41.645 holds TC-0413 (41.63) and TC-0414 (41.64).
	s.getJSON(t, "/collections/marks/items?bbox=-98.0,41.625,-97.9,41.645&limit=100", "application/geo+json", &fc)
	var got []string
	for _, f := range fc.Features {
		got = append(got, f.ID)
	}
	if !slices.Equal(got, []string{"TC-0413", "TC-0414"}) {
		t.Errorf("/req/core/fc-bbox-response: %v, want TC-0413 and TC-0414", got)
	}
	// A box across the antimeridian (west > east) that does not reach
	// Tallis County holds none of its marks.
	s.getJSON(t, "/collections/marks/items?bbox=170,40,-170,43", "application/geo+json", &fc)
	if len(fc.Features) != 0 {
		t.Errorf("a box over the antimeridian: %d features", len(fc.Features))
	}
	// The next link keeps the box.
	s.getJSON(t, "/collections/marks/items?bbox=-98.0,41.6,-97.9,41.8&limit=3", "application/geo+json", &fc)
	n, ok := hasLink(fc.Links, "next", "")
	if !ok || !strings.Contains(n.Href, "bbox=") {
		t.Errorf("/req/core/fc-links: next %+v keeps no bbox", n)
	}
}

// /req/core/fc-time-definition, /req/core/fc-time-response: datetime is
// the instant asked about; every mark matches (a mark has no temporal
// geometry, C of the requirement) and its heights are those in force
// then (cairn's as-of look-up).
func TestItemsDatetime(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	height := func(path string) string {
		var f featureJSON
		s.getJSON(t, path, "application/geo+json", &f)
		if len(f.Properties.Heights) != 1 || f.Properties.Heights[0].HeightInUnit == nil {
			t.Fatalf("GET %s: heights %+v", path, f.Properties.Heights)
		}
		return *f.Properties.Heights[0].HeightInUnit
	}
	for path, want := range map[string]string{
		"/collections/marks/items/TC-0412":                               "101.240",
		"/collections/marks/items/TC-0412?datetime=2019-06-01T12:00:00Z": "101.234",
		"/collections/marks/items/TC-0412?datetime=2019-06-01":           "101.234",
		"/collections/marks/items/TC-0412?as_of=2021-01-01":              "101.240",
	} {
		if got := height(path); got != want {
			t.Errorf("GET %s: height %s, want %s", path, got, want)
		}
	}
	// Before any version was in force: no height, but the mark is there.
	var fc collectionItems
	s.getJSON(t, "/collections/marks/items?datetime=2010-01-01&limit=100", "application/geo+json", &fc)
	if len(fc.Features) != 16 {
		t.Errorf("/req/core/fc-time-response C: %d features in 2010, want all 16", len(fc.Features))
	}
	for _, f := range fc.Features {
		if len(f.Properties.Heights) != 0 {
			t.Errorf("%s had a height in force in 2010: %+v", f.ID, f.Properties.Heights)
		}
	}
}

// /req/core/f-op, /req/core/f-success, /req/core/f-links: one mark by its
// designation, with self, alternate and collection links; an unknown one
// is 404; an alias redirects to the designation's URL.
func TestFeature(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	var f featureJSON
	s.getJSON(t, "/collections/marks/items/TC-0413", "application/geo+json", &f)
	if f.ID != "TC-0413" {
		t.Errorf("id %q", f.ID)
	}
	for _, rel := range []string{"self", "alternate", "collection"} {
		if _, ok := hasLink(f.Links, rel, ""); !ok {
			t.Errorf("/req/core/f-links: no %s link", rel)
		}
	}
	// The doubt is in the data, loud: the word and the warning.
	if len(f.Properties.Doubts) != 1 || f.Properties.Doubts[0].Word != "disturbed" || !strings.Contains(f.Properties.Doubts[0].Warning, "DISTURBED") {
		t.Errorf("TC-0413's doubts %+v", f.Properties.Doubts)
	}
	if len(f.Properties.Cautions) != 4 {
		t.Errorf("cautions %v", f.Properties.Cautions)
	}
	resp, b := s.get(t, "/collections/marks/items/TC-9999", "")
	if resp.StatusCode != http.StatusNotFound || !json.Valid(b) {
		t.Errorf("/req/core/f-op: an unknown mark: %s %s", resp.Status, b)
	}
	resp, _ = s.get(t, "/collections/marks/items/mere%20post%207", "")
	if resp.StatusCode != http.StatusFound || resp.Header.Get("Location") != "/collections/marks/items/TC-0412" {
		t.Errorf("an alias: %s to %q", resp.Status, resp.Header.Get("Location"))
	}
}

// /req/html/definition, /req/html/content: every resource in HTML for a
// browser (Accept) and for f=html, a whole HTML5 document with links;
// f=json wins over Accept.
func TestHTMLEncoding(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	for _, p := range []string{"/", "/conformance", "/api", "/collections", "/collections/marks", "/collections/marks/items"} {
		_, doc, body := s.getHTML(t, p)
		if !strings.HasPrefix(body, "<!DOCTYPE html>") || len(elements(doc, "a")) < 5 {
			t.Errorf("/req/html/content: %s is not a page with links", p)
		}
		resp, _ := s.get(t, p+"?f=html", "application/json")
		if ct := resp.Header.Get("Content-Type"); ct != "text/html; charset=utf-8" {
			t.Errorf("%s?f=html: %s", p, ct)
		}
		resp, b := s.get(t, p+"?f=json", "text/html")
		if !json.Valid(b) || strings.HasPrefix(resp.Header.Get("Content-Type"), "text/html") {
			t.Errorf("%s?f=json asked by a browser: %s", p, resp.Header.Get("Content-Type"))
		}
	}
	// /req/html/content: every link of the JSON is an a element of the
	// page, with its relation; /req/core/fc-md-links B, /req/core/f-links B,
	// /req/core/fc-md-items-links: every link has rel and type.
	for _, p := range []string{"/", "/conformance", "/collections", "/collections/marks", "/collections/marks/items?limit=2"} {
		var doc struct {
			Links       []linkJSON
			Collections []struct{ Links []linkJSON }
		}
		_, b := s.get(t, p, "application/json")
		if err := json.Unmarshal(b, &doc); err != nil {
			t.Fatal(err)
		}
		all := doc.Links
		for _, c := range doc.Collections {
			all = append(all, c.Links...)
		}
		_, page, _ := s.getHTML(t, p)
		rels := map[string]bool{}
		for _, a := range elements(page, "a") {
			rels[attr(a, "rel")] = true
		}
		for _, l := range all {
			if l.Rel == "" || l.Type == "" || l.Href == "" {
				t.Errorf("%s: link %+v lacks rel, type or href", p, l)
			}
			if !rels[l.Rel] {
				t.Errorf("/req/html/content: %s in HTML has no link rel %q", p, l.Rel)
			}
		}
	}
	// An item asked for in HTML is the mark's page.
	resp, _ := s.get(t, "/collections/marks/items/TC-0412?f=html", "")
	if resp.StatusCode != http.StatusSeeOther || resp.Header.Get("Location") != "/marks/TC-0412" {
		t.Errorf("an item in HTML: %s %q", resp.Status, resp.Header.Get("Location"))
	}
}
