package server

import (
	"context"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"

	"longwave/ingest"
	"longwave/metrics"
)

// viewerState is what the trace viewer shows, read from its chart element
// and its echarts option.
type viewerState struct {
	From      string   `json:"from"`
	Montage   string   `json:"montage"`
	Filtered  string   `json:"filtered"`
	Rows      int      `json:"rows"`
	Series    int      `json:"series"`
	Points    int      `json:"points"`
	Windows   int      `json:"windows"`
	Rejected  []string `json:"rejected"`
	States    []string `json:"states"`
	Labels    []string `json:"labels"`
	Where     string   `json:"where"`
	BackShut  bool     `json:"backShut"`
	NextShut  bool     `json:"nextShut"`
	ScaleName string   `json:"scale"`
}

const viewerJS = `(() => {
	const el = document.getElementById('trace-chart');
	const c = echarts.getInstanceByDom(el);
	const o = c.getOption();
	const rows = Number(el.dataset.rows);
	const win = o.series[rows].markArea.data;
	return {from: el.dataset.from, montage: el.dataset.montage, filtered: el.dataset.filtered, rows: rows,
		series: o.series.length, points: o.series[0].data.length, windows: win.length,
		rejected: win.map(a => a[0].name).filter(n => n),
		states: o.series[rows + 1].markArea.data.map(a => a[0].name),
		labels: o.series.slice(0, rows).map(s => s.name),
		where: document.getElementById('trace-where').textContent,
		backShut: document.getElementById('trace-back').disabled,
		nextShut: document.getElementById('trace-next').disabled,
		scale: o.series[rows + 2].name};
})()`

