package server

import (
	"context"
	"fmt"
	"net/url"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/cdproto/browser"
	"github.com/chromedp/cdproto/emulation"
	"github.com/chromedp/cdproto/fetch"
	"github.com/chromedp/cdproto/network"
	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"

	"longwave/ingest/testenv"
	"longwave/server/store"
)

// browserPath finds Chromium: $LONGWAVE_BROWSER, else /usr/bin/chromium
// (Debian's package, which .ci/run installs), else chromium on PATH.
func browserPath(t *testing.T) string {
	t.Helper()
	if p := os.Getenv("LONGWAVE_BROWSER"); p != "" {
		if _, err := os.Stat(p); err != nil {
			t.Fatalf("LONGWAVE_BROWSER=%s: %v", p, err)
		}
		return p
	}
	for _, p := range []string{"/usr/bin/chromium", "/usr/bin/chromium-browser"} {
		if _, err := os.Stat(p); err == nil {
			return p
		}
	}
	if p, err := exec.LookPath("chromium"); err == nil {
		return p
	}
	testenv.Missing(t, testenv.RequireBrowserVar, "no Chromium found and LONGWAVE_BROWSER unset: the browser test needs Debian's chromium (apt-get install chromium)")
	return ""
}

// browserWatch records what must never happen during the browser test:
// requests to another host, dialogs (alert/confirm/prompt: a script from
// the hostile fixtures ran), uncaught exceptions and CSP violations.
type browserWatch struct {
	mu         sync.Mutex
	external   []string
	dialogs    []string
	exceptions []string
	csp        []string
	errors     []string // console and browser-log entries of level error
	requests   int
}

func (w *browserWatch) add(list *[]string, s string) {
	w.mu.Lock()
	*list = append(*list, s)
	w.mu.Unlock()
}

// loopback reports whether a request URL stays on this machine.
func loopback(raw string) bool {
	u, err := url.Parse(raw)
	if err != nil {
		return false
	}
	switch u.Scheme {
	case "data", "blob", "about":
		return true
	case "http", "https", "ws", "wss":
		h := u.Hostname()
		return h == "127.0.0.1" || h == "localhost" || h == "::1"
	}
	return false
}

