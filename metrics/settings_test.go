package metrics

import (
	"bytes"
	"encoding/json"
	"fmt"
	"reflect"
	"sort"
	"testing"
)

// copySettings deep-copies s through its JSON form (every field is tagged).
func copySettings(t *testing.T, s Settings) Settings {
	t.Helper()
	b, err := json.Marshal(s)
	if err != nil {
		t.Fatal(err)
	}
	var out Settings
	if err := json.Unmarshal(b, &out); err != nil {
		t.Fatal(err)
	}
	return out
}

// step is one move from a value to a part of it.
type step struct {
	field int    // struct field index, or −1
	index int    // slice element, or −1
	key   string // map key, when field and index are −1
	deref bool   // through a pointer (settings of later versions)
}

// leaves lists the paths to every scalar inside v.
func leaves(v reflect.Value, path []step, out *[][]step) {
	switch v.Kind() {
	case reflect.Pointer:
		if !v.IsNil() {
			leaves(v.Elem(), append(append([]step{}, path...), step{field: -1, index: -1, deref: true}), out)
		}
	case reflect.Struct:
		for i := 0; i < v.NumField(); i++ {
			leaves(v.Field(i), append(append([]step{}, path...), step{field: i, index: -1}), out)
		}
	case reflect.Slice:
		for i := 0; i < v.Len(); i++ {
			leaves(v.Index(i), append(append([]step{}, path...), step{field: -1, index: i}), out)
		}
	case reflect.Map:
		keys := v.MapKeys()
		sort.Slice(keys, func(i, j int) bool { return keys[i].String() < keys[j].String() })
		for _, k := range keys {
			leaves(v.MapIndex(k), append(append([]step{}, path...), step{field: -1, index: -1, key: k.String()}), out)
		}
	default:
		*out = append(*out, path)
	}
}

// follow walks path from v and returns the (settable) leaf.
func follow(v reflect.Value, path []step) reflect.Value {
	for _, s := range path {
		switch {
		case s.deref:
			v = v.Elem()
		case s.field >= 0:
			v = v.Field(s.field)
		case s.index >= 0:
			v = v.Index(s.index) // slice elements are addressable
		default:
			v = v.MapIndex(reflect.ValueOf(s.key)) // map values here are slices
		}
	}
	return v
}

func pathName(t reflect.Type, v reflect.Value, path []step) string {
	var b bytes.Buffer
	for _, s := range path {
		switch {
		case s.deref:
			v = v.Elem()
		case s.field >= 0:
			fmt.Fprintf(&b, ".%s", v.Type().Field(s.field).Name)
			v = v.Field(s.field)
		case s.index >= 0:
			fmt.Fprintf(&b, "[%d]", s.index)
			v = v.Index(s.index)
		default:
			fmt.Fprintf(&b, "[%q]", s.key)
			v = v.MapIndex(reflect.ValueOf(s.key))
		}
	}
	return b.String()
}

// TestHashChangesWithEveryField changes each scalar of V1 in turn (found by
// reflection, so a field added later is covered without editing the test)
// and checks that the hash changes (issue 3 point 1).
func TestHashChangesWithEveryField(t *testing.T) {
	for _, base := range []Settings{V1(), V2()} {
		t.Run("v"+base.Version, func(t *testing.T) { testHashChangesWithEveryField(t, base) })
	}
}

func testHashChangesWithEveryField(t *testing.T, base Settings) {
	baseHash := base.Hash()
	var paths [][]step
	leaves(reflect.ValueOf(base), nil, &paths)
	if len(paths) < 40 {
		t.Fatalf("found %d scalar fields in V1, expected every number of the pipeline (40 or more)", len(paths))
	}
	for _, p := range paths {
		name := pathName(reflect.TypeOf(base), reflect.ValueOf(base), p)
		s := copySettings(t, base)
		leaf := follow(reflect.ValueOf(&s).Elem(), p)
		switch leaf.Kind() {
		case reflect.Float64:
			leaf.SetFloat(leaf.Float()*1.0001 + 1e-6)
		case reflect.Int:
			leaf.SetInt(leaf.Int() + 1)
		case reflect.String:
			leaf.SetString(leaf.String() + "x")
		case reflect.Bool:
			leaf.SetBool(!leaf.Bool())
		default:
			t.Fatalf("%s: kind %s not handled by the test", name, leaf.Kind())
		}
		if got := s.Hash(); got == baseHash {
			t.Errorf("changing %s left the hash at %s", name, got)
		}
	}
	// A region gaining a channel (a new map entry length) changes it too.
	s := copySettings(t, base)
	s.Regions[RegionFrontal] = append(s.Regions[RegionFrontal], "F7")
	if s.Hash() == baseHash {
		t.Error("adding F7 to the frontal region left the hash unchanged")
	}
}

// TestCanonicalJSON checks the canonical form: valid JSON, keys sorted at
// every level, stable across calls and independent of map iteration order.
func TestCanonicalJSON(t *testing.T) {
	s := V1()
	a := s.CanonicalJSON()
	for i := 0; i < 20; i++ {
		if b := V1().CanonicalJSON(); !bytes.Equal(a, b) {
			t.Fatal("canonical JSON differs between calls")
		}
	}
	var m map[string]any
	if err := json.Unmarshal(a, &m); err != nil {
		t.Fatalf("canonical JSON does not parse: %v", err)
	}
	// Re-encoding with encoding/json (which sorts map keys and writes floats
	// in the shortest round-trip form, like ours) must give the same bytes.
	b, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a, b) {
		t.Errorf("canonical JSON is not in sorted-key form:\n got %s\nwant %s", a, b)
	}
	if s.Version != SettingsVersion {
		t.Errorf("V1().Version = %q, want %q", s.Version, SettingsVersion)
	}
}

// v1Hash pins version 1. If this test fails, a number of V1 changed: that
// is a new processing version (DESIGN.md: "Changing a number makes a new
// version"), so bump SettingsVersion and update the pin together.
const v1Hash = "b7bf5117378f2bd80f60968fc887888f1840bf709392d326fdedf74fc1f0c6d3"

func TestV1HashPinned(t *testing.T) {
	if got := V1().Hash(); got != v1Hash {
		t.Errorf("V1().Hash() = %s, want the pinned %s (a changed setting needs a new version)", got, v1Hash)
	}
}

// v2Hash pins version 2 in the same way. V2 is what Current returns, so a
// changed number here is a new version too.
const v2Hash = "617aabdb3fc8ad2afbb1e50effe9e43b40ac8dd79e510aa5c3b91057152b2a79"

func TestV2HashPinned(t *testing.T) {
	if got := V2().Hash(); got != v2Hash {
		t.Errorf("V2().Hash() = %s, want the pinned %s (a changed setting needs a new version)", got, v2Hash)
	}
	if v1, v2 := V1(), V2(); v1.Hash() == v2.Hash() || v2.Version == v1.Version {
		t.Error("V2 must differ from V1 in version and hash")
	}
	if c := Current(); c.Version != "2" || c.Hash() != v2Hash {
		t.Errorf("Current() is version %q (%s), want V2", c.Version, c.Hash())
	}
	for _, v := range []string{"1", "2"} {
		s, ok := ByVersion(v)
		if !ok || s.Version != v {
			t.Errorf("ByVersion(%q) = %q, %v", v, s.Version, ok)
		}
	}
}