// browseTraces drives the visit page's trace viewer: paging with the
// keyboard and the buttons, the montage and signal switches. The
// fixture's visits are 150 s with eyes closed 0–60 s and 90–140 s.
func browseTraces(t *testing.T, ctx context.Context, shot func(string)) {
	t.Helper()
	must := func(what string, err error) {
		t.Helper()
		if err != nil {
			t.Fatalf("%s: %v", what, err)
		}
	}
	// wait waits for the viewer to show a page with the given attributes.
	wait := func(what, cond string) viewerState {
		t.Helper()
		_, err := chromedp.Run(ctx, chromedp.Poll[bool](`(() => { const el = document.getElementById('trace-chart');
			return !!el && !el.hasAttribute('data-loading') && `+cond+`; })()`, chromedp.WithPollingTimeout(20*time.Second)))
		must("trace viewer: "+what, err)
		st, err := chromedp.Run(ctx, chromedp.Evaluate[viewerState](viewerJS))
		must("read trace viewer: "+what, err)
		return st
	}
	st := wait("first page", `el.dataset.from === '0'`)
	if st.Montage != "average" || st.Filtered != "1" || st.Rows != 19 || st.Series != 19+3 {
		t.Errorf("first page: %+v, want the 19 channels in the common average, as analysed, with windows, states and a scale bar", st)
	}
	if st.Points != 1250 || st.Labels[0] != "Fp1" || st.Labels[18] != "O2" || !st.BackShut || st.NextShut {
		t.Errorf("first page: %d points in row 1, labels %v, back disabled %v, next disabled %v", st.Points, st.Labels, st.BackShut, st.NextShut)
	}
	if len(st.States) != 1 || st.States[0] != "eyes closed" || st.Windows < 2 || !strings.HasSuffix(st.ScaleName, " µV") {
		t.Errorf("first page: states %v, %d windows, scale %q", st.States, st.Windows, st.ScaleName)
	}
	if !strings.Contains(st.Where, "0–10 s of 150 s") {
		t.Errorf("position reads %q", st.Where)
	}
	shot("visit-traces-first")

	// The arrow keys turn pages from anywhere on the page.
	must("ArrowRight", chromedp.Do(ctx, chromedp.KeyEvent(kb.ArrowRight)))
	wait("after ArrowRight", `el.dataset.from === '10'`)
	must("ArrowRight ×5", chromedp.Do(ctx, chromedp.KeyEvent(kb.ArrowRight), chromedp.Sleep(50*time.Millisecond),
		chromedp.KeyEvent(kb.ArrowRight), chromedp.Sleep(50*time.Millisecond), chromedp.KeyEvent(kb.ArrowRight),
		chromedp.Sleep(50*time.Millisecond), chromedp.KeyEvent(kb.ArrowRight), chromedp.Sleep(50*time.Millisecond),
		chromedp.KeyEvent(kb.ArrowRight)))
	st = wait("at 60 s", `el.dataset.from === '60'`)
	if len(st.States) != 1 || st.States[0] != "eyes open" {
		t.Errorf("60–70 s shows states %v, want eyes open", st.States)
	}
	must("ArrowLeft", chromedp.Do(ctx, chromedp.KeyEvent(kb.ArrowLeft)))
	st = wait("after ArrowLeft", `el.dataset.from === '50'`)
	if len(st.States) != 1 || st.States[0] != "eyes closed" {
		t.Errorf("50–60 s shows states %v, want eyes closed", st.States)
	}
	// End and Home inside the viewer; End stops at the last page.
	must("End", chromedp.Do(ctx, chromedp.Focus(chromedp.ID("trace-chart")), chromedp.KeyEvent(kb.End)))
	st = wait("after End", `el.dataset.from === '140'`)
	if !st.NextShut || st.BackShut {
		t.Errorf("last page: next disabled %v, back disabled %v", st.NextShut, st.BackShut)
	}
	must("ArrowRight past the end", chromedp.Do(ctx, chromedp.KeyEvent(kb.ArrowRight), chromedp.Sleep(300*time.Millisecond)))
	wait("still last", `el.dataset.from === '140'`)
	must("Home", chromedp.Do(ctx, chromedp.KeyEvent(kb.Home)))
	wait("after Home", `el.dataset.from === '0'`)
	must("Later button", chromedp.Do(ctx, chromedp.Click(chromedp.ID("trace-next"))))
	wait("after Later", `el.dataset.from === '10'`)

	// The montage switch.
	choose := func(id, value string) {
		t.Helper()
		must("choose "+id, chromedp.Do(ctx, chromedp.Evaluate[chromedp.Void](`(() => { const s = document.getElementById('`+id+`');
			s.value = '`+value+`'; s.dispatchEvent(new Event('change')); })()`)))
	}
	choose("trace-montage", "bipolar")
	st = wait("bipolar", `el.dataset.montage === 'bipolar'`)
	if st.Rows != len(metrics.BipolarPairs) || st.Labels[0] != "Fp1–F7" || st.From != "10" {
		t.Errorf("bipolar page: %d rows, labels %v, from %s", st.Rows, st.Labels, st.From)
	}
	if !strings.Contains(st.Where, "longitudinal bipolar") {
		t.Errorf("position reads %q", st.Where)
	}
	shot("visit-traces-bipolar")

	// The signal switch: as recorded (250 Hz reduced to 2,000 points a page).
	choose("trace-filtered", "0")
	st = wait("as recorded", `el.dataset.filtered === '0'`)
	if st.Montage != "bipolar" || st.Points != 2000 || !strings.Contains(st.Where, "as recorded") {
		t.Errorf("as recorded: %+v", st)
	}
	choose("trace-montage", "average")
	st = wait("recorded average", `el.dataset.montage === 'average' && el.dataset.filtered === '0'`)
	shot("visit-traces-recorded")
	choose("trace-filtered", "1")
	wait("filtered again", `el.dataset.filtered === '1' && el.dataset.montage === 'average'`)

	// Page through the whole recording: every rejected window carries its
	// rule in words, listed under the chart as well.
	rejected := map[string]bool{}
	for from := 10; from < 150; from += 10 {
		st = wait("paging", `el.dataset.from === '`+strconv.Itoa(from)+`'`)
		for _, r := range st.Rejected {
			rejected[r] = true
		}
		if len(st.Rejected) > 0 {
			list, err := chromedp.Run(ctx, chromedp.Evaluate[string](`document.getElementById('trace-rejected').innerText`))
			must("read rejected list", err)
			for _, r := range st.Rejected {
				if !strings.Contains(list, r) {
					t.Errorf("rejected window %q is in the chart but not in the list %q", r, list)
				}
			}
			shot("visit-traces-rejected-" + strconv.Itoa(from))
		}
		if from < 140 {
			must("next page", chromedp.Do(ctx, chromedp.KeyEvent(kb.ArrowRight)))
		}
	}
	// A page is linked by the address: a reload there opens it again.
	loc, err := chromedp.Run(ctx, chromedp.Location())
	must("location", err)
	page, _, _ := strings.Cut(loc, "#")
	open := func(hash string) {
		t.Helper()
		must("open "+hash, chromedp.Do(ctx, chromedp.Navigate("about:blank"), chromedp.Navigate(page+hash)))
	}
	open("#from=60&montage=bipolar&filtered=0")
	st = wait("linked page", `el.dataset.from === '60' && el.dataset.montage === 'bipolar' && el.dataset.filtered === '0'`)
	if st.Rows != len(metrics.BipolarPairs) {
		t.Errorf("linked page: %+v", st)
	}
	open("#from=900")
	wait("linked page past the end", `el.dataset.from === '0'`)
	var seen []string
	for r := range rejected {
		seen = append(seen, r)
	}
	sort.Strings(seen)
	t.Logf("rejected windows read: %q", seen)
}

