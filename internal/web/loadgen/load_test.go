package loadgen

import (
	"context"
	"fmt"
	"math/rand/v2"
	"net/http"
	"os"
	"strconv"
	"strings"
	"testing"
	"time"
)

// TestLoad puts a running cairn serve under load and fails on any error,
// any request lost, or any status but the one expected (200, or 304 for
// the runs with If-None-Match). It runs only when CAIRN_LOAD_URL names the
// site (it is not part of the normal suite):
//
//	CAIRN_LOAD_URL=http://127.0.0.1:8080   the site
//	CAIRN_LOAD_AREA=west,south,east,north  where the register's marks are
//	CAIRN_LOAD_CLIENTS=64,256              concurrent clients, one run each
//	CAIRN_LOAD_SECONDS=30                  each run's length
//	CAIRN_LOAD_BOX=0.05                    the bbox queries' side, degrees
//	CAIRN_LOAD_LIMIT=100                   the bbox queries' limit
//	CAIRN_LOAD_RUNS=marks,bbox,marks304,bbox304
//	CAIRN_LOAD_OUT=FILE                    also append the figures to FILE
//
// The mark pages are of CAIRN_LOAD_SAMPLE (2,000) designations drawn from
// the site's own answers to bbox queries of the area.
func TestLoad(t *testing.T) {
	base := os.Getenv("CAIRN_LOAD_URL")
	if base == "" {
		t.Skip("CAIRN_LOAD_URL is not set: no site to load (docs/performance.md, the register on the web)")
	}
	area, err := ParseArea(env("CAIRN_LOAD_AREA", ""))
	if err != nil {
		t.Fatalf("CAIRN_LOAD_AREA: %v", err)
	}
	seconds := envFloat(t, "CAIRN_LOAD_SECONDS", 30)
	box := envFloat(t, "CAIRN_LOAD_BOX", 0.05)
	limit := int(envFloat(t, "CAIRN_LOAD_LIMIT", 100))
	sample := int(envFloat(t, "CAIRN_LOAD_SAMPLE", 2000))
	var clients []int
	for _, s := range strings.Split(env("CAIRN_LOAD_CLIENTS", "64,256"), ",") {
		n, err := strconv.Atoi(strings.TrimSpace(s))
		if err != nil || n < 1 {
			t.Fatalf("CAIRN_LOAD_CLIENTS: %q is not a number of clients", s)
		}
		clients = append(clients, n)
	}
	ctx := context.Background()
	names, err := Sample(ctx, base, area, box, sample, 7)
	if err != nil {
		t.Fatal(err)
	}
	hc := &http.Client{Timeout: 30 * time.Second}
	_, markTag, err := Get(ctx, hc, strings.TrimRight(base, "/")+"/marks/"+names[0])
	if err != nil {
		t.Fatal(err)
	}
	_, bboxTag, err := Get(ctx, hc, strings.TrimRight(base, "/")+fmt.Sprintf("/collections/marks/items?bbox=%g,%g,%g,%g&limit=%d&f=json", area.West, area.South, area.West+box, area.South+box, limit))
	if err != nil {
		t.Fatal(err)
	}
	if markTag == "" || bboxTag == "" {
		t.Fatalf("no ETag from the site (mark page %q, bbox query %q)", markTag, bboxTag)
	}
	runs := map[string]struct {
		next func(*rand.Rand) Request
		want int
	}{
		"marks":    {MarkPages(names), http.StatusOK},
		"bbox":     {BBoxQueries(area, box, limit), http.StatusOK},
		"marks304": {IfNoneMatch(MarkPages(names), markTag), http.StatusNotModified},
		"bbox304":  {IfNoneMatch(BBoxQueries(area, box, limit), bboxTag), http.StatusNotModified},
	}
	var out *os.File
	if p := os.Getenv("CAIRN_LOAD_OUT"); p != "" {
		if out, err = os.OpenFile(p, os.O_CREATE|os.O_APPEND|os.O_WRONLY, 0o644); err != nil {
			t.Fatal(err)
		}
		defer out.Close()
	}
	for _, name := range strings.Split(env("CAIRN_LOAD_RUNS", "marks,bbox,marks304,bbox304"), ",") {
		run, ok := runs[name]
		if !ok {
			t.Fatalf("CAIRN_LOAD_RUNS: no run %q (marks, bbox, marks304, bbox304)", name)
		}
		for _, n := range clients {
			res, err := Run(ctx, Options{BaseURL: base, Clients: n, Duration: time.Duration(seconds * float64(time.Second)), Next: run.next, Seed: uint64(n)})
			if err != nil {
				t.Fatal(err)
			}
			line := fmt.Sprintf("%s: %s", name, res.Summary())
			t.Log(line)
			if out != nil {
				fmt.Fprintf(out, "%s %s\n", time.Now().UTC().Format(time.RFC3339), line)
			}
			if res.Failed() != 0 || res.Lost() != 0 || res.Status[run.want] != res.Answered() || res.Answered() == 0 {
				t.Errorf("%s, %d clients: want every request answered %d, none failed or lost: %s", name, n, run.want, res.Summary())
			}
		}
	}
}

func env(k, def string) string {
	if v := os.Getenv(k); v != "" {
		return v
	}
	return def
}

func envFloat(t *testing.T, k string, def float64) float64 {
	s := os.Getenv(k)
	if s == "" {
		return def
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || v <= 0 {
		t.Fatalf("%s: %q is not a positive number", k, s)
	}
	return v
}
