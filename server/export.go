package server

import (
	"bytes"
	"net/http"
	"strconv"

	"longwave/server/store"
	"longwave/trends"
)

// exportCSV writes the cohort follow-up rows, filtered and sorted as the
// query says (the same filters as the cohort page, every row, no paging),
// as a CSV download. Each export is audited.
func (s *Server) exportCSV(w http.ResponseWriter, r *http.Request) {
	_, cq, rows, err := s.queriedCohort(r)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	var buf bytes.Buffer
	if err := trends.WriteCohortCSV(&buf, rows); err != nil {
		s.fail(w, r, err)
		return
	}
	if err := s.audit(r, store.AuditExport, "cohort csv, "+strconv.Itoa(len(rows))+" rows, "+cq.values(0).Encode()); err != nil {
		s.fail(w, r, err)
		return
	}
	name := "longwave-cohort-" + s.now().UTC().Format("2006-01-02") + ".csv"
	w.Header().Set("Content-Type", "text/csv; charset=utf-8")
	w.Header().Set("Content-Disposition", `attachment; filename="`+name+`"`)
	w.WriteHeader(http.StatusOK)
	_, _ = w.Write(buf.Bytes())
}
