// Package testenv finds what longwave's tests read from outside the
// project: the module root (for testdata/) and the real public recordings of
// ../shared/data beside the checkout. Tests that need the recordings skip
// with a message saying what they need when the folder is absent, and fail
// instead when LONGWAVE_REQUIRE_DATA=1 (as .ci/run sets it), so a CI run can
// never pass by skipping.
package testenv

import (
	"os"
	"path/filepath"
	"testing"
)

// RequireDataVar names the environment variable that turns a missing
// ../shared/data into a failure.
const RequireDataVar = "LONGWAVE_REQUIRE_DATA"

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
		if os.Getenv(RequireDataVar) == "1" {
			tb.Fatalf("%s is absent and %s=1: the shared real recordings are required here", p, RequireDataVar)
		}
		tb.Skipf("%s is absent: this test needs the shared real recordings (../shared/data, see each PROVENANCE.md)", p)
	}
	return p
}
