package server

import (
	"context"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"
)

// Browser checks of the course overview, the spectra overlay and its
// switch, the cohort's verdict column and the one-page summary (issue 11,
// points 1, 2, 5, 7 and 8). They run inside TestBrowser, on its tab.

// overviewState is what the first screen of a course shows.
type overviewState struct {
	Height    float64  `json:"height"`
	Cards     int      `json:"cards"`
	CardsIn   int      `json:"cardsIn"`
	Changes   []string `json:"changes"`
	Lines     []int    `json:"lines"`
	StripIn   bool     `json:"stripIn"`
	Chips     int      `json:"chips"`
	ChipsText []string `json:"chipsText"`
	DueIn     bool     `json:"dueIn"`
	Due       string   `json:"due"`
	Groups    int      `json:"groups"`
	Open      int      `json:"open"`
	Undrawn   int      `json:"undrawn"`
	SideBy    bool     `json:"sideBy"`
}

const overviewJS = `(() => {
	const h = window.innerHeight;
	const inView = el => !!el && el.getBoundingClientRect().bottom <= h && el.getBoundingClientRect().top >= 0;
	const cards = Array.from(document.querySelectorAll('#overview .headline'));
	const tops = cards.map(c => Math.round(c.getBoundingClientRect().top));
	const groups = Array.from(document.querySelectorAll('details.group'));
	return {height: h, cards: cards.length, cardsIn: cards.filter(c => inView(c.querySelector('.lines')) && inView(c.querySelector('.chart'))).length,
		changes: cards.map(c => (c.querySelector('.change') || {}).textContent || ''),
		lines: cards.map(c => c.querySelectorAll('.lines li').length),
		stripIn: inView(document.querySelector('#visit-strip ol')),
		chips: document.querySelectorAll('#visit-strip .chip').length,
		chipsText: Array.from(document.querySelectorAll('#visit-strip .chip')).map(c => c.innerText.replace(/\s+/g, ' ')),
		dueIn: inView(document.getElementById('next-due')), due: document.getElementById('next-due').textContent,
		groups: groups.length, open: groups.filter(g => g.open).length,
		undrawn: groups.reduce((n, g) => n + Array.from(g.querySelectorAll('[data-chart]')).filter(el => el.dataset.drawn !== 'yes').length, 0),
		sideBy: tops.length === 4 && tops.every(t => t === tops[0])};
})()`

