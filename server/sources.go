package server

import (
	"net/http"
	"strings"

	"longwave/ingest"
	"longwave/trends"
	"longwave/web"
)

// advisoryNotice is the notice of the reference sources screen.
const advisoryNotice = "Every range here is an advisory literature (or clinic) reference for clinical judgement, not a diagnosis. " +
	"Sources differ in population, method and band definitions; follow local practice and licensed clinicians. " +
	"Status says whether a value was checked in the source text or comes from memory and awaits a check."

// sourcesPage lists every reference range with its citation and status.
func (s *Server) sourcesPage(w http.ResponseWriter, r *http.Request) {
	rg, err := s.ranges(r)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	page := &web.SourcesPage{Frame: s.frame(r, "Reference sources", "/sources"), Advisory: advisoryNotice}
	for _, row := range rg.Rows() {
		page.Rows = append(page.Rows, web.SourceRow{
			Set: row.Set, Marker: markerTitle(row.Marker), Region: regionName(row.Region), State: stateName(ingest.EyeState(row.State)),
			Ages: decimals(row.AgeMin, 0) + "–" + decimals(row.AgeMax, 0) + " y", Range: rangeCell(row),
			Change: changeCell(row), Citation: row.Citation, Status: row.Status,
			Method: strings.TrimSpace(joinNonEmpty("; ", row.Population, row.Method, row.Bands)), Note: row.Note,
		})
	}
	s.render(w, r, http.StatusOK, page)
}

func rangeCell(r trends.Range) string {
	var parts []string
	if t := rangeText(r.Lower, r.Upper); t != "" {
		parts = append(parts, t)
	}
	if r.Mean != nil {
		m := "mean " + sig(*r.Mean)
		if r.SD != nil {
			m += " ± " + sig(*r.SD) + " SD"
		}
		parts = append(parts, m)
	}
	return strings.Join(parts, "; ")
}

func changeCell(r trends.Range) string {
	if r.ExpectedChangePerYear == nil {
		return "–"
	}
	return sig(*r.ExpectedChangePerYear) + " per year"
}

func joinNonEmpty(sep string, parts ...string) string {
	var keep []string
	for _, p := range parts {
		if strings.TrimSpace(p) != "" {
			keep = append(keep, p)
		}
	}
	return strings.Join(keep, sep)
}
