package web_test

import (
	"net/http"
	"net/url"
	"strings"
	"testing"

	"golang.org/x/net/html"

	"cairn/internal/registertest"
	"cairn/internal/web"
)

// scripts are the page's script elements' src, failing on an inline one
// (a script element with text) or an event handler attribute.
func scripts(t *testing.T, path string, doc *html.Node) []string {
	t.Helper()
	var srcs []string
	for _, s := range elements(doc, "script") {
		if s.FirstChild != nil || attr(s, "src") == "" {
			t.Errorf("%s: an inline script element", path)
		}
		srcs = append(srcs, attr(s, "src"))
	}
	var walk func(*html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode {
			for _, a := range n.Attr {
				if strings.HasPrefix(strings.ToLower(a.Key), "on") || strings.Contains(strings.ToLower(a.Val), "javascript:") {
					t.Errorf("%s: <%s %s=%q>", path, n.Data, a.Key, a.Val)
				}
			}
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(doc)
	return srcs
}

// byID is the element of doc with the id.
func byID(doc *html.Node, id string) *html.Node {
	var found *html.Node
	var walk func(*html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode && attr(n, "id") == id {
			found = n
		}
		for c := n.FirstChild; c != nil && found == nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(doc)
	return found
}

// The map page runs the site's own script files only: its
// Content-Security-Policy allows script-src 'self' and nothing inline
// (CSP Level 3, W3C 2023, §2.3.1 and §6.1.1: an inline script needs
// 'unsafe-inline', a hash or a nonce, none of which it has), fetches to
// the site only (connect-src), images from the site only when no tile
// layer is given; every other page keeps script-src 'none'. Without
// JavaScript the page still has its form and a link to the list.
func TestMapPage(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	p := "/map?lat=41.635&lon=-97.95&radius_m=1200&as_of=2019-06-01"
	resp, b := s.get(t, p, "text/html")
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("%s: %s: %s", p, resp.Status, b)
	}
	csp := resp.Header.Get("Content-Security-Policy")
	for _, want := range []string{"default-src 'none'", "script-src 'self';", "connect-src 'self';", "img-src 'self' data:;", "frame-ancestors 'none'", "base-uri 'none'"} {
		if !strings.Contains(csp, want) {
			t.Errorf("map CSP %q lacks %q", csp, want)
		}
	}
	if strings.Contains(csp, "unsafe") || strings.Contains(csp, "http") {
		t.Errorf("map CSP %q allows more than the site", csp)
	}
	doc, err := html.Parse(strings.NewReader(string(b)))
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(scripts(t, p, doc), " "); got != "/static/leaflet/leaflet.js /static/map.js" {
		t.Errorf("scripts %q", got)
	}
	m := byID(doc, "map")
	if m == nil {
		t.Fatal("no #map")
	}
	if attr(m, "data-lat") != "41.635" || attr(m, "data-lon") != "-97.95" || attr(m, "data-radius") != "1200" ||
		attr(m, "data-as-of") != "2019-06-01" || attr(m, "data-tiles") != "" {
		t.Errorf("#map %v", m.Attr)
	}
	for _, w := range cautionWords {
		if !strings.Contains(text(doc), w) {
			t.Errorf("no caution %q", w)
		}
	}
	// The items the map loads: the box around the circle, as GeoJSON, in
	// force at the as-of date.
	items := attr(m, "data-items")
	u, err := url.Parse(items)
	if err != nil || u.Path != "/collections/marks/items" || u.Query().Get("bbox") == "" || u.Query().Get("as_of") != "2019-06-01" {
		t.Fatalf("data-items %q", items)
	}
	var fc collectionItems
	s.getJSON(t, items, "application/geo+json", &fc)
	var got []string
	for _, f := range fc.Features {
		got = append(got, f.ID)
	}
	if strings.Join(got, " ") != "TC-0413 TC-0414" {
		t.Errorf("the map's items %v, want TC-0413 TC-0414 (41.63 and 41.64, 556 m from 41.635)", got)
	}
	// A revalidation's 304 carries the map's policy too (a browser takes
	// a 304's headers into the page it keeps, RFC 9111 §4.3.4).
	if resp, _ := s.get(t, p, "text/html", "If-None-Match", resp.Header.Get("ETag")); resp.StatusCode != http.StatusNotModified ||
		resp.Header.Get("Content-Security-Policy") != csp {
		t.Errorf("%s revalidated: %s, CSP %q", p, resp.Status, resp.Header.Get("Content-Security-Policy"))
	}
	// Without JavaScript: the form and the list of the same search.
	if byID(doc, "point") == nil || attr(byID(doc, "list"), "href") != "/search?as_of=2019-06-01&lat=41.635&lon=-97.95&radius_m=1200" {
		t.Errorf("no form or list link: %s", b)
	}
	// The other pages run no script.
	for _, q := range []string{"/", "/search?lat=41.635&lon=-97.95&radius_m=1200", "/marks/TC-0412"} {
		resp, _, _ := s.getHTML(t, q)
		if c := resp.Header.Get("Content-Security-Policy"); !strings.Contains(c, "script-src 'none'") {
			t.Errorf("%s: CSP %q", q, c)
		}
	}
	// A point out of range is 400, naming the parameter.
	for q, param := range map[string]string{"lat=91&lon=0&radius_m=10": "lat", "lat=0&lon=0&radius_m=200000": "radius_m", "lat=0&lon=x&radius_m=10": "lon", "lat=0&lon=0&radius_m=1&zoom=3": "zoom"} {
		resp, b := s.get(t, "/map?"+q, "text/html")
		if resp.StatusCode != http.StatusBadRequest || !strings.Contains(string(b), param) {
			t.Errorf("/map?%s: %s %s", q, resp.Status, b)
		}
	}
}

// With --tiles the map page allows images from the tile host only, the
// {s} label as a wildcard host (CSP Level 3 §2.3.1 host-source: "*."
// and a host), and gives the template to the script.
func TestMapTiles(t *testing.T) {
	t.Parallel()
	s := newSite(t, web.Config{Tiles: "https://{s}.tiles.orrin-bay.example/{z}/{x}/{y}.png"})
	resp, b := s.get(t, "/map", "text/html")
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("%s %s", resp.Status, b)
	}
	if csp := resp.Header.Get("Content-Security-Policy"); !strings.Contains(csp, "img-src 'self' data: https://*.tiles.orrin-bay.example;") || !strings.Contains(csp, "script-src 'self';") {
		t.Errorf("CSP %q", csp)
	}
	if !strings.Contains(string(b), `data-tiles="https://{s}.tiles.orrin-bay.example/{z}/{x}/{y}.png"`) {
		t.Errorf("no data-tiles: %s", b)
	}
	if resp, _ := s.get(t, "/", "text/html"); strings.Contains(resp.Header.Get("Content-Security-Policy"), "orrin-bay") {
		t.Errorf("the tile host is allowed beyond the map")
	}
	for _, bad := range []string{"https://tiles.example/{z}/{x}.png", "ftp://tiles.example/{z}/{x}/{y}.png", "https://a{s}b.example/{z}/{x}/{y}.png",
		"https://tiles.example/{z}/{x}/{y}.png; script-src *", "https://user@tiles.example/{z}/{x}/{y}.png", "tiles.example/{z}/{x}/{y}.png"} {
		if _, err := web.ParseTiles(bad); err == nil {
			t.Errorf("ParseTiles(%q) took it", bad)
		}
	}
	if ts, err := web.ParseTiles("http://127.0.0.1:8081/{z}/{x}/{y}.png"); err != nil || ts.ImgSrc != "http://127.0.0.1:8081" {
		t.Errorf("ParseTiles: %v %v", ts, err)
	}
}

// Leaflet's files (leaflet 1.9.4 from the npm registry) and the map's
// script are served with their types and a tag of their bytes, which a
// commit to the register does not change (RFC 9110 §8.8.3: the tag names
// the representation; §13.1.2 If-None-Match answers 304).
func TestStaticFiles(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	types := map[string]string{"/static/leaflet/leaflet.js": "text/javascript; charset=utf-8", "/static/map.js": "text/javascript; charset=utf-8",
		"/static/leaflet/leaflet.css": "text/css; charset=utf-8", "/static/leaflet/images/marker-icon.png": "image/png",
		"/static/leaflet/LICENSE": "text/plain; charset=utf-8", "/static/site.css": "text/css; charset=utf-8"}
	tags := map[string]string{}
	for p, typ := range types {
		resp, b := s.get(t, p, "")
		if resp.StatusCode != http.StatusOK || resp.Header.Get("Content-Type") != typ || len(b) == 0 || !strings.HasPrefix(resp.Header.Get("ETag"), `"static-`) {
			t.Errorf("%s: %s %q %q", p, resp.Status, resp.Header.Get("Content-Type"), resp.Header.Get("ETag"))
		}
		tags[p] = resp.Header.Get("ETag")
	}
	if _, b := s.get(t, "/static/leaflet/leaflet.js", ""); !strings.Contains(string(b), `version="1.9.4"`) {
		t.Errorf("leaflet.js is not Leaflet 1.9.4")
	}
	if _, b := s.get(t, "/static/leaflet/LICENSE", ""); !strings.Contains(string(b), "BSD 2-Clause") {
		t.Errorf("Leaflet's LICENSE is not served")
	}
	s.b.Mark(t, registertest.MarkOpts{Designation: "TC-0500"})
	for p, tag := range tags {
		resp, _ := s.get(t, p, "", "If-None-Match", tag)
		if resp.StatusCode != http.StatusNotModified {
			t.Errorf("%s after a commit: %s, want 304", p, resp.Status)
		}
	}
	for _, p := range []string{"/static/leaflet/leaflet.js.map", "/static/leaflet/", "/static/templates/map.html", "/static/leaflet/../../pages.go"} {
		if resp, _ := s.get(t, p, ""); resp.StatusCode != http.StatusNotFound && resp.StatusCode != http.StatusTemporaryRedirect {
			t.Errorf("%s: %s, want 404 (or a redirect to the cleaned path)", p, resp.Status)
		}
	}
}
