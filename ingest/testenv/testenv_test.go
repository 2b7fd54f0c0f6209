package testenv

import (
	"os"
	"os/exec"
	"strings"
	"testing"
)

// childVar marks the re-run of this test binary in which Missing is called.
const childVar = "LONGWAVE_TESTENV_CHILD"

// testRequireVar is the require variable the child is given.
const testRequireVar = "LONGWAVE_TESTENV_REQUIRE"

func TestMissingChild(t *testing.T) {
	if os.Getenv(childVar) != "1" {
		t.Skip("child of TestMissing only")
	}
	Missing(t, testRequireVar, "the input %q is absent", "x")
	t.Error("Missing returned: it must skip or fail the test")
}

// TestMissing runs TestMissingChild in a child process: with the require
// variable at 1 the child fails, naming the variable; without it the child
// skips and passes.
func TestMissing(t *testing.T) {
	for _, tt := range []struct {
		require  string
		wantFail bool
		wantText string
	}{
		{"1", true, testRequireVar + "=1"},
		{"", false, "--- SKIP: TestMissingChild"},
		{"0", false, "--- SKIP: TestMissingChild"},
	} {
		cmd := exec.Command(os.Args[0], "-test.run=^TestMissingChild$", "-test.v", "-test.count=1")
		cmd.Env = append(os.Environ(), childVar+"=1", testRequireVar+"="+tt.require)
		out, err := cmd.CombinedOutput()
		failed := err != nil
		if failed != tt.wantFail {
			t.Errorf("%s=%q: child failed %v, want %v\n%s", testRequireVar, tt.require, failed, tt.wantFail, out)
		}
		if !strings.Contains(string(out), tt.wantText) {
			t.Errorf("%s=%q: child output lacks %q:\n%s", testRequireVar, tt.require, tt.wantText, out)
		}
	}
}
