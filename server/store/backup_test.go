package store

import (
	"context"
	"fmt"
	"path/filepath"
	"sync"
	"testing"
)

func TestBackupWhileWriting(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	for i := 0; i < 5; i++ {
		if _, err := s.SaveVisit(ctx, sampleVisit("MC-B", fmt.Sprintf("2020-01-%02d", i+1), []byte{byte(i)}, uint64(i))); err != nil {
			t.Fatal(err)
		}
	}
	var wg sync.WaitGroup
	wg.Add(1)
	var werr error
	go func() { // saves go on during the backup
		defer wg.Done()
		for i := 5; i < 25 && werr == nil; i++ {
			_, werr = s.SaveVisit(ctx, sampleVisit("MC-B", fmt.Sprintf("2020-02-%02d", i), []byte{byte(i)}, uint64(i)))
		}
	}()
	dst := filepath.Join(t.TempDir(), "copy.db")
	if err := s.Backup(ctx, dst); err != nil {
		t.Fatal(err)
	}
	wg.Wait()
	if werr != nil {
		t.Fatalf("save during backup: %v", werr)
	}
	if err := s.Backup(ctx, dst); err == nil {
		t.Error("backup over an existing file succeeded")
	}
	b, err := Open(dst)
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	var ok string
	b.r.QueryRow(`PRAGMA integrity_check`).Scan(&ok)
	if ok != "ok" {
		t.Errorf("integrity_check = %s", ok)
	}
	// Whole visits only: every visit has its conditions, display and markers.
	c := rowCounts(t, b)
	if c["visits"] < 5 || c["conditions"] != c["visits"] || c["display_products"] != c["visits"] ||
		c["markers"] != c["visits"]*len(sampleAnalysis(0).Result.Markers) {
		t.Errorf("backup counts %s", fmtCounts(c))
	}
}
