package web_test

import (
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
)

// chromiumPath finds the browser: Debian's chromium (apt-get install
// chromium; .ci/run installs it when missing). No browser is a failure,
// never a skip: the browser tests are part of the suite.
func chromiumPath(t *testing.T) string {
	t.Helper()
	if p := os.Getenv("CAIRN_CHROMIUM"); p != "" {
		return p
	}
	for _, p := range []string{"/usr/bin/chromium", "chromium", "chromium-browser", "google-chrome", "google-chrome-stable"} {
		if q, err := exec.LookPath(p); err == nil {
			return q
		}
	}
	t.Fatal("no Chromium found (/usr/bin/chromium): install it with apt-get install -y chromium, or name it in CAIRN_CHROMIUM; the browser tests never skip")
	return ""
}

// newBrowser starts a headless Chromium with a fresh profile, no
// background traffic and no sandbox (the tests may run as root in a
// container), for the whole test.
func newBrowser(t *testing.T) context.Context {
	t.Helper()
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(chromiumPath(t)),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck,
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1280, 1000),
	}
	alloc, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancelCtx := chromedp.NewContext(alloc)
	t.Cleanup(func() { cancelCtx(); cancelAlloc() })
	// The first run starts the browser, for as long as ctx lives (no
	// timeout on it: a timeout would stop the browser).
	if err := chromedp.Do(ctx); err != nil {
		t.Fatalf("start Chromium: %v", err)
	}
	return ctx
}

// screenshotDir is where the pages' screenshots go for a person to look
// at: CAIRN_SCREENSHOT_DIR when set (kept), else the test's temp folder.
func screenshotDir(t *testing.T) string {
	if d := os.Getenv("CAIRN_SCREENSHOT_DIR"); d != "" {
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
		return d
	}
	return t.TempDir()
}

// read runs one action that gives a value, within a minute.
func read[T any](t *testing.T, ctx context.Context, a chromedp.Action[T]) T {
	t.Helper()
	c, cancel := context.WithTimeout(ctx, time.Minute)
	defer cancel()
	v, err := chromedp.Run(c, a)
	if err != nil {
		t.Fatalf("browser: %v", err)
	}
	return v
}

