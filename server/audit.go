package server

import (
	"context"
	"net/http"
	"sync"

	"longwave/server/store"
)

// auditor writes audit entries with group commit: a request's entry is
// written before the request goes on (no view goes unaudited), but entries
// of requests arriving while a write is under way are written together in
// the next transaction, so that SQLite's single writer is not a queue of
// one-row transactions under load. The first waiting request writes the
// batches (no background goroutine).
type auditor struct {
	st      *store.Store
	mu      sync.Mutex
	writing bool
	pending []pendingAudit
}

type pendingAudit struct {
	e    store.AuditEntry
	done chan error
}

// maxAuditBatch bounds one transaction.
const maxAuditBatch = 512

func (a *auditor) write(ctx context.Context, e store.AuditEntry) error {
	done := make(chan error, 1)
	a.mu.Lock()
	a.pending = append(a.pending, pendingAudit{e: e, done: done})
	if a.writing {
		a.mu.Unlock()
		return <-done
	}
	a.writing = true
	for {
		batch := a.pending
		if len(batch) > maxAuditBatch {
			batch = batch[:maxAuditBatch]
		}
		a.pending = a.pending[len(batch):]
		a.mu.Unlock()
		entries := make([]store.AuditEntry, len(batch))
		for i, p := range batch {
			entries[i] = p.e
		}
		// The batch is written even when this request's client has gone:
		// the other requests of the batch wait for it.
		err := a.st.AuditBatch(context.WithoutCancel(ctx), entries)
		for _, p := range batch {
			p.done <- err
		}
		a.mu.Lock()
		if len(a.pending) == 0 {
			a.writing = false
			a.mu.Unlock()
			return <-done
		}
	}
}

// audit writes an audit entry for the signed-in user; a failure to audit
// fails the request (an unaudited patient view must not happen).
func (s *Server) audit(r *http.Request, action, subject string) error {
	sess, _ := sessionFrom(r.Context())
	return s.auditor.write(r.Context(), store.AuditEntry{At: s.now(), User: sess.User.Name, Action: action, Subject: subject, Client: clientAddr(r)})
}
