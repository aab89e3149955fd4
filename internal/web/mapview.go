package web

import (
	"crypto/sha256"
	"embed"
	"encoding/hex"
	"fmt"
	"math"
	"net/http"
	"net/url"
	"path"
	"strconv"
	"strings"
	"sync"

	"cairn/internal/register"
	"cairn/internal/units"
)

// Leaflet, from the npm registry (leaflet 1.9.4, its dist files and
// LICENSE; docs/references.md), and the map's own script.
//
//go:embed static/leaflet/leaflet.js static/leaflet/leaflet.css static/leaflet/LICENSE static/leaflet/images/*.png static/map.js
var mapFiles embed.FS

// MapMaxMarks is the most marks the map draws around one point; beyond,
// it says so (the list of marks near a point is bounded too).
const MapMaxMarks = 2000

// mapItemsLimit is the page size the map asks the items for.
const mapItemsLimit = 500

// TileSource is a checked --tiles URL template: http or https, with
// {z}, {x} and {y}, and a host that may begin with a {s} label (Leaflet's
// subdomains).
type TileSource struct {
	Template string
	// ImgSrc is the source the Content-Security-Policy's img-src allows
	// for the tiles: scheme and host, the {s} label as a wildcard.
	ImgSrc string
}

// ParseTiles checks a --tiles URL template; "" is no tile layer.
func ParseTiles(tmpl string) (*TileSource, error) {
	if tmpl == "" {
		return nil, nil
	}
	for _, p := range []string{"{z}", "{x}", "{y}"} {
		if !strings.Contains(tmpl, p) {
			return nil, fmt.Errorf("tile URL %q has no %s (write it as https://tiles.example.org/{z}/{x}/{y}.png)", tmpl, p)
		}
	}
	// url.Parse takes no braces in a host: the {s} label is read as a
	// plain one, then written as CSP's wildcard.
	const sub = "cairn-tile-subdomain."
	u, err := url.Parse(strings.Replace(tmpl, "://{s}.", "://"+sub, 1))
	if err != nil {
		return nil, fmt.Errorf("tile URL %q: %v", tmpl, err)
	}
	if u.Scheme != "https" && u.Scheme != "http" {
		return nil, fmt.Errorf("tile URL %q: the scheme must be https or http", tmpl)
	}
	host := u.Host
	if strings.HasPrefix(host, sub) {
		host = "*." + host[len(sub):]
	}
	if host == "" || host == "*." || strings.ContainsAny(host, "{}; '\"") || u.User != nil {
		return nil, fmt.Errorf("tile URL %q: the host must be a plain name, with at most a leading {s}. label", tmpl)
	}
	if strings.ContainsAny(tmpl, " ;'\"\\<>") {
		return nil, fmt.Errorf("tile URL %q: spaces, quotes, semicolons and angle brackets are not allowed", tmpl)
	}
	return &TileSource{Template: tmpl, ImgSrc: u.Scheme + "://" + host}, nil
}

// mapCSP is the map page's Content-Security-Policy: the site's own script
// files only (no inline script, no eval), fetches to the site itself, and
// images from the site (Leaflet's icons) and, when a tile layer is given,
// from its host only.
func (s *Server) mapCSP() string {
	img := "img-src 'self' data:"
	if s.tiles != nil {
		img += " " + s.tiles.ImgSrc
	}
	return "default-src 'none'; script-src 'self'; connect-src 'self'; style-src 'self'; " + img + "; " +
		"form-action 'self'; frame-ancestors 'none'; base-uri 'none'"
}

// mapView is the map page.
type mapView struct {
	Lat, Lon, Radius string // as typed, for the form
	HasPoint         bool
	Asked            string
	ItemsURL         string // the items in the box around the circle
	ListURL          string // the same search as a list, without the map
	Tiles            string
	MaxMarks         int
	AsOf             string // as_of as asked, for the popups' links
}

