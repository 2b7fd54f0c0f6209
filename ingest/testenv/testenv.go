// Package testenv finds what longwave's tests read from outside the
// project: the module root (for testdata/) and the real public recordings of
// ../shared/data beside the checkout. Tests that need the recordings, or a
// tool such as Chromium, skip with a message saying what they need when it
// is absent, and fail instead when the matching LONGWAVE_REQUIRE_… variable
// is 1 (as .ci/run sets them), so a CI run can never pass by skipping. Every
// such skip goes through Missing (SharedData calls it).
package testenv

import (
	"fmt"
	"os"
	"path/filepath"
	"testing"
)

// The environment variables that turn a missing input into a failure.
const (
	// RequireDataVar: the shared real recordings of ../shared/data.
	RequireDataVar = "LONGWAVE_REQUIRE_DATA"
	// RequireBrowserVar: Debian's chromium for the browser tests.
	RequireBrowserVar = "LONGWAVE_REQUIRE_BROWSER"
)

// Missing says that something the test needs is absent: the test fails
// with the message when the environment variable requireVar is "1", and is
// skipped with it otherwise.
func Missing(tb testing.TB, requireVar, format string, args ...any) {
	tb.Helper()
	msg := fmt.Sprintf(format, args...)
	if os.Getenv(requireVar) == "1" {
		tb.Fatalf("%s, and %s=1: it is required here", msg, requireVar)
	}
	tb.Skip(msg)
}

// ModuleRoot walks up from the test's working directory (its package folder)
// to the folder holding go.mod.
func ModuleRoot(tb testing.TB) string {
	tb.Helper()
	dir, err := os.Getwd()
	if err != nil {
		tb.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return dir
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			tb.Fatal("testenv: go.mod not found above the test's folder")
		}
		dir = parent
	}
}

// SharedData returns ../shared/data (joined with the optional parts) beside
// the module root. When that path is absent the test is skipped with a
// message naming it, or fails under LONGWAVE_REQUIRE_DATA=1.
func SharedData(tb testing.TB, parts ...string) string {
	tb.Helper()
	p := filepath.Join(append([]string{ModuleRoot(tb), "..", "shared", "data"}, parts...)...)
	if _, err := os.Stat(p); err != nil {
		Missing(tb, RequireDataVar, "%s is absent: this test needs the shared real recordings (../shared/data, see each PROVENANCE.md)", p)
	}
	return p
}