// TestBrowser drives real headless Chromium through the screens with every
// non-loopback request blocked: sign in, cohort, overdue filter, a course
// whose every chart draws its series and band, a non-comparable visit and
// its reason, spectra and traces, an upload that appears on the course, the
// CSV download, and the hostile fixtures, with no dialog ever opening.
func TestBrowser(t *testing.T) {
	exe := browserPath(t)
	if testing.Short() && os.Getenv(testenv.RequireBrowserVar) != "1" {
		t.Skip("browser test skipped with -short")
	}
	e := newEnv(t, "", Config{})
	for _, v := range fixtureVisits() {
		e.ingestVisit(v)
	}
	shots, err := os.MkdirTemp("", "longwave-screens-")
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("screenshots in %s", shots)
	downloads := t.TempDir()

	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(exe),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1400, 900),
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("disable-domain-reliability", true),
		chromedp.Flag("no-pings", true),
		// Belt and braces besides the interception below: no name
		// resolves, and any proxied request goes to a closed port.
		chromedp.Flag("host-resolver-rules", "MAP * ~NOTFOUND, EXCLUDE 127.0.0.1"),
		chromedp.Flag("proxy-server", "http://127.0.0.1:9"),
	)
	allocCtx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	defer cancelAlloc()
	ctx, cancel := chromedp.NewContext(allocCtx)
	defer cancel()
	if err := chromedp.Do(ctx); err != nil {
		t.Fatalf("start Chromium: %v", err)
	}
	// The screens are judged at 1400 × 900 CSS pixels (issue 11): the
	// window's size leaves less to the page, so the viewport is set.
	if err := chromedp.Do(ctx, func(ctx context.Context, tg *chromedp.Target) (chromedp.Void, error) {
		_, err := chromedp.Call(ctx, emulation.SetDeviceMetricsOverride, emulation.SetDeviceMetricsOverrideParams{Width: 1400, Height: 900, DeviceScaleFactor: 1})
		return chromedp.Void{}, err
	}); err != nil {
		t.Fatalf("viewport: %v", err)
	}
	// The browser lives on ctx; the steps share a deadline of their own.
	ctx, cancelTime := context.WithTimeout(ctx, 2*time.Minute)
	defer cancelTime()

	w := &browserWatch{}
	paused := chromedp.Events(ctx, fetch.RequestPaused)
	dialogs := chromedp.Events(ctx, page.JavascriptDialogOpening)
	console := chromedp.Console(ctx)
	if _, err := chromedp.Call(ctx, fetch.Enable, fetch.EnableParams{}); err != nil {
		t.Fatalf("fetch.Enable: %v", err)
	}
	go func() {
		for ev, err := range paused {
			if err != nil {
				return
			}
			w.mu.Lock()
			w.requests++
			w.mu.Unlock()
			if loopback(ev.Request.URL) {
				chromedp.Call(ctx, fetch.ContinueRequest, fetch.ContinueRequestParams{RequestID: ev.RequestID})
				continue
			}
			w.add(&w.external, ev.Request.URL)
			chromedp.Call(ctx, fetch.FailRequest, fetch.FailRequestParams{RequestID: ev.RequestID, ErrorReason: network.ErrorReasonBlockedByClient})
		}
	}()
	go func() {
		for ev, err := range dialogs {
			if err != nil {
				return
			}
			w.add(&w.dialogs, string(ev.Type)+": "+ev.Message)
			chromedp.Call(ctx, page.HandleJavaScriptDialog, page.HandleJavaScriptDialogParams{Accept: false})
		}
	}()
	go func() {
		for m, err := range console {
			if err != nil {
				return
			}
			text := m.String()
			switch {
			case m.IsException():
				w.add(&w.exceptions, text)
			case strings.Contains(text, "Content Security Policy") || strings.Contains(text, "Refused to"):
				w.add(&w.csp, text)
			case m.Type == "error" && strings.HasSuffix(m.URL, "/favicon.ico"):
				// Chromium asks every host for /favicon.ico; longwave has
				// none, and the 404 is logged as an error.
			case m.Type == "error":
				w.add(&w.errors, text+" ("+m.URL+")")
			}
		}
	}()
	if _, err := chromedp.CallBrowser(ctx, browser.SetDownloadBehavior, browser.SetDownloadBehaviorParams{
		Behavior: browser.SetDownloadBehaviorBehaviorAllow, DownloadPath: downloads}); err != nil {
		t.Fatalf("download behaviour: %v", err)
	}

	base := e.http.URL
	step := 0
	shot := func(name string) {
		t.Helper()
		step++
		buf, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
		if strings.HasPrefix(name, "top-") {
			buf, err = chromedp.Run(ctx, chromedp.CaptureScreenshot())
		}
		if err != nil {
			t.Errorf("screenshot %s: %v", name, err)
			return
		}
		p := filepath.Join(shots, fmt.Sprintf("%02d-%s.png", step, name))
		if err := os.WriteFile(p, buf, 0o644); err != nil {
			t.Error(err)
		}
	}
	must := func(what string, err error) {
		t.Helper()
		if err != nil {
			t.Fatalf("%s: %v", what, err)
		}
	}
	loadAfter := func(trigger chromedp.Action[chromedp.Void]) error {
		_, err := chromedp.Run(ctx, chromedp.WaitEvent(page.LoadEventFired, nil, trigger))
		return err
	}
	// follow opens the link a selector finds, as a click on it would.
	follow := func(css string) {
		t.Helper()
		href, err := chromedp.Run(ctx, chromedp.Evaluate[string](`document.querySelector(`+"`"+css+"`"+`).getAttribute('href')`))
		if err != nil || href == "" {
			t.Fatalf("link %s: %q, %v", css, href, err)
		}
		must("follow "+href, chromedp.Do(ctx, chromedp.Navigate(base+href)))
	}

	// 1. Sign in.
	must("open sign-in", chromedp.Do(ctx, chromedp.Navigate(base+"/signin")))
	must("fill sign-in", chromedp.Do(ctx,
		chromedp.SendKeys(chromedp.CSS(`input[name=name]`), adminName),
		chromedp.SendKeys(chromedp.CSS(`input[name=password]`), testPassword)))
	shot("sign-in")
	must("submit sign-in", loadAfter(chromedp.Click(chromedp.CSS(`form button[type=submit]`))))
	loc, _ := chromedp.Run(ctx, chromedp.Location())
	if !strings.HasSuffix(loc, "/patients") {
		t.Fatalf("after sign-in at %s, want /patients", loc)
	}

	// 2. Cohort, then the overdue filter.
	must("open cohort", chromedp.Do(ctx, chromedp.Navigate(base+"/cohort")))
	rows, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll('#cohort tbody tr').length`))
	must("count cohort rows", err)
	if rows != 2 {
		t.Errorf("cohort shows %d rows, want 2", rows)
	}
	shot("cohort")
	checkWordsOnScreen(t, ctx, "cohort")
	checkCohortVerdicts(t, ctx, base, shot)
	must("tick overdue", chromedp.Do(ctx, chromedp.Click(chromedp.CSS(`input[name=overdue]`))))
	must("filter", loadAfter(chromedp.Click(chromedp.CSS(`#cohort-filters button[type=submit]`))))
	loc, _ = chromedp.Run(ctx, chromedp.Location())
	if !strings.Contains(loc, "overdue=1") {
		t.Errorf("filtered cohort at %s, want overdue=1 in the query", loc)
	}
	late, err := chromedp.Run(ctx, chromedp.Evaluate[[]string](`Array.from(document.querySelectorAll('#cohort tbody tr')).map(r => r.className)`))
	must("read filtered rows", err)
	for _, c := range late {
		if c != "late" {
			t.Errorf("overdue filter shows a row of class %q", c)
		}
	}
	shot("cohort-overdue")

	// 3. A patient's course: every chart has drawn its series, and each
	// chart with a reference band has its markArea.
	follow(`#cohort a[href="/patients/LW-0101"]`)
	type chartState struct {
		Key      string `json:"key"`
		Drawn    bool   `json:"drawn"`
		Band     bool   `json:"band"`
		Canvas   bool   `json:"canvas"`
		Series   int    `json:"series"`
		Points   []int  `json:"points"`
		MarkArea int    `json:"markArea"`
	}
	// Charts inside a closed <details> are drawn when it opens: these
	// helpers look at the charts on show.
	const chartsJS = `Array.from(document.querySelectorAll('[data-chart]')).filter(el => !el.closest('details:not([open])')).map(el => {
		const c = echarts.getInstanceByDom(el);
		if (!c) return {key: el.dataset.chart, drawn: false};
		const o = c.getOption();
		let ma = 0;
		for (const s of o.series) { if (s.markArea && s.markArea.data) ma += s.markArea.data.length; }
		return {key: el.dataset.chart, drawn: true, band: el.dataset.band === 'yes', canvas: !!el.querySelector('canvas'),
			series: o.series.length, points: o.series.map(s => (s.data || []).length), markArea: ma};
	})`
	waitCharts := func() []chartState {
		t.Helper()
		_, err := chromedp.Run(ctx, chromedp.Poll[bool](`document.querySelectorAll('[data-chart]').length > 0 &&
			Array.from(document.querySelectorAll('[data-chart]')).filter(el => !el.closest('details:not([open])')).every(el => el.dataset.drawn === 'yes')`,
			chromedp.WithPollingTimeout(20*time.Second)))
		must("charts drawn", err)
		cs, err := chromedp.Run(ctx, chromedp.Evaluate[[]chartState](chartsJS))
		must("read charts", err)
		return cs
	}
	charts := waitCharts()
	checkOverview(t, ctx, shot)
	openGroups(t, ctx)
	charts = waitCharts()
	if len(charts) < 12 {
		t.Errorf("course shows %d charts with its groups open, want the overview's, the spectra and the groups' (12 or more)", len(charts))
	}
	checkNoRepeats(t, ctx)
	must("scroll to the groups", chromedp.Do(ctx, chromedp.Evaluate[chromedp.Void](`document.querySelector('details.group').scrollIntoView()`)))
	shot("top-course-groups")
	must("scroll to the notes", chromedp.Do(ctx, chromedp.Evaluate[chromedp.Void](`document.getElementById('visits').scrollIntoView()`)))
	shot("top-course-notes")
	must("scroll back to the top", chromedp.Do(ctx, chromedp.Evaluate[chromedp.Void](`window.scrollTo(0, 0)`)))
	bands := 0
	firstPoints := 0
	for i, c := range charts {
		if !c.Drawn || !c.Canvas || c.Series < 2 {
			t.Errorf("chart %s: drawn %v canvas %v series %d, want drawn with 2 series or more", c.Key, c.Drawn, c.Canvas, c.Series)
		}
		if len(c.Points) == 2 && c.Points[0]+c.Points[1] == 0 {
			t.Errorf("chart %s has no points", c.Key)
		}
		if c.Band {
			bands++
			if c.MarkArea == 0 {
				t.Errorf("chart %s has a reference band but no markArea in its option", c.Key)
			}
		}
		if i == 0 && len(c.Points) == 2 {
			firstPoints = c.Points[0] + c.Points[1]
		}
	}
	if bands == 0 {
		t.Errorf("no chart of the course has a reference band; the posterior dominant rhythm has one in the literature set")
	}
	if charts[0].Points[1] == 0 {
		t.Errorf("the first chart has no hollow (not comparable) point; the 15 Hz low-pass visit should be one")
	}
	// The hollow point's tooltip names the reason (escaped by charts.js).
	tip, err := chromedp.Run(ctx, chromedp.Evaluate[string](`(() => {
		const el = document.querySelector('[data-chart="m0"]');
		echarts.getInstanceByDom(el).dispatchAction({type: 'showTip', seriesIndex: 1, dataIndex: 0});
		return new Promise(ok => setTimeout(() => ok(el.innerText), 300));
	})()`, chromedp.EvalAwaitPromise))
	must("show tooltip", err)
	if !strings.Contains(tip, "not comparable: ") || !strings.Contains(tip, "age 73.") {
		t.Errorf("tooltip of the hollow point reads %q, want the age and the reason", tip)
	}
	shot("top-course-tooltip")
	checkFits(t, ctx, "course with a tooltip")
	checkWordsOnScreen(t, ctx, "course with a tooltip")
	shot("course")
	must("print media", chromedp.Do(ctx, func(ctx context.Context, tg *chromedp.Target) (chromedp.Void, error) {
		_, err := chromedp.Call(ctx, emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{Media: "print"})
		return chromedp.Void{}, err
	}, chromedp.Evaluate[chromedp.Void](`window.dispatchEvent(new Event('beforeprint'))`), chromedp.Sleep(300*time.Millisecond)))
	shot("course-print")
	must("screen media", chromedp.Do(ctx, func(ctx context.Context, tg *chromedp.Target) (chromedp.Void, error) {
		_, err := chromedp.Call(ctx, emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{Media: ""})
		return chromedp.Void{}, err
	}))

	// The one-page summary for the clinic letter.
	checkSummary(t, ctx, base, shot)
	must("back to the course", chromedp.Do(ctx, chromedp.Navigate(base+"/patients/LW-0101")))
	waitCharts()

	// 4. The non-comparable visit and its reason.
	// The low-pass visit is the last of the course; under settings with
	// intervals, markers of short synthetic visits before it may be set
	// apart too (their rows are marked apart as well).
	follow(`#visits tr.apart:last-child a`)
	if info, err := chromedp.Run(ctx, chromedp.Evaluate[string](`location.href + ' | ' + document.title + ' | ' + document.body.innerText.slice(0, 300)`)); err == nil {
		t.Logf("at %s", info)
	}
	verdict, err := chromedp.Run(ctx, chromedp.Evaluate[string](`document.getElementById('verdict').textContent`))
	must("read verdict", err)
	// The low-pass flag names the markers it affects (those above 7.5 Hz).
	if !strings.HasPrefix(verdict, "Not comparable for some markers:") || !strings.Contains(verdict, "low-pass") {
		t.Errorf("non-comparable visit says %q, want the low-pass reason", verdict)
	}
	visitCharts := waitCharts()
	checkWordsOnScreen(t, ctx, "visit not comparable")
	shot("visit-not-comparable")
	shot("top-visit-not-comparable")

	// 5. A comparable visit's spectra and traces.
	must("back to course", chromedp.Do(ctx, chromedp.Navigate(base+"/patients/LW-0101")))
	// The first visit: comparable for every marker whose interval (under
	// settings with intervals) is narrow enough; its spectra and traces
	// show either way.
	follow(`#visits tbody tr:first-child a`)
	visitCharts = waitCharts()
	spectra := 0
	for _, c := range visitCharts {
		if strings.HasPrefix(c.Key, "spectrum-") {
			spectra++
			if c.Series != 2 || c.Points[0] < 50 {
				t.Errorf("spectrum %s: %d series, %v points; want power and fit", c.Key, c.Series, c.Points)
			}
		}
	}
	if spectra != 2 {
		t.Errorf("visit shows %d spectra, want 2 (closed, open)", spectra)
	}
	peak, err := chromedp.Run(ctx, chromedp.Evaluate[int](`(() => { const o = echarts.getInstanceByDom(document.querySelector('[data-chart="spectrum-closed"]')).getOption(); return (o.series[0].markPoint && o.series[0].markPoint.data || []).length; })()`))
	must("read peak mark", err)
	if peak != 1 {
		t.Errorf("eyes-closed spectrum marks %d peaks, want 1", peak)
	}
	shot("visit-spectra-traces")
	checkWordsOnScreen(t, ctx, "comparable visit")
	browseTraces(t, ctx, shot)
	checkWordsOnScreen(t, ctx, "comparable visit after paging")

	// 6. Upload a recording and see it on the course.
	rec := filepath.Join(t.TempDir(), "visit-2025.edf")
	must("write recording", os.WriteFile(rec, synthRecording(t, 77), 0o600))
	must("open upload", chromedp.Do(ctx, chromedp.Navigate(base+"/add?patient=LW-0101")))
	must("fill upload", chromedp.Do(ctx,
		chromedp.SetValue(chromedp.CSS(`input[name=date]`), "2025-05-26"),
		chromedp.SetUploadFiles(chromedp.CSS(`input[name=file]`), []string{rec}),
		chromedp.Click(chromedp.CSS(`#upload-form button[type=submit]`)),
		chromedp.WaitVisible(chromedp.ID("upload-done")),
	))
	done, err := chromedp.Run(ctx, chromedp.Evaluate[string](`document.getElementById('upload-done').textContent`))
	must("read upload result", err)
	if !strings.Contains(done, "LW-0101") || !strings.Contains(done, "2025-05-26") {
		t.Errorf("upload result says %q", done)
	}
	progress, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.getElementById('upload-progress').value`))
	must("read progress", err)
	if progress != 100 {
		t.Errorf("progress bar at %d after the upload, want 100", progress)
	}
	shot("upload-done")
	checkWordsOnScreen(t, ctx, "upload result")
	follow(`#upload-done a[href="/patients/LW-0101"]`)
	listed, err := chromedp.Run(ctx, chromedp.Evaluate[bool](`document.getElementById('visits').textContent.includes('2025-05-26')`))
	must("read visits", err)
	if !listed {
		t.Errorf("the uploaded visit 2025-05-26 is not in the course's visits table")
	}
	after := waitCharts()
	if got := after[0].Points[0] + after[0].Points[1]; got != firstPoints+1 {
		t.Errorf("first chart has %d points after the upload, want %d", got, firstPoints+1)
	}
	shot("course-after-upload")

	// 7. Download the CSV from the cohort screen.
	must("open cohort for csv", chromedp.Do(ctx, chromedp.Navigate(base+"/cohort")))
	must("click csv", chromedp.Do(ctx, chromedp.Click(chromedp.ID("csv-link"))))
	var csvText string
	for deadline := time.Now().Add(15 * time.Second); time.Now().Before(deadline) && csvText == ""; time.Sleep(200 * time.Millisecond) {
		matches, _ := filepath.Glob(filepath.Join(downloads, "*.csv"))
		for _, m := range matches {
			if b, err := os.ReadFile(m); err == nil && len(b) > 0 {
				csvText = string(b)
			}
		}
	}
	if !strings.HasPrefix(csvText, "code,") || !strings.Contains(csvText, "LW-0101") {
		t.Errorf("downloaded CSV %q, want the follow-up rows", csvText[:min(len(csvText), 120)])
	}

	// 8. The hostile fixtures: their course and visit draw, and nothing runs.
	must("open hostile course", chromedp.Do(ctx, chromedp.Navigate(base+courseURL(xssCode))))
	waitCharts()
	openGroups(t, ctx)
	waitCharts()
	shot("course-hostile")
	checkWordsOnScreen(t, ctx, "hostile course")
	shot("top-course-hostile")
	follow(`#visits tbody a`)
	waitCharts()
	_, err = chromedp.Run(ctx, chromedp.Poll[bool](`document.getElementById('trace-chart').dataset.from === '0'`,
		chromedp.WithPollingTimeout(20*time.Second)))
	must("hostile visit traces", err)
	shot("visit-hostile")
	checkWordsOnScreen(t, ctx, "hostile visit")
	for _, p := range []string{"/patients", "/sources", "/users", "/password", summaryURL(xssCode)} {
		must("open "+p, chromedp.Do(ctx, chromedp.Navigate(base+p)))
		shot(strings.ReplaceAll(strings.TrimPrefix(p, "/"), "/", "-"))
		checkWordsOnScreen(t, ctx, p)
	}
	// The users screen's row form: a reset of the clinician's password
	// shows the new one once.
	must("open users", chromedp.Do(ctx, chromedp.Navigate(base+"/users")))
	must("reset a password", loadAfter(chromedp.Click(chromedp.CSS(`form[action="/users/`+clinicianName+`/reset"] button`))))
	shown, err := chromedp.Run(ctx, chromedp.Evaluate[string](`(document.querySelector('#new-password .secret') || {}).textContent || ''`))
	must("read the shown password", err)
	if len(shown) != store.GeneratedPasswordLength {
		t.Errorf("after a reset the users screen shows %q, want a %d-character password", shown, store.GeneratedPasswordLength)
	}
	shot("users-reset")
	checkWordsOnScreen(t, ctx, "users after a reset")
	must("settle", chromedp.Do(ctx, chromedp.Sleep(500*time.Millisecond)))

	// Probes: the watchers must see a dialog and a request to another host
	// when there is one (so that their silence above means something).
	w.mu.Lock()
	seenDialogs, seenExternal := len(w.dialogs), len(w.external)
	consoleErrors := append([]string(nil), w.errors...) // the probes below log errors of their own
	w.mu.Unlock()
	must("dialog probe", chromedp.Do(ctx, chromedp.Evaluate[chromedp.Void](`setTimeout(() => alert('probe'), 0)`), chromedp.Sleep(500*time.Millisecond)))
	// 192.0.2.1 is TEST-NET-1 (RFC 5737): never a real host.
	_ = chromedp.Do(ctx, chromedp.Navigate("http://192.0.2.1/probe"))
	must("settle probes", chromedp.Do(ctx, chromedp.Sleep(300*time.Millisecond)))
	w.mu.Lock()
	defer w.mu.Unlock()
	if len(w.dialogs) != seenDialogs+1 || len(w.external) != seenExternal+1 {
		t.Errorf("probes not seen: dialogs %v, external %v", w.dialogs, w.external)
	} else {
		w.dialogs, w.external = w.dialogs[:seenDialogs], w.external[:seenExternal]
	}
	if w.requests < 20 {
		t.Errorf("only %d requests passed the interception: it did not watch the tab", w.requests)
	}
	for _, list := range []struct {
		name  string
		items []string
	}{{"request to another host", w.external}, {"dialog", w.dialogs}, {"uncaught exception", w.exceptions}, {"CSP violation", w.csp}, {"console error", consoleErrors}} {
		for _, it := range list.items {
			t.Errorf("%s: %s", list.name, it)
		}
	}
	t.Logf("browser: %d requests, all loopback; %d screenshots", w.requests, step)
}