// mapPage is the map of marks near a point (lat, lon, radius_m): the
// page, its form and the list's link work without JavaScript; the map
// itself is drawn by /static/map.js from the items endpoint.
func (s *Server) mapPage(w http.ResponseWriter, r *http.Request) {
	_, asOf, ok := s.begin(w, r, "lat", "lon", "radius_m", "as_of")
	if !ok {
		return
	}
	q := r.URL.Query()
	v := mapView{Radius: "1000", MaxMarks: MapMaxMarks, AsOf: q.Get("as_of")}
	if s.tiles != nil {
		v.Tiles = s.tiles.Template
	}
	if q.Has("lat") || q.Has("lon") || q.Has("radius_m") {
		lat, err := parseNumber("lat", q.Get("lat"))
		if err != nil {
			s.error(w, r, err)
			return
		}
		lon, err := parseNumber("lon", q.Get("lon"))
		if err != nil {
			s.error(w, r, err)
			return
		}
		radius, err := parseNumber("radius_m", q.Get("radius_m"))
		if err != nil {
			s.error(w, r, err)
			return
		}
		switch {
		case lat < -90 || lat > 90:
			s.error(w, r, badParam("lat", "latitude %v is outside -90 to 90 degrees", lat))
			return
		case lon < -180 || lon > 180:
			s.error(w, r, badParam("lon", "longitude %v is outside -180 to 180 degrees", lon))
			return
		case !(radius > 0) || radius > register.MaxSearchRadiusM:
			s.error(w, r, badParam("radius_m", "the radius must be more than 0 and at most %d m", register.MaxSearchRadiusM))
			return
		}
		b := boxAround(lat, lon, radius)
		iq := url.Values{"bbox": {b}, "limit": {strconv.Itoa(mapItemsLimit)}, "f": {"json"}}
		lq := url.Values{"lat": {q.Get("lat")}, "lon": {q.Get("lon")}, "radius_m": {q.Get("radius_m")}}
		if a := q.Get("as_of"); a != "" {
			iq.Set("as_of", a)
			lq.Set("as_of", a)
		}
		v.HasPoint = true
		v.Lat, v.Lon, v.Radius = strconv.FormatFloat(lat, 'f', -1, 64), strconv.FormatFloat(lon, 'f', -1, 64), strconv.FormatFloat(radius, 'f', -1, 64)
		v.ItemsURL = withQuery("/collections/"+collectionID+"/items", iq)
		v.ListURL = withQuery("/search", lq)
		v.Asked = fmt.Sprintf("Marks within %s m of %s, %s", units.Format(radius, 1), v.Lat, v.Lon)
	}
	st, err := s.cfg.Register.State(r.Context())
	if err != nil {
		s.serverError(w, r, err)
		return
	}
	s.page(w, r, st, asOf, "map", "Map of marks · cairn", v)
}

// minDegreeM is a length no degree of latitude falls short of, nor a
// degree of longitude at latitude φ divided by cos φ: the meridian degree
// at the equator on the WGS 84 ellipsoid, 110,574 m (from memory; the
// polar one is 111,694 m, the equatorial degree of longitude 111,320 m).
// A box drawn with it and a twentieth more holds the circle; the map
// drops the marks of its corners.
const minDegreeM = 110574

// boxAround is the bbox parameter of a box holding the circle of radius
// metres around lat, lon: west,south,east,north; across the antimeridian
// west is greater than east (OGC API – Features /req/core/fc-bbox-definition);
// near a pole, every longitude.
func boxAround(lat, lon, radius float64) string {
	d := 1.05 * radius / minDegreeM
	south, north := math.Max(-90, lat-d), math.Min(90, lat+d)
	west, east := -180.0, 180.0
	if c := math.Cos(math.Max(math.Abs(south), math.Abs(north)) * math.Pi / 180); north < 90 && south > -90 && c > 0.01 {
		if dlon := d / c; dlon < 180 {
			west, east = wrapLon(lon-dlon), wrapLon(lon+dlon)
		}
	}
	f := func(x float64) string { return strconv.FormatFloat(x, 'f', 6, 64) }
	return f(west) + "," + f(south) + "," + f(east) + "," + f(north)
}

// wrapLon brings a longitude into -180 to 180.
func wrapLon(x float64) float64 {
	for x > 180 {
		x -= 360
	}
	for x < -180 {
		x += 360
	}
	return x
}

// staticFile is one embedded file the site serves, with its type and a
// tag of its bytes (a static file does not change with the register, so
// a CDN or a browser keeps it across commits).
type staticFile struct {
	body        []byte
	contentType string
	etag        string
}

func newStatic(body []byte, contentType string) staticFile {
	sum := sha256.Sum256(body)
	return staticFile{body: body, contentType: contentType, etag: `"static-` + hex.EncodeToString(sum[:8]) + `"`}
}

// staticFiles are the files under /static/, by their path there, read
// and tagged on first use.
var staticFiles = sync.OnceValue(func() map[string]staticFile {
	out := map[string]staticFile{}
	types := map[string]string{".js": "text/javascript; charset=utf-8", ".css": "text/css; charset=utf-8", ".png": "image/png", "": "text/plain; charset=utf-8"}
	for _, name := range []string{"leaflet/leaflet.js", "leaflet/leaflet.css", "leaflet/LICENSE", "map.js",
		"leaflet/images/layers.png", "leaflet/images/layers-2x.png", "leaflet/images/marker-icon.png", "leaflet/images/marker-icon-2x.png", "leaflet/images/marker-shadow.png"} {
		b, err := mapFiles.ReadFile("static/" + name)
		if err != nil {
			panic(err)
		}
		out[name] = newStatic(b, types[path.Ext(name)])
	}
	return out
})
