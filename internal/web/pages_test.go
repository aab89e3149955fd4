package web_test

import (
	"encoding/json"
	"net/http"
	"strings"
	"testing"
	"time"

	"golang.org/x/net/html"

	"cairn/internal/registertest"
	"cairn/internal/web"
)

// allPaths are a request of every kind the site answers, and some it
// refuses.
var allPaths = []string{"/", "/?f=json", "/search?q=TC-0412", "/search?lat=41.62&lon=-97.95&radius_m=2000", "/marks/TC-0412",
	"/marks/TC-0413?as_of=2019-06-01", "/conformance", "/api", "/collections", "/collections/marks", "/collections/marks/items",
	"/collections/marks/items?f=html", "/collections/marks/items/TC-0414", "/static/site.css", "/static/sheet.css",
	"/nothing-here", "/marks/TC-9999", "/collections/marks/items?limit=0", "/trace/TC-0412", "/trace/TC-0413?as_of=2019-06-01"}

// Every response, a refusal too, carries the security headers: a
// Content-Security-Policy that runs no script at all (so no inline one)
// and allows no frame around the page (CSP Level 3, W3C 2023:
// script-src, frame-ancestors), X-Content-Type-Options: nosniff (WHATWG
// Fetch §3.5), X-Frame-Options: DENY (RFC 7034) and a Referrer-Policy
// (W3C Referrer Policy, 2017), and an ETag except refusals.
func TestSecurityHeaders(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	for _, p := range allPaths {
		resp, _ := s.get(t, p, "text/html")
		h := resp.Header
		csp := h.Get("Content-Security-Policy")
		if !strings.Contains(csp, "script-src 'none'") || !strings.Contains(csp, "frame-ancestors 'none'") ||
			strings.Contains(csp, "unsafe-inline") || strings.Contains(csp, "unsafe-eval") {
			t.Errorf("%s: Content-Security-Policy %q", p, csp)
		}
		if h.Get("X-Content-Type-Options") != "nosniff" || h.Get("X-Frame-Options") != "DENY" || h.Get("Referrer-Policy") == "" {
			t.Errorf("%s: headers %v", p, h)
		}
		if ok := resp.StatusCode < 400; ok != (h.Get("ETag") != "") {
			t.Errorf("%s: %s with ETag %q", p, resp.Status, h.Get("ETag"))
		}
	}
}