// checkOverview checks the course's first screen at 1400 × 900: the four
// headline markers side by side with their change in words and figures,
// the strip of visits and the next due date all in view, the other markers
// in closed groups not yet drawn; then the spectra overlay and its switch.
func checkOverview(t *testing.T, ctx context.Context, shot func(string)) {
	t.Helper()
	must := func(what string, err error) {
		t.Helper()
		if err != nil {
			t.Fatalf("%s: %v", what, err)
		}
	}
	must("scroll to top", chromedp.Do(ctx, chromedp.Evaluate[chromedp.Void](`window.scrollTo(0, 0)`)))
	o, err := chromedp.Run(ctx, chromedp.Evaluate[overviewState](overviewJS))
	must("read overview", err)
	if o.Height != 900 {
		t.Errorf("window is %v px high, want 900", o.Height)
	}
	if o.Cards != 4 || o.CardsIn != 4 || !o.SideBy {
		t.Errorf("overview: %d headline cards, %d wholly in the first screen, side by side %v; want 4, 4, true", o.Cards, o.CardsIn, o.SideBy)
	}
	for i, c := range o.Changes {
		if strings.TrimSpace(c) == "" || o.Lines[i] < 2 {
			t.Errorf("headline card %d: change %q with %d lines of figures, want words and 2 lines or more", i, c, o.Lines[i])
		}
	}
	// The fixture has no controls: the change is the slope, and the lines
	// say why there is no verdict.
	if !strings.Contains(o.Changes[0], "Lower") && !strings.Contains(o.Changes[0], "No clear change") {
		t.Errorf("PDR card says %q, want its direction in words", o.Changes[0])
	}
	if !o.StripIn || o.Chips != 4 || !o.DueIn || !strings.Contains(o.Due, "Next visit due") {
		t.Errorf("strip in view %v with %d visits, next due in view %v (%q); want 4 visits and the due date on the first screen", o.StripIn, o.Chips, o.DueIn, o.Due)
	}
	apartChip := false
	for _, c := range o.ChipsText {
		if strings.Contains(c, "not comparable") && strings.Contains(c, "low-pass") {
			apartChip = true
		}
	}
	if !apartChip {
		t.Errorf("strip %q: want the low-pass visit as not comparable, with its reason", o.ChipsText)
	}
	if o.Groups < 4 || o.Open != 0 || o.Undrawn == 0 {
		t.Errorf("%d groups, %d open, %d charts undrawn; want 4 or more groups, closed, their charts not yet drawn", o.Groups, o.Open, o.Undrawn)
	}
	noVerdict, err := chromedp.Run(ctx, chromedp.Evaluate[string](`(() => { const el = document.getElementById('no-verdict');
		return el && el.getBoundingClientRect().bottom <= window.innerHeight ? el.textContent : ''; })()`))
	if err != nil || !strings.Contains(noVerdict, "no control model") {
		t.Errorf("overview says %q (%v), want once, in view, why no marker has a verdict (the fixture has no controls)", noVerdict, err)
	}
	shot("top-course-overview")
	checkWordsOnScreen(t, ctx, "course overview")

	// The overlay: every visit's spectrum, the one apart hidden until the
	// switch shows it, grey and dashed.
	type overlay struct {
		Series   []string        `json:"series"`
		Colours  []string        `json:"colours"`
		Types    []string        `json:"types"`
		Selected map[string]bool `json:"selected"`
		Checked  bool            `json:"checked"`
	}
	const overlayJS = `(() => {
		const c = echarts.getInstanceByDom(document.querySelector('[data-chart="spectra"]'));
		const o = c.getOption();
		return {series: o.series.map(s => s.name), colours: o.series.map(s => s.lineStyle.color), types: o.series.map(s => s.lineStyle.type),
			selected: o.legend[0].selected || {}, checked: document.getElementById('show-apart').checked};
	})()`
	ov, err := chromedp.Run(ctx, chromedp.Evaluate[overlay](overlayJS))
	must("read overlay", err)
	const apart = "2023-09-04 (not comparable)"
	if len(ov.Series) != 4 || ov.Series[0] != "2021-03-01" || ov.Series[3] != apart {
		t.Fatalf("overlay series %q, want the 4 visits by date, the low-pass one apart", ov.Series)
	}
	if ov.Colours[0] == ov.Colours[1] || ov.Colours[1] == ov.Colours[2] || ov.Types[3] != "dashed" || ov.Types[0] != "solid" {
		t.Errorf("overlay colours %q, line types %q; want a ramp over the comparable visits and the one apart dashed", ov.Colours, ov.Types)
	}
	if ov.Selected[apart] || ov.Checked {
		t.Errorf("the visit apart shows before the switch: selected %v, switch %v", ov.Selected, ov.Checked)
	}
	must("switch on", chromedp.Do(ctx, chromedp.Click(chromedp.ID("show-apart")), chromedp.Sleep(200*time.Millisecond)))
	ov, err = chromedp.Run(ctx, chromedp.Evaluate[overlay](overlayJS))
	must("read overlay after the switch", err)
	if !ov.Selected[apart] || !ov.Checked {
		t.Errorf("after the switch: selected %v, switch %v; want the visit apart shown", ov.Selected, ov.Checked)
	}
	must("scroll to overlay", chromedp.Do(ctx, chromedp.Evaluate[chromedp.Void](`document.getElementById('overlay').scrollIntoView()`)))
	shot("top-course-overlay-all")
	must("switch off", chromedp.Do(ctx, chromedp.Click(chromedp.ID("show-apart")), chromedp.Sleep(200*time.Millisecond)))
	ov, err = chromedp.Run(ctx, chromedp.Evaluate[overlay](overlayJS))
	must("read overlay after switching off", err)
	if ov.Selected[apart] {
		t.Errorf("after switching off, the visit apart still shows")
	}
	must("scroll back", chromedp.Do(ctx, chromedp.Evaluate[chromedp.Void](`window.scrollTo(0, 0)`)))
}

// openGroups opens every closed group of the course (as a click on its
// summary does) so that their charts draw.
func openGroups(t *testing.T, ctx context.Context) {
	t.Helper()
	if err := chromedp.Do(ctx, chromedp.Evaluate[chromedp.Void](`document.querySelectorAll('details').forEach(d => d.querySelector('summary').click())`),
		chromedp.Sleep(300*time.Millisecond)); err != nil {
		t.Fatalf("open groups: %v", err)
	}
}

