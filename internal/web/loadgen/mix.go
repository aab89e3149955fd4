package loadgen

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math/rand/v2"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"
)

// Area is where the register's marks are, in degrees (CRS84): the boxes
// of the bbox queries are drawn inside it.
type Area struct{ West, South, East, North float64 }

// ParseArea reads "west,south,east,north".
func ParseArea(s string) (Area, error) {
	parts := strings.Split(s, ",")
	if len(parts) != 4 {
		return Area{}, fmt.Errorf("area %q: give west,south,east,north in degrees", s)
	}
	var v [4]float64
	for i, p := range parts {
		var err error
		if v[i], err = strconv.ParseFloat(strings.TrimSpace(p), 64); err != nil {
			return Area{}, fmt.Errorf("area %q: %q is not a number", s, p)
		}
	}
	a := Area{v[0], v[1], v[2], v[3]}
	if a.West >= a.East || a.South >= a.North {
		return Area{}, fmt.Errorf("area %q: west must be less than east and south less than north", s)
	}
	return a, nil
}

// BBoxPath is a GIS client's usual request: the marks in a box of side
// size degrees at a random place of the area, limit at most, as GeoJSON.
func BBoxPath(r *rand.Rand, a Area, size float64, limit int) string {
	w := a.West + r.Float64()*max(a.East-a.West-size, 0)
	s := a.South + r.Float64()*max(a.North-a.South-size, 0)
	return fmt.Sprintf("/collections/marks/items?bbox=%.5f,%.5f,%.5f,%.5f&limit=%d&f=json", w, s, w+size, s+size, limit)
}

// BBoxQueries gives random bbox queries (BBoxPath).
func BBoxQueries(a Area, size float64, limit int) func(*rand.Rand) Request {
	return func(r *rand.Rand) Request { return Request{Path: BBoxPath(r, a, size, limit)} }
}

// MarkPages gives the pages of marks drawn at random from names.
func MarkPages(names []string) func(*rand.Rand) Request {
	return func(r *rand.Rand) Request {
		return Request{Path: "/marks/" + url.PathEscape(names[r.IntN(len(names))])}
	}
}

// IfNoneMatch adds If-None-Match: tag to next's requests (the 304 runs).
func IfNoneMatch(next func(*rand.Rand) Request, tag string) func(*rand.Rand) Request {
	return func(r *rand.Rand) Request {
		rq := next(r)
		h := rq.Header.Clone()
		if h == nil {
			h = http.Header{}
		}
		h.Set("If-None-Match", tag)
		rq.Header = h
		return rq
	}
}

// Sample draws about want designations of the register from the site
// itself, by bbox queries of boxes of side size at random places of the
// area (at most 50 queries a designation wanted, so that an area with no
// marks ends with an error).
func Sample(ctx context.Context, base string, a Area, size float64, want int, seed uint64) ([]string, error) {
	r := rand.New(rand.NewPCG(seed, 0))
	hc := &http.Client{Timeout: 30 * time.Second}
	seen := map[string]bool{}
	var names []string
	for tries := 0; len(names) < want && tries < 50*want; tries++ {
		var fc struct {
			Features []struct {
				ID string `json:"id"`
			} `json:"features"`
		}
		body, _, err := Get(ctx, hc, strings.TrimRight(base, "/")+BBoxPath(r, a, size, 100))
		if err != nil {
			return nil, err
		}
		if err := json.Unmarshal(body, &fc); err != nil {
			return nil, fmt.Errorf("sample the marks: %w", err)
		}
		for _, f := range fc.Features {
			if !seen[f.ID] && len(names) < want {
				seen[f.ID] = true
				names = append(names, f.ID)
			}
		}
	}
	if len(names) == 0 {
		return nil, fmt.Errorf("sample the marks: no mark in boxes of %g° in the area %v", size, a)
	}
	return names, nil
}

// Get reads one URL, with its ETag; a status other than 200 is an error.
func Get(ctx context.Context, hc *http.Client, u string) ([]byte, string, error) {
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, u, nil)
	if err != nil {
		return nil, "", err
	}
	resp, err := hc.Do(req)
	if err != nil {
		return nil, "", fmt.Errorf("GET %s: %w", u, err)
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(resp.Body)
	if err != nil {
		return nil, "", fmt.Errorf("GET %s: %w", u, err)
	}
	if resp.StatusCode != http.StatusOK {
		return nil, "", fmt.Errorf("GET %s: %s: %.200s", u, resp.Status, body)
	}
	return body, resp.Header.Get("ETag"), nil
}
