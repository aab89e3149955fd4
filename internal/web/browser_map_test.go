package web_test

import (
	"context"
	"math"
	"strconv"
	"strings"
	"sync"
	"testing"

	"github.com/chromedp/chromedp"
)

// console collects what the page writes to the console (exceptions, the
// browser's log, a Content-Security-Policy's refusals among them) for
// the whole test.
type console struct {
	mu   sync.Mutex
	msgs []chromedp.ConsoleMessage
}

func watchConsole(t *testing.T, ctx context.Context) *console {
	c := &console{}
	cctx, cancel := context.WithCancel(ctx)
	msgs := chromedp.Console(cctx)
	done := make(chan struct{})
	go func() {
		defer close(done)
		for m, err := range msgs {
			if err != nil {
				return
			}
			c.mu.Lock()
			c.msgs = append(c.msgs, m)
			c.mu.Unlock()
		}
	}()
	t.Cleanup(func() { cancel(); <-done })
	return c
}

// troubles are the exceptions, and the errors but a missing favicon, so
// far; a script the policy blocks or a failed fetch is one.
func (c *console) troubles() []string {
	c.mu.Lock()
	defer c.mu.Unlock()
	var out []string
	for _, m := range c.msgs {
		if (m.IsException() || m.Type == chromedp.ConsoleError || strings.Contains(m.Text, "Content Security Policy")) && !strings.Contains(m.URL, "favicon") {
			out = append(out, m.String()+" ("+m.URL+")")
		}
	}
	return out
}