// checkNoRepeats fails when a long line of explanation shows under more
// than one chart of the course (issue 11: repeated explanations appear
// once per page).
func checkNoRepeats(t *testing.T, ctx context.Context) {
	t.Helper()
	texts, err := chromedp.Run(ctx, chromedp.Evaluate[[]string](`Array.from(document.querySelectorAll('.headline, .course-chart')).map(el => el.innerText)`))
	if err != nil {
		t.Fatalf("read chart texts: %v", err)
	}
	seen := map[string]int{}
	for _, text := range texts {
		lines := map[string]bool{}
		for _, l := range strings.Split(text, "\n") {
			l = strings.TrimSpace(l)
			if len(l) >= 60 && !strings.Contains(l, "see note") {
				lines[l] = true
			}
		}
		for l := range lines {
			seen[l]++
		}
	}
	for l, n := range seen {
		if n > 1 {
			t.Errorf("shown under %d charts: %q", n, l)
		}
	}
	// Nothing opened pushes the page wider than the window.
	wide, err := chromedp.Run(ctx, chromedp.Evaluate[[]string](`Array.from(document.querySelectorAll('main *')).
		filter(el => el.getBoundingClientRect().right > window.innerWidth + 1).slice(0, 5).
		map(el => el.tagName + '.' + el.className + ' ' + Math.round(el.getBoundingClientRect().width) + ' px')`))
	if err != nil || len(wide) > 0 {
		t.Errorf("elements wider than the window (%v): %q", err, wide)
	}
	notes, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll('#notes li').length`))
	if err != nil || notes == 0 {
		t.Errorf("the course has %d notes (%v), want the repeated explanations there", notes, err)
	}
}

// checkCohortVerdicts checks the cohort's codes on one line, the small
// PDR line of each row, and the verdict column's filter and sort.
func checkCohortVerdicts(t *testing.T, ctx context.Context, base string, shot func(string)) {
	t.Helper()
	type cohortState struct {
		Wrapped  []string `json:"wrapped"`
		Sparks   []int    `json:"sparks"`
		Verdicts []string `json:"verdicts"`
	}
	const cohortJS = `(() => {
		const rows = Array.from(document.querySelectorAll('#cohort tbody tr'));
		return {wrapped: rows.map(r => r.querySelector('td.code a')).filter(a => a.getClientRects().length !== 1).map(a => a.textContent),
			sparks: rows.map(r => { const p = r.querySelector('svg.spark polyline'); return p ? p.getAttribute('points').trim().split(/\s+/).length : 0; }),
			verdicts: rows.map(r => r.querySelector('td.verdict-cell').textContent)};
	})()`
	st, err := chromedp.Run(ctx, chromedp.Evaluate[cohortState](cohortJS))
	if err != nil {
		t.Fatalf("read cohort: %v", err)
	}
	checkFits(t, ctx, "cohort")
	if len(st.Wrapped) > 0 {
		t.Errorf("codes broken across lines: %q", st.Wrapped)
	}
	if len(st.Sparks) != 2 || st.Sparks[0] < 2 {
		t.Errorf("small lines with %v points, want one per row (LW-0101 with its comparable visits)", st.Sparks)
	}
	for _, v := range st.Verdicts {
		if v != "no verdict" { // the fixture has no controls
			t.Errorf("verdict cell %q, want \"no verdict\" without controls", v)
		}
	}
	if err := chromedp.Do(ctx,
		chromedp.SetValue(chromedp.CSS(`select[name=verdict]`), "none"),
		chromedp.SetValue(chromedp.CSS(`select[name=sort]`), "verdict")); err != nil {
		t.Fatalf("choose verdict: %v", err)
	}
	if _, err := chromedp.Run(ctx, chromedp.WaitEvent(page.LoadEventFired, nil, chromedp.Click(chromedp.CSS(`#cohort-filters button[type=submit]`)))); err != nil {
		t.Fatalf("filter by verdict: %v", err)
	}
	loc, _ := chromedp.Run(ctx, chromedp.Location())
	n, _ := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll('#cohort tbody tr').length`))
	if !strings.Contains(loc, "verdict=none") || !strings.Contains(loc, "sort=verdict") || n != 2 {
		t.Errorf("at %s with %d rows, want both rows without a verdict, sorted by verdict", loc, n)
	}
	shot("cohort-by-verdict")
	if err := chromedp.Do(ctx, chromedp.Navigate(base+"/cohort?verdict=declines")); err != nil {
		t.Fatal(err)
	}
	n, _ = chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll('#cohort tbody tr').length`))
	if n != 0 {
		t.Errorf("%d rows decline faster than controls without any controls, want none", n)
	}
	checkWordsOnScreen(t, ctx, "cohort by verdict")
	if err := chromedp.Do(ctx, chromedp.Navigate(base+"/cohort")); err != nil {
		t.Fatal(err)
	}
}

// pdfPage finds the page objects of a PDF (/Type /Page, not /Pages).
var pdfPage = regexp.MustCompile(`/Type\s*/Page[^s]`)

