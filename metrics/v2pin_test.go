package metrics

import (
	"bytes"
	"encoding/json"
	"flag"
	"os"
	"path/filepath"
	"testing"

	"longwave/ingest"
)

// updateV2Pin rewrites the pinned v2 results:
//
//	go test ./metrics/ -count=1 -run '^TestV2ResultsPinned$' -update-v2-pin
//
// Only when the v2 results are meant to change, which is a settings change
// (a new version and hash).
var updateV2Pin = flag.Bool("update-v2-pin", false, "rewrite testdata/metrics/golden/v2_pin.json from the current code")

// TestV2ResultsPinned pins every v2 marker value and interval, and the
// quality record, bit for bit, on synthetic recordings (issue 9 point 8:
// making v2 faster must not change a result). The golden is not a check
// against an outside reference — ground truth, MNE, scipy and fooof are
// checked elsewhere — but a record of what the code computed before the
// speed work (made by it, commit "metrics: pin v2 results"); encoding/json
// writes the shortest text that reads back as the same float64, so an
// equal text is an equal bit pattern.
func TestV2ResultsPinned(t *testing.T) {
	if testing.Short() {
		t.Skip("two 4-minute v2 computations: skipped under -short")
	}
	// The speed yardstick's layout (21 channels, 500 Hz, eyes closed and
	// open in turn) shortened to 4 minutes, with blinks and muscle bursts,
	// once on the frontal-pole path of the ocular correction and once with
	// EOG channels.
	got := map[string]any{}
	for _, eog := range []bool{false, true} {
		s := benchSpec(4)
		s.Seed = 909
		s.BlinksPerMinute, s.BlinkMinUV, s.BlinkMaxUV = 20, 150, 450
		s.MuscleBurstsPerMinute = 3
		name := "frontal-pole"
		if eog {
			s.EOG = []string{"VEOG", "HEOG"}
			name = "eog"
		}
		res, err := Compute(mustRecording(t, s, ingest.Options{}), V2())
		if err != nil {
			t.Fatal(err)
		}
		got[name] = map[string]any{"markers": res.Markers, "quality": res.Quality}
	}
	text, err := json.MarshalIndent(got, "", " ")
	if err != nil {
		t.Fatal(err)
	}
	text = append(text, '\n')
	path := filepath.Join(dspGoldenDir(t), "v2_pin.json")
	if *updateV2Pin {
		if err := os.WriteFile(path, text, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	if !bytes.Equal(text, want) {
		a, b := bytes.Split(want, []byte("\n")), bytes.Split(text, []byte("\n"))
		shown := 0
		for i := 0; i < max(len(a), len(b)) && shown < 20; i++ {
			var x, y []byte
			if i < len(a) {
				x = a[i]
			}
			if i < len(b) {
				y = b[i]
			}
			if !bytes.Equal(x, y) {
				t.Errorf("line %d: pinned %s, now %s", i+1, x, y)
				shown++
			}
		}
		t.Fatal("v2 results differ from the pin (testdata/metrics/golden/v2_pin.json)")
	}
}