// noScript fails when a page holds a script element, an inline event
// handler or a javascript: URL: the site has no script of its own, so any
// would be the register's data leaking into markup.
func noScript(t *testing.T, path string, doc *html.Node) {
	t.Helper()
	if s := elements(doc, "script"); len(s) > 0 {
		t.Errorf("%s: %d script element(s)", path, len(s))
	}
	var walk func(*html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode {
			for _, a := range n.Attr {
				if strings.HasPrefix(strings.ToLower(a.Key), "on") || strings.Contains(strings.ToLower(a.Val), "javascript:") {
					t.Errorf("%s: <%s %s=%q>", path, n.Data, a.Key, a.Val)
				}
			}
			if n.Data == "b" {
				t.Errorf("%s: a <b> element: markup from the register", path)
			}
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(doc)
}

// Hostile text in a mark's description, directions and condition note
// (markup, quotes, control characters, right-to-left marks) is shown as
// text on every page that shows it, as written but for the characters
// that would hide or reorder it, which are made visible; it is kept
// exactly in the JSON, which stays valid, with its markup escaped
// (RFC 8259 §7; encoding/json escapes <, > and &).
func TestHostileText(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	for _, p := range []string{"/marks/TC-0414", "/search?lat=41.64&lon=-97.95&radius_m=10", "/collections/marks/items?f=html"} {
		_, doc, body := s.getHTML(t, p)
		noScript(t, p, doc)
		if strings.Contains(body, "<script>document") {
			t.Errorf("%s: the hostile text is in the markup unescaped", p)
		}
		if p == "/marks/TC-0414" && strings.Count(text(doc), hostileShown) < 3 {
			t.Errorf("%s: the description, directions and note are not all shown as written (found %d): %q", p, strings.Count(text(doc), hostileShown), text(doc))
		}
		if strings.ContainsAny(text(doc), "\x1b\x07\u202e\u202c\u200f") {
			t.Errorf("%s: a character that hides or reorders text is on the page as it is", p)
		}
	}
	for _, p := range []string{"/collections/marks/items/TC-0414", "/collections/marks/items?bbox=-98,41.635,-97.9,41.645"} {
		resp, b := s.get(t, p, "")
		if resp.StatusCode != http.StatusOK || !json.Valid(b) {
			t.Fatalf("%s: %s, valid JSON %v", p, resp.Status, json.Valid(b))
		}
		if strings.Contains(string(b), "<script") || strings.Contains(string(b), "\x1b") || strings.Contains(string(b), "\x07") {
			t.Errorf("%s: markup or a control character raw in the JSON", p)
		}
		var f featureJSON
		if strings.Contains(p, "bbox") {
			var fc collectionItems
			if err := json.Unmarshal(b, &fc); err != nil || len(fc.Features) != 1 {
				t.Fatalf("%s: %v %d features", p, err, len(fc.Features))
			}
			f = fc.Features[0]
		} else if err := json.Unmarshal(b, &f); err != nil {
			t.Fatal(err)
		}
		if f.Properties.Description != hostileText || f.Properties.Directions != hostileText {
			t.Errorf("%s: the text came back as %q", p, f.Properties.Description)
		}
	}
}

// The mark page: the datasheet with its heights, the doubt as a banner
// in capitals (DISTURBED, as loud as the terminal's warning), the
// history of every version, the cautions and the register state, and
// the heights of the date asked for with as_of.
func TestMarkPage(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	_, doc, _ := s.getHTML(t, "/marks/TC-0413")
	txt := text(doc)
	var banners []string
	for _, d := range elements(doc, "div") {
		if attr(d, "class") == "banner" {
			banners = append(banners, text(d))
		}
	}
	if len(banners) != 1 || !strings.HasPrefix(banners[0], "DISTURBED ") || !strings.Contains(banners[0], "2024-05-01") ||
		!strings.Contains(banners[0], "do not rely on its height") {
		t.Errorf("TC-0413's banners %q", banners)
	}
	for _, w := range append([]string{"98.765", "History of its heights", "post leaning after roadworks", "commit ", "no signed statement"}, cautionWords...) {
		if !strings.Contains(txt, w) {
			t.Errorf("TC-0413's page lacks %q", w)
		}
	}
	_, doc, _ = s.getHTML(t, "/marks/TC-0412")
	if txt := text(doc); strings.Contains(txt, "DISTURBED") || !strings.Contains(txt, "101.240") {
		t.Errorf("TC-0412 now: %q", txt)
	}
	// as_of: the version in force on 2019-06-01 is 101.234; the page says
	// the date, and the history still lists both versions.
	_, doc, _ = s.getHTML(t, "/marks/TC-0412?as_of=2019-06-01")
	var heights string
	for _, tb := range elements(doc, "table") {
		if strings.Contains(text(tb), "in force from (UTC)") && strings.Contains(text(tb), "as published") {
			heights = text(tb)
		}
	}
	if !strings.Contains(heights, "101.234") || strings.Contains(heights, "101.240") {
		t.Errorf("the heights table as of 2019-06-01: %q", heights)
	}
	if txt := text(doc); !strings.Contains(txt, "in force on 2019-06-01") || !strings.Contains(txt, "101.240 m") {
		t.Errorf("the page as of 2019-06-01 lacks the date or the history: %q", txt)
	}
	// The as-of form is there on every page, and links keep as_of.
	for _, a := range elements(doc, "a") {
		if attr(a, "class") == "brand" && attr(a, "href") != "/?as_of=2019-06-01" {
			t.Errorf("the home link as of a date: %q", attr(a, "href"))
		}
	}
	// An alias redirects to the designation's page; an unknown mark is
	// 404 on a page with the cautions.
	resp, _ := s.get(t, "/marks/Mere%20Post%207?as_of=2019-06-01", "")
	if resp.StatusCode != http.StatusFound || resp.Header.Get("Location") != "/marks/TC-0412?as_of=2019-06-01" {
		t.Errorf("an alias: %s %q", resp.Status, resp.Header.Get("Location"))
	}
	resp, b := s.get(t, "/marks/TC-9999", "text/html")
	if resp.StatusCode != http.StatusNotFound || !strings.Contains(string(b), "licensed surveyor") || !strings.Contains(string(b), "TC-9999") {
		t.Errorf("an unknown mark: %s %.300s", resp.Status, b)
	}
}

// A mark's trace: each height in force leads to its source, the page
// links back to the mark and the mark's page links to it, as_of kept; an
// earlier date traces the version in force then; a doubt is a banner; the
// cautions are there; an alias redirects; a mark with no height in force
// then says so.
func TestTracePage(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	_, doc, _ := s.getHTML(t, "/marks/TC-0412?as_of=2019-06-01")
	linked := false
	for _, a := range elements(doc, "a") {
		if attr(a, "href") == "/trace/TC-0412?as_of=2019-06-01" {
			linked = true
		}
	}
	if !linked {
		t.Errorf("TC-0412's page links not to its trace as of the same date")
	}
	_, doc, _ = s.getHTML(t, "/trace/TC-0412")
	txt := text(doc)
	for _, w := range append([]string{"How the heights of TC-0412 were derived", "NAVD88 version 2", "101.240 m", "source:", "Back to the mark's page"}, cautionWords...) {
		if !strings.Contains(txt, w) {
			t.Errorf("TC-0412's trace lacks %q:\n%s", w, txt)
		}
	}
	if strings.Contains(txt, "101.234") {
		t.Errorf("TC-0412's trace now shows the version of 2015: %s", txt)
	}
	_, doc, _ = s.getHTML(t, "/trace/TC-0412?as_of=2019-06-01")
	if txt := text(doc); !strings.Contains(txt, "NAVD88 version 1") || !strings.Contains(txt, "101.234 m") || strings.Contains(txt, "101.240") {
		t.Errorf("TC-0412's trace as of 2019-06-01: %s", txt)
	}
	_, doc, _ = s.getHTML(t, "/trace/TC-0413")
	found := false
	for _, d := range elements(doc, "div") {
		if attr(d, "class") == "banner" && strings.HasPrefix(text(d), "DISTURBED ") {
			found = true
		}
	}
	if !found {
		t.Errorf("TC-0413's trace has no DISTURBED banner")
	}
	_, doc, _ = s.getHTML(t, "/trace/TC-0412?as_of=2010-01-01")
	if txt := text(doc); !strings.Contains(txt, "No height of this mark is in force on 2010-01-01") {
		t.Errorf("TC-0412's trace before its first height: %s", txt)
	}
	resp, _ := s.get(t, "/trace/Mere%20Post%207", "")
	if resp.StatusCode != http.StatusFound || resp.Header.Get("Location") != "/trace/TC-0412" {
		t.Errorf("an alias: %s %q", resp.Status, resp.Header.Get("Location"))
	}
}

// Search by designation, by alias in another case, and by a point and
// radius (nearest first, with the distance).
func TestSearch(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	found := func(p string) []string {
		_, doc, _ := s.getHTML(t, p)
		noScript(t, p, doc)
		var out []string
		for _, tb := range elements(doc, "tbody") {
			for _, a := range elements(tb, "a") {
				out = append(out, text(a))
			}
		}
		for _, w := range cautionWords {
			if !strings.Contains(text(doc), w) {
				t.Errorf("%s: no caution %q", p, w)
			}
		}
		return out
	}
	if got := found("/search?q=TC-0412"); len(got) != 1 || got[0] != "TC-0412" {
		t.Errorf("by designation: %v", got)
	}
	if got := found("/search?q=MERE+POST+7"); len(got) != 1 || got[0] != "TC-0412" {
		t.Errorf("by alias: %v", got)
	}
	if got := found("/search?q=TC-9999"); len(got) != 0 {
		t.Errorf("an unknown name: %v", got)
	}
	// 41.635 N: TC-0413 and TC-0414 are 556 m away, TC-0412 1,668 m.
	got := found("/search?lat=41.635&lon=-97.95&radius_m=1200")
	if len(got) != 2 || got[0] != "TC-0413" || got[1] != "TC-0414" {
		t.Errorf("near 41.635, -97.95 within 1200 m: %v", got)
	}
	_, doc, _ := s.getHTML(t, "/search?lat=41.635&lon=-97.95&radius_m=1200")
	if txt := text(doc); !strings.Contains(txt, "DISTURBED") {
		t.Errorf("the search does not flag TC-0413: %q", txt)
	}
}

// ETag from the register's state (RFC 9110 §8.8.3): the same state gives
// the same tag, If-None-Match with it answers 304 with no body, a write
// to the register changes it, and the HTML and JSON of one URL have
// different tags (they are different representations).
func TestETag(t *testing.T) {
	t.Parallel()
	s := newSite(t)
	for _, p := range []string{"/marks/TC-0412", "/collections/marks/items", "/collections/marks/items/TC-0412", "/", "/static/site.css"} {
		r1, _ := s.get(t, p, "")
		tag := r1.Header.Get("ETag")
		if !strings.HasPrefix(tag, `"`) {
			t.Fatalf("%s: ETag %q", p, tag)
		}
		r2, b := s.get(t, p, "", "If-None-Match", tag)
		if r2.StatusCode != http.StatusNotModified || len(b) != 0 || r2.Header.Get("ETag") != tag {
			t.Errorf("%s: If-None-Match %s: %s, %d bytes", p, tag, r2.Status, len(b))
		}
		if r3, _ := s.get(t, p, "", "If-None-Match", `"other", `+tag); r3.StatusCode != http.StatusNotModified {
			t.Errorf("%s: a list of tags: %s", p, r3.Status)
		}
	}
	rj, _ := s.get(t, "/collections/marks/items", "application/json")
	rh, _ := s.get(t, "/collections/marks/items", "text/html")
	if rj.Header.Get("ETag") == rh.Header.Get("ETag") {
		t.Errorf("JSON and HTML share the tag %s", rj.Header.Get("ETag"))
	}
	old := rh.Header.Get("ETag")
	s.b.Condition(t, registertest.ConditionOpts{Designation: "TC-0412", Condition: "destroyed", ObservedOn: time.Date(2025, 1, 2, 0, 0, 0, 0, time.UTC)})
	r4, b := s.get(t, "/collections/marks/items", "text/html", "If-None-Match", old)
	if r4.StatusCode != http.StatusOK || r4.Header.Get("ETag") == old || !strings.Contains(string(b), "DESTROYED") {
		t.Errorf("after a write: %s, tag %s (was %s)", r4.Status, r4.Header.Get("ETag"), old)
	}
}

// The footer shows the audit statement given: signed or not, its head
// and its file's digest.
func TestStatementFooter(t *testing.T) {
	t.Parallel()
	st := &web.Statement{Seq: 7, Head: strings.Repeat("ab", 32), MadeAt: time.Date(2026, 11, 30, 9, 0, 0, 0, time.UTC),
		SHA256: strings.Repeat("cd", 32), Signed: true}
	s := newSite(t, web.Config{Statement: st})
	_, doc, _ := s.getHTML(t, "/")
	var footer string
	for _, f := range elements(doc, "footer") {
		footer = text(f)
	}
	for _, w := range []string{"signed statement of commit 7", st.Head, st.SHA256, "2026-11-30T09:00:00Z", "Register state: commit "} {
		if !strings.Contains(footer, w) {
			t.Errorf("footer lacks %q: %q", w, footer)
		}
	}
}