// printPDF prints the tab to an A4 PDF through Chromium (Page.printToPDF)
// and returns it.
func printPDF(t *testing.T, ctx context.Context) []byte {
	t.Helper()
	var pdf []byte
	err := chromedp.Do(ctx, func(ctx context.Context, tg *chromedp.Target) (chromedp.Void, error) {
		res, err := chromedp.Call(ctx, page.PrintToPDF, page.PrintToPDFParams{PaperWidth: 8.27, PaperHeight: 11.69,
			PrintBackground: ptr(true), PreferCSSPageSize: ptr(true)})
		pdf = res.Data
		return chromedp.Void{}, err
	})
	if err != nil {
		t.Fatalf("print to PDF: %v", err)
	}
	if !strings.HasPrefix(string(pdf), "%PDF-") {
		t.Fatalf("print gave %d bytes that are no PDF", len(pdf))
	}
	return pdf
}

func ptr[T any](v T) *T { return &v }

// checkSummary opens the one-page summary from the course, checks what it
// holds, and prints it to an A4 PDF of exactly one page; the course itself
// prints to several pages, so the page count can fail.
func checkSummary(t *testing.T, ctx context.Context, base string, shot func(string)) {
	t.Helper()
	coursePDF := printPDF(t, ctx)
	if n := len(pdfPage.FindAllIndex(coursePDF, -1)); n < 2 {
		t.Errorf("the course printed to %d pages; the page count cannot tell one page from many", n)
	}
	href, err := chromedp.Run(ctx, chromedp.Evaluate[string](`document.getElementById('summary-link').getAttribute('href')`))
	if err != nil || href != "/patients/LW-0101/summary" {
		t.Fatalf("summary link %q (%v)", href, err)
	}
	if err := chromedp.Do(ctx, chromedp.Navigate(base+href)); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`(document.querySelector('[data-chart="spectra"]') || {dataset: {}}).dataset.drawn === 'yes'`,
		chromedp.WithPollingTimeout(20*time.Second))); err != nil {
		t.Fatalf("summary chart: %v", err)
	}
	type summary struct {
		Rows     []string `json:"rows"`
		Flags    []string `json:"flags"`
		Advisory string   `json:"advisory"`
		Settings string   `json:"settings"`
		Series   []string `json:"series"`
	}
	s, err := chromedp.Run(ctx, chromedp.Evaluate[summary](`(() => ({
		rows: Array.from(document.querySelectorAll('#summary-markers tbody tr')).map(r => r.innerText),
		flags: Array.from(document.querySelectorAll('#summary-flags li')).map(l => l.innerText),
		advisory: document.getElementById('summary-advisory').innerText,
		settings: document.getElementById('summary-settings').innerText,
		series: echarts.getInstanceByDom(document.querySelector('[data-chart="spectra"]')).getOption().series.map(s => s.name)}))()`))
	if err != nil {
		t.Fatalf("read summary: %v", err)
	}
	if len(s.Rows) != 4 || !strings.Contains(s.Rows[0], "Posterior dominant rhythm") || !strings.Contains(s.Rows[0], "no verdict") {
		t.Errorf("summary rows %q, want the 4 headline markers, each with its verdict", s.Rows)
	}
	if len(s.Flags) == 0 || !strings.Contains(strings.Join(s.Flags, " "), "low-pass") {
		t.Errorf("summary flags %q, want the low-pass visit's flag in words", s.Flags)
	}
	if !strings.Contains(s.Advisory, "advisory") || !strings.Contains(s.Settings, "settings version") {
		t.Errorf("summary advisory %q, settings %q", s.Advisory, s.Settings)
	}
	if len(s.Series) != 3 || strings.Contains(strings.Join(s.Series, " "), "not comparable") {
		t.Errorf("summary spectra %q, want the 3 comparable visits (the one apart left out)", s.Series)
	}
	checkWordsOnScreen(t, ctx, "summary")
	shot("summary")
	pdf := printPDF(t, ctx)
	if n := len(pdfPage.FindAllIndex(pdf, -1)); n != 1 {
		t.Errorf("the summary prints to %d A4 pages, want 1", n)
	}
	if dir := os.Getenv("LONGWAVE_SHOTS"); dir != "" {
		_ = os.WriteFile(filepath.Join(dir, "summary.pdf"), pdf, 0o644)
	}
}

// checkFits fails when a screen is wider than the 1400 px window (a row
// of the cohort, a tooltip running off the page).
func checkFits(t *testing.T, ctx context.Context, screen string) {
	t.Helper()
	w, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.documentElement.scrollWidth`))
	if err != nil || w > 1400 {
		t.Errorf("%s is %d px wide (%v), want at most the window's 1400", screen, w, err)
	}
}
