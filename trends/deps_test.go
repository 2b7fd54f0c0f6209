package trends

import (
	"go/build"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// The pipe runs one way (DEVELOPERS.md, "Layout"): ingest → metrics →
// server/store → trends → server. trends, its tests included, must reach no
// longwave/server package, directly or through another longwave package; the
// check is what `go list -deps -test ./trends | grep longwave/server` would
// show, made from the source files with go/build.
func TestNoServerImports(t *testing.T) {
	const module = "longwave"
	root := moduleRoot(t)
	type edge struct{ from, to string }
	var bad []edge
	seen := map[string]bool{}
	var visit func(path string, tests bool)
	visit = func(path string, tests bool) {
		if seen[path] {
			return
		}
		seen[path] = true
		dir := filepath.Join(root, filepath.FromSlash(strings.TrimPrefix(path, module)))
		pkg, err := build.ImportDir(dir, 0)
		if err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		imports := slices.Clone(pkg.Imports)
		if tests {
			imports = append(imports, pkg.TestImports...)
			imports = append(imports, pkg.XTestImports...)
		}
		for _, imp := range imports {
			if imp != module && !strings.HasPrefix(imp, module+"/") {
				continue // standard library or another module: cannot import ours
			}
			if imp == module+"/server" || strings.HasPrefix(imp, module+"/server/") {
				bad = append(bad, edge{path, imp})
				continue
			}
			visit(imp, false)
		}
	}
	visit(module+"/trends", true)
	for _, e := range bad {
		t.Errorf("%s imports %s: trends must not reach back up the pipe", e.from, e.to)
	}
	if !seen[module+"/metrics/clinic"] {
		t.Errorf("trends does not import longwave/metrics/clinic: is the walk reading the right folder? saw %v", seen)
	}
}
