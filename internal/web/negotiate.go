package web

import (
	"net/http"
	"strconv"
	"strings"
)

// format is an encoding of a response.
type format string

const (
	formatJSON format = "json" // JSON; GeoJSON for features
	formatHTML format = "html"
)

// pathFormats are the encodings a path is served in, the default first.
// The site's own pages are HTML only; the API's resources are JSON
// (GeoJSON for features) unless HTML is asked for.
func pathFormats(path string) []format {
	switch {
	case path == "/search", path == "/map", strings.HasPrefix(path, "/marks/"), strings.HasPrefix(path, "/static/"):
		return []format{formatHTML}
	}
	return []format{formatJSON, formatHTML}
}

// negotiate picks the encoding of the response to r among allowed: the
// f parameter when it names one (OGC API – Features /req/core/f-op's
// alternative, recommended by its HTML and GeoJSON classes), else the
// best of the Accept header (RFC 9110 §12.5.1: by q, then in the order
// written), else the default.
func negotiate(r *http.Request, allowed []format) format {
	if f := format(r.URL.Query().Get("f")); f != "" {
		for _, a := range allowed {
			if a == f {
				return f
			}
		}
		return allowed[0]
	}
	best, bestQ := allowed[0], -1.0
	for _, part := range strings.Split(r.Header.Get("Accept"), ",") {
		fields := strings.Split(part, ";")
		mt := strings.ToLower(strings.TrimSpace(fields[0]))
		if mt == "" {
			continue
		}
		q := 1.0
		for _, p := range fields[1:] {
			k, v, ok := strings.Cut(strings.TrimSpace(p), "=")
			if ok && strings.EqualFold(strings.TrimSpace(k), "q") {
				if f, err := strconv.ParseFloat(strings.TrimSpace(v), 64); err == nil {
					q = f
				}
			}
		}
		var f format
		switch mt {
		case "text/html", "application/xhtml+xml":
			f = formatHTML
		case "application/json", "application/geo+json", "application/vnd.oai.openapi+json":
			f = formatJSON
		case "*/*", "text/*", "application/*":
			f = allowed[0]
		default:
			continue
		}
		ok := false
		for _, a := range allowed {
			ok = ok || a == f
		}
		if ok && q > 0 && q > bestQ {
			best, bestQ = f, q
		}
	}
	return best
}