// screenKeys are the keys of rules, markers, regions, states and period
// sources that must never reach a screen's visible text.
func screenKeys() []string {
	keys := []string{}
	for k := range ruleWords {
		keys = append(keys, k)
	}
	for k := range markerTitles {
		keys = append(keys, k)
	}
	for k := range regionNames {
		keys = append(keys, k)
	}
	keys = append(keys, string(metrics.NotComparable), string(ingest.FromRuns))
	return keys
}

// visibleText is a screen's visible text and the text its charts draw on
// canvas (series names, marked areas and points, tooltip lines).
const visibleTextJS = `(() => {
	const out = [document.body.innerText];
	document.querySelectorAll('[data-chart], #trace-chart').forEach(el => {
		const c = echarts.getInstanceByDom(el);
		const o = c && c.getOption();
		if (!o) return;
		for (const s of o.series || []) {
			out.push(s.name || '');
			for (const a of (s.markArea && s.markArea.data) || []) out.push(a[0].name || '');
			for (const p of (s.markPoint && s.markPoint.data) || []) out.push(p.name || '', String(p.value || ''));
			for (const d of s.data || []) if (d && d.tip) out.push(d.tip.join('\n'));
		}
	});
	return out.join('\n');
})()`

// checkWordsOnScreen fails when a snake_case key shows on the current
// screen.
func checkWordsOnScreen(t *testing.T, ctx context.Context, screen string) {
	t.Helper()
	text, err := chromedp.Run(ctx, chromedp.Evaluate[string](visibleTextJS))
	if err != nil {
		t.Errorf("%s: read visible text: %v", screen, err)
		return
	}
	if bad := keysIn(text); len(bad) > 0 {
		t.Errorf("%s shows keys to people: %q", screen, bad)
	}
}

// keysIn lists the snake_case keys in text.
func keysIn(text string) []string {
	found := map[string]bool{}
	for _, m := range snakeKey.FindAllString(text, -1) {
		found[m] = true
	}
	for _, k := range screenKeys() {
		if strings.Contains(k, "_") && regexp.MustCompile(`\b`+regexp.QuoteMeta(k)+`\b`).MatchString(text) {
			found[k] = true
		}
	}
	var out []string
	for k := range found {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