// do runs steps, within a minute, and writes a screenshot of the page
// they end on as dir/name.png.
func do(t *testing.T, ctx context.Context, dir, name string, steps ...chromedp.Action[chromedp.Void]) {
	t.Helper()
	c, cancel := context.WithTimeout(ctx, time.Minute)
	defer cancel()
	if err := chromedp.Do(c, steps...); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	png := read(t, ctx, chromedp.FullScreenshot(100))
	p := filepath.Join(dir, name+".png")
	if err := os.WriteFile(p, png, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("screenshot %s", p)
}

// The site in a real browser: search by designation and by alias through
// the form, the mark page's heights, DISTURBED banner and cautions, the
// as-of field changing the height shown, and hostile text in the
// register that runs no script. A screenshot of each page is written.
func TestBrowser(t *testing.T) {
	s := newSite(t)
	ctx := newBrowser(t)
	shots := screenshotDir(t)

	t.Run("search by designation", func(t *testing.T) {
		do(t, ctx, shots, "search-designation",
			chromedp.Navigate(s.srv.URL+"/"),
			chromedp.WaitVisible(chromedp.ID("q")),
			chromedp.SendKeys(chromedp.ID("q"), "TC-0412"),
			chromedp.Submit(chromedp.ID("q")),
			chromedp.WaitVisible(chromedp.CSS("table.marks")))
		text := read(t, ctx, chromedp.Text(chromedp.CSS("table.marks tbody")))
		loc := read(t, ctx, chromedp.Location())
		if !strings.Contains(text, "TC-0412") || !strings.Contains(text, "101.240") || !strings.Contains(loc, "/search?q=TC-0412") {
			t.Errorf("found %q at %s", text, loc)
		}
	})
	t.Run("search by alias", func(t *testing.T) {
		do(t, ctx, shots, "search-alias",
			chromedp.Navigate(s.srv.URL+"/"),
			chromedp.WaitVisible(chromedp.ID("q")),
			chromedp.SendKeys(chromedp.ID("q"), "mere post 7"),
			chromedp.Submit(chromedp.ID("q")),
			chromedp.WaitVisible(chromedp.CSS("table.marks")))
		text := read(t, ctx, chromedp.Text(chromedp.CSS("table.marks tbody")))
		do(t, ctx, shots, "search-alias-followed",
			chromedp.Click(chromedp.CSS("table.marks tbody a")),
			chromedp.WaitVisible(chromedp.CSS("article.sheet")))
		loc := read(t, ctx, chromedp.Location())
		if !strings.Contains(text, "TC-0412") || !strings.Contains(text, "Mere Post 7") || !strings.HasSuffix(loc, "/marks/TC-0412") {
			t.Errorf("found %q, then %s", text, loc)
		}
	})
	t.Run("search near a point", func(t *testing.T) {
		do(t, ctx, shots, "search-near",
			chromedp.Navigate(s.srv.URL+"/"),
			chromedp.WaitVisible(chromedp.ID("lat")),
			chromedp.SendKeys(chromedp.ID("lat"), "41.635"),
			chromedp.SendKeys(chromedp.ID("lon"), "-97.95"),
			chromedp.SetValue(chromedp.ID("radius_m"), "1200"),
			chromedp.Submit(chromedp.ID("lat")),
			chromedp.WaitVisible(chromedp.CSS("table.marks")))
		text := read(t, ctx, chromedp.Text(chromedp.CSS("table.marks tbody")))
		if !strings.Contains(text, "TC-0413") || !strings.Contains(text, "TC-0414") || strings.Contains(text, "TC-0412") || !strings.Contains(text, "DISTURBED") {
			t.Errorf("near 41.635, -97.95: %q", text)
		}
	})
	t.Run("mark page", func(t *testing.T) {
		do(t, ctx, shots, "mark-disturbed",
			chromedp.Navigate(s.srv.URL+"/marks/TC-0413"),
			chromedp.WaitVisible(chromedp.CSS(".banner")))
		banner := read(t, ctx, chromedp.Text(chromedp.CSS(".banner")))
		heights := read(t, ctx, chromedp.Evaluate[string](`[...document.querySelectorAll('article.sheet table')].map(t => t.innerText).join('\n')`))
		cautions := read(t, ctx, chromedp.Text(chromedp.ID("cautions")))
		if !strings.HasPrefix(banner, "DISTURBED") || !strings.Contains(banner, "do not rely on its height") {
			t.Errorf("banner %q", banner)
		}
		if !strings.Contains(heights, "98.765") {
			t.Errorf("heights %q", heights)
		}
		for _, w := range cautionWords {
			if !strings.Contains(cautions, w) {
				t.Errorf("cautions %q lack %q", cautions, w)
			}
		}
	})
	t.Run("as of", func(t *testing.T) {
		heights := chromedp.Evaluate[string](`[...document.querySelectorAll('article.sheet table')].filter(t => t.innerText.includes('as published')).map(t => t.innerText).join('\n')`)
		do(t, ctx, shots, "mark-now",
			chromedp.Navigate(s.srv.URL+"/marks/TC-0412"),
			chromedp.WaitVisible(chromedp.CSS("article.sheet")))
		now := read(t, ctx, heights)
		do(t, ctx, shots, "mark-as-of-2019-06-01",
			chromedp.SetValue(chromedp.ID("as_of"), "2019-06-01"),
			chromedp.Submit(chromedp.ID("as_of")),
			chromedp.WaitVisible(chromedp.CSS(".asof-on")))
		then := read(t, ctx, heights)
		loc := read(t, ctx, chromedp.Location())
		if !strings.Contains(now, "101.240") || !strings.Contains(then, "101.234") || strings.Contains(then, "101.240") ||
			!strings.Contains(loc, "as_of=2019-06-01") {
			t.Errorf("now %q, as of 2019-06-01 %q (%s)", now, then, loc)
		}
	})
	t.Run("hostile text runs no script", func(t *testing.T) {
		for _, p := range []string{"/marks/TC-0414", "/marks/TC-0413", "/collections/marks/items?f=html", "/search?lat=41.64&lon=-97.95&radius_m=10"} {
			do(t, ctx, shots, "hostile"+strings.NewReplacer("/", "-", "?", "-", "=", "-", "&", "-").Replace(p),
				chromedp.Navigate(s.srv.URL+p),
				chromedp.WaitVisible(chromedp.ID("state")))
			title := read(t, ctx, chromedp.Title())
			n := read(t, ctx, chromedp.Evaluate[int](`document.querySelectorAll('script, b').length`))
			if title == "owned" || n != 0 {
				t.Errorf("%s: title %q, %d script or b elements: the register's text ran or became markup", p, title, n)
			}
		}
		do(t, ctx, shots, "hostile-description",
			chromedp.Navigate(s.srv.URL+"/marks/TC-0414"),
			chromedp.WaitVisible(chromedp.CSS("article.sheet")))
		desc := read(t, ctx, chromedp.Evaluate[string](`document.querySelector('article.sheet td.text').textContent`))
		if !strings.Contains(desc, "<script>document.title='owned'</script>") || !strings.Contains(desc, `\u202eevil\u202c`) || strings.Contains(desc, "\u202e") {
			t.Errorf("the description is not shown as written, with its override made visible: %q", desc)
		}
	})
}
