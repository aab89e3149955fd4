package web_test

import (
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"net/url"
	"strings"
	"testing"
	"time"

	"golang.org/x/net/html"

	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/web"
)

// The register every test of the site reads: invented marks of Tallis
// County (registertest's positions, 41.62° N 97.95° W and 0.01° apart
// northwards).
//
//	TC-0412  alias "Mere Post 7"; NAVD88 101.234 m in force from
//	         2015-03-01, then 101.240 m from 2020-06-01
//	TC-0413  reported disturbed on 2024-05-01; 98.765 m
//	TC-0414  hostile description, directions and condition note
//	TC-0415  no position, no height
//	TC-0416 … TC-0427  twelve more marks, for paging
type site struct {
	b   *registertest.Bundle
	srv *httptest.Server
}

// hostileText is text the pages must show as text and the JSON keep
// exactly: markup, quotes, control characters and right-to-left marks.
const hostileText = "<script>document.title='owned'</script> \"quoted\" 'single' & <b>bold</b> " +
	"tab\there \x1b[31mred\x1b[0m bell\x07 \u202eevil\u202c \u200fRLM Orrin Bay"

// hostileShown is hostileText as a page shows it: markup and quotes as
// text, the characters that hide or reorder text written \uXXXX (as on
// the terminal, internal/cli/visible.go), tab kept.
const hostileShown = "<script>document.title='owned'</script> \"quoted\" 'single' & <b>bold</b> " +
	`tab	here \u001b[31mred\u001b[0m bell\u0007 \u202eevil\u202c \u200fRLM Orrin Bay`

func day(s string) *time.Time {
	t, err := time.Parse("2006-01-02", s)
	if err != nil {
		panic(err)
	}
	return &t
}

func newSite(t *testing.T, cfg ...web.Config) *site {
	t.Helper()
	b := registertest.Setup(t)
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0412"})
	if _, err := b.Reg.MarkAliasAdd(b.Ctx, register.MarkAliasParams{Designation: "TC-0412", Alias: "Mere Post 7", Kind: "former", By: "test"}); err != nil {
		t.Fatal(err)
	}
	b.Height(t, registertest.HeightOpts{Designation: "TC-0412", Value: "101.234", InForceFrom: day("2015-03-01")})
	b.Height(t, registertest.HeightOpts{Designation: "TC-0412", Value: "101.240", InForceFrom: day("2020-06-01")})
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0413"})
	b.Height(t, registertest.HeightOpts{Designation: "TC-0413", Value: "98.765", InForceFrom: day("2016-01-01")})
	b.Condition(t, registertest.ConditionOpts{Designation: "TC-0413", Condition: "disturbed", Note: "post leaning after roadworks; " + hostileText})
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0414", Directions: hostileText})
	desc := hostileText
	if _, err := b.Reg.MarkEdit(b.Ctx, register.MarkEditParams{Designation: "TC-0414", Description: &desc, Reason: "described", By: "test"}); err != nil {
		t.Fatal(err)
	}
	b.Condition(t, registertest.ConditionOpts{Designation: "TC-0414", Condition: "good", Note: hostileText})
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0415", NoPosition: true})
	for i := 416; i <= 427; i++ {
		b.Mark(t, registertest.MarkOpts{Designation: fmt.Sprintf("TC-%04d", i)})
	}
	c := web.Config{}
	if len(cfg) > 0 {
		c = cfg[0]
	}
	c.Register, c.Version = b.Reg, "test"
	srv := httptest.NewServer(web.New(c).Handler())
	t.Cleanup(srv.Close)
	return &site{b: b, srv: srv}
}

// get requests path with the Accept header given ("" for none) and
// returns the response with its body read.
func (s *site) get(t *testing.T, path, accept string, header ...string) (*http.Response, []byte) {
	t.Helper()
	req, err := http.NewRequest(http.MethodGet, s.srv.URL+path, nil)
	if err != nil {
		t.Fatal(err)
	}
	if accept != "" {
		req.Header.Set("Accept", accept)
	}
	for i := 0; i+1 < len(header); i += 2 {
		req.Header.Set(header[i], header[i+1])
	}
	c := &http.Client{CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}
	resp, err := c.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return resp, b
}

// getJSON requests path, wants 200 and the media type, and decodes the
// body into v.
func (s *site) getJSON(t *testing.T, path, mediaType string, v any) *http.Response {
	t.Helper()
	resp, b := s.get(t, path, "")
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("GET %s: %s: %s", path, resp.Status, b)
	}
	if got := resp.Header.Get("Content-Type"); got != mediaType {
		t.Errorf("GET %s: Content-Type %q, want %q", path, got, mediaType)
	}
	if !json.Valid(b) {
		t.Fatalf("GET %s: not valid JSON: %.200s", path, b)
	}
	if err := json.Unmarshal(b, v); err != nil {
		t.Fatalf("GET %s: %v", path, err)
	}
	return resp
}

// getHTML requests path as a browser would and parses the page, which
// must hold no script (noScript).
func (s *site) getHTML(t *testing.T, path string) (*http.Response, *html.Node, string) {
	t.Helper()
	resp, b := s.get(t, path, "text/html,application/xhtml+xml,application/xml;q=0.9,*/*;q=0.8")
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("GET %s: %s: %s", path, resp.Status, b)
	}
	if got := resp.Header.Get("Content-Type"); got != "text/html; charset=utf-8" {
		t.Errorf("GET %s: Content-Type %q", path, got)
	}
	doc, err := html.Parse(strings.NewReader(string(b)))
	if err != nil {
		t.Fatalf("GET %s: %v", path, err)
	}
	noScript(t, path, doc)
	return resp, doc, string(b)
}

// text is the text content of the document, as a browser shows it.
func text(n *html.Node) string {
	var b strings.Builder
	var walk func(*html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.TextNode {
			b.WriteString(n.Data)
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(n)
	return b.String()
}

// elements are the document's elements named tag.
func elements(n *html.Node, tag string) []*html.Node {
	var out []*html.Node
	var walk func(*html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode && n.Data == tag {
			out = append(out, n)
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(n)
	return out
}

func attr(n *html.Node, key string) string {
	for _, a := range n.Attr {
		if a.Key == key {
			return a.Val
		}
	}
	return ""
}

// linkJSON is a link of the API's JSON.
type linkJSON struct {
	Href, Rel, Type, Title string
}

func hasLink(links []linkJSON, rel, typ string) (linkJSON, bool) {
	for _, l := range links {
		if l.Rel == rel && (typ == "" || l.Type == typ) {
			return l, true
		}
	}
	return linkJSON{}, false
}

// The cautions every page carries (docs/briefs' rules: review by a
// licensed surveyor, two marks, condition, local codes).
var cautionWords = []string{"licensed surveyor", "two marks", "condition", "Local codes"}

func query(kv ...string) string {
	v := url.Values{}
	for i := 0; i+1 < len(kv); i += 2 {
		v.Set(kv[i], kv[i+1])
	}
	return v.Encode()
}
