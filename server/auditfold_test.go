package server

import (
	"testing"
	"time"

	"longwave/server/store"
)

// TestFoldAudit: consecutive equal entries (user, action, subject,
// client) become one row with their count and first time; an entry that
// differs in any of the four starts a new row; the limit counts rows.
func TestFoldAudit(t *testing.T) {
	t0 := time.Date(2026, 5, 4, 9, 0, 0, 0, time.UTC)
	at := func(s int) time.Time { return t0.Add(time.Duration(s) * time.Second) }
	page := store.AuditEntry{User: "dr-vale", Action: store.AuditVisitView, Subject: "LC-0101 2024-03-01 (traces)", Client: "127.0.0.1"}
	entry := func(e store.AuditEntry, s int) store.AuditEntry { e.At = at(s); return e }
	other := page
	other.Subject = "LC-0101 2024-03-01"
	otherClient := page
	otherClient.Client = "10.0.0.7"
	log := []store.AuditEntry{ // newest first, as AuditLog gives them
		entry(page, 50), entry(page, 40), entry(page, 30),
		entry(other, 20),
		entry(page, 10),
		entry(otherClient, 5), entry(otherClient, 4),
	}
	tests := []struct {
		limit int
		times []int
		first []string
	}{
		{10, []int{3, 1, 1, 2}, []string{"2026-05-04T09:00:30Z", "", "", "2026-05-04T09:00:04Z"}},
		{2, []int{3, 1}, []string{"2026-05-04T09:00:30Z", ""}},
	}
	for _, tt := range tests {
		rows := foldAudit(log, tt.limit)
		if len(rows) != len(tt.times) {
			t.Fatalf("limit %d: %d rows, want %d: %+v", tt.limit, len(rows), len(tt.times), rows)
		}
		for i, r := range rows {
			if r.Times != tt.times[i] || r.First != tt.first[i] {
				t.Errorf("limit %d, row %d: %d times, first %q; want %d, %q", tt.limit, i, r.Times, r.First, tt.times[i], tt.first[i])
			}
			if r.Action == store.AuditVisitView {
				t.Errorf("row %d shows the key %q instead of words", i, r.Action)
			}
		}
		if rows[0].At != "2026-05-04T09:00:50Z" {
			t.Errorf("first row at %s, want the newest entry's time", rows[0].At)
		}
	}
}