// The map in a real browser: Leaflet and the map's script run under the
// map page's Content-Security-Policy (Chromium applies it; no refusal may
// appear on the console); the markers are the marks the list finds near
// the point, those of the box's corners beyond the radius left out; a
// popup shows a hostile description as text and no script from the
// register's data runs; a click on the map fills the point search; the
// as-of date reaches the popups' heights. A screenshot of each step is
// written.
func TestBrowserMap(t *testing.T) {
	s := newSite(t)
	ctx := newBrowser(t)
	shots := screenshotDir(t)
	con := watchConsole(t, ctx)
	loaded := chromedp.WaitReady(chromedp.CSS("#map[data-loaded]"))
	markers := chromedp.Evaluate[[]string](`[...document.querySelectorAll('#map .leaflet-marker-icon')].map(m => m.title).sort()`)
	listed := chromedp.Evaluate[[]string](`[...document.querySelectorAll('table.marks tbody tr td:first-child')].map(td => td.textContent.trim()).sort()`)

	t.Run("marks near a point", func(t *testing.T) {
		for _, c := range []struct {
			query string
			want  string
		}{
			// TC-0413 and TC-0414 are 556 m from 41.635 (0.005° of
			// latitude on R = 6,371,008.8 m), TC-0412 1,668 m.
			{"lat=41.635&lon=-97.95&radius_m=1200", "TC-0413 TC-0414"},
			// TC-0414 is 1,056 m from 41.6305, in the box around the
			// circle of 1,050 m but outside it: the map leaves it out,
			// as the list does.
			{"lat=41.6305&lon=-97.95&radius_m=1050", "TC-0413"},
			{"lat=41.62&lon=-97.95&radius_m=100", "TC-0412"},
			{"lat=10&lon=10&radius_m=1000", ""},
		} {
			do(t, ctx, shots, "map-"+strings.NewReplacer("&", "-", "=", "").Replace(c.query),
				chromedp.Navigate(s.srv.URL+"/map?"+c.query), loaded)
			got := strings.Join(read(t, ctx, markers), " ")
			status := read(t, ctx, chromedp.Text(chromedp.ID("map-status")))
			do(t, ctx, shots, "map-list-"+strings.NewReplacer("&", "-", "=", "").Replace(c.query),
				chromedp.Navigate(s.srv.URL+"/search?"+c.query), chromedp.WaitVisible(chromedp.ID("state")))
			list := strings.Join(read(t, ctx, listed), " ")
			if got != c.want || list != c.want {
				t.Errorf("%s: markers %q, the list %q, want %q (%s)", c.query, got, list, c.want, status)
			}
			if n := strings.Count(c.want, "TC-"); !strings.HasPrefix(status, strconv.Itoa(n)+" mark") {
				t.Errorf("%s: status %q", c.query, status)
			}
		}
	})
	t.Run("hostile description in a popup", func(t *testing.T) {
		do(t, ctx, shots, "map-popup-hostile",
			chromedp.Navigate(s.srv.URL+"/map?lat=41.64&lon=-97.95&radius_m=100"), loaded,
			chromedp.Click(chromedp.CSS(`#map .leaflet-marker-icon[title="TC-0414"]`)),
			chromedp.WaitVisible(chromedp.CSS(".leaflet-popup-content .popup-description")))
		desc := read(t, ctx, chromedp.TextContent(chromedp.CSS(".leaflet-popup-content .popup-description")))
		if !strings.Contains(desc, "<script>document.title='owned'</script>") || !strings.Contains(desc, "<b>bold</b>") ||
			!strings.Contains(desc, `\u202eevil\u202c`) || !strings.Contains(desc, `\u001b[31mred`) || strings.ContainsAny(desc, "\u202e\x1b\x07") {
			t.Errorf("the description is not shown as written, its hidden characters made visible: %q", desc)
		}
		title := read(t, ctx, chromedp.Title())
		n := read(t, ctx, chromedp.Evaluate[int](`document.querySelectorAll('.leaflet-popup-content script, .leaflet-popup-content b, b').length`))
		srcs := read(t, ctx, chromedp.Evaluate[[]string](`[...document.scripts].map(s => new URL(s.src).pathname + (s.text ? ' inline' : ''))`))
		if title == "owned" || n != 0 || strings.Join(srcs, " ") != "/static/leaflet/leaflet.js /static/map.js" {
			t.Errorf("title %q, %d script or b elements in the page, scripts %v: the register's text ran or became markup", title, n, srcs)
		}
		link := read(t, ctx, chromedp.AttributeValue(chromedp.CSS(".leaflet-popup-content .popup-mark a"), "href"))
		if !link.Exists || !strings.HasSuffix(link.Value, "/marks/TC-0414") {
			t.Errorf("the popup's link %v", link)
		}
	})
	t.Run("as of in a popup", func(t *testing.T) {
		do(t, ctx, shots, "map-popup-as-of",
			chromedp.Navigate(s.srv.URL+"/map?lat=41.62&lon=-97.95&radius_m=100&as_of=2019-06-01"), loaded,
			chromedp.Click(chromedp.CSS(`#map .leaflet-marker-icon[title="TC-0412"]`)),
			chromedp.WaitVisible(chromedp.CSS(".leaflet-popup-content .popup-height")))
		h := read(t, ctx, chromedp.Text(chromedp.CSS(".leaflet-popup-content")))
		if !strings.Contains(h, "101.234 m") || strings.Contains(h, "101.240") || !strings.Contains(h, "licensed surveyor") {
			t.Errorf("as of 2019-06-01, TC-0412's popup %q, want 101.234 m", h)
		}
	})
	t.Run("disturbed mark in a popup", func(t *testing.T) {
		do(t, ctx, shots, "map-popup-disturbed",
			chromedp.Navigate(s.srv.URL+"/map?lat=41.63&lon=-97.95&radius_m=100"), loaded,
			chromedp.Click(chromedp.CSS(`#map .leaflet-marker-icon[title="TC-0413"]`)),
			chromedp.WaitVisible(chromedp.CSS(".leaflet-popup-content .popup-doubt")))
		d := read(t, ctx, chromedp.Text(chromedp.CSS(".leaflet-popup-content .popup-doubt")))
		if !strings.HasPrefix(d, "DISTURBED") || !strings.Contains(d, "do not rely on its height") {
			t.Errorf("TC-0413's popup doubt %q", d)
		}
	})
	t.Run("a click fills the point search", func(t *testing.T) {
		do(t, ctx, shots, "map-before-click",
			chromedp.Navigate(s.srv.URL+"/map?lat=41.635&lon=-97.95&radius_m=1200"), loaded)
		box := read(t, ctx, chromedp.Dimensions(chromedp.ID("map")))
		q := box.Content
		// The centre of the map is the point (the map is fitted to the
		// circle around it); a click a quarter of the width to the right
		// is east of it.
		x, y := (q[0]+q[2])/2, (q[1]+q[5])/2
		if !read(t, ctx, chromedp.Evaluate[bool](`document.getElementById('lat').value = document.getElementById('lon').value = ''; true`)) {
			t.Fatal("could not clear the point")
		}
		do(t, ctx, shots, "map-clicked",
			chromedp.MouseClickXY(x+(q[2]-q[0])/4, y),
			chromedp.WaitReady(chromedp.CSS("form#point.chosen")))
		lat, err1 := strconv.ParseFloat(read(t, ctx, chromedp.Value(chromedp.ID("lat"))), 64)
		lon, err2 := strconv.ParseFloat(read(t, ctx, chromedp.Value(chromedp.ID("lon"))), 64)
		if err1 != nil || err2 != nil || math.Abs(lat-41.635) > 0.002 || !(lon > -97.95+0.002 && lon < -97.95+0.05) {
			t.Errorf("a click east of the point filled %v, %v (%v %v)", lat, lon, err1, err2)
		}
		// The page the form brings is a new document: wait for its map,
		// not the old one's.
		if !read(t, ctx, chromedp.Evaluate[bool](`document.body.dataset.before = 'yes'; true`)) {
			t.Fatal("could not mark the page")
		}
		do(t, ctx, shots, "map-clicked-shown",
			chromedp.Click(chromedp.CSS(`form#point button[type=submit]`)),
			chromedp.WaitReady(chromedp.CSS("body:not([data-before]) #map[data-loaded]")))
		loc := read(t, ctx, chromedp.Location())
		if !strings.Contains(loc, "/map?") || !strings.Contains(loc, "lat=41.63") || !strings.Contains(loc, "radius_m=1200") {
			t.Errorf("the form sent %s", loc)
		}
	})
	if tr := con.troubles(); len(tr) > 0 {
		t.Errorf("the console: %s", strings.Join(tr, "\n"))
	}
}
