package bids_test

import (
	"fmt"
	"os"
	"path/filepath"

	"longwave/ingest"
	"longwave/ingest/bids"
	"longwave/ingest/synth"
)

// A visit recorded as an eyes-closed and an eyes-open run is read as one
// recording with two periods.
func Example() {
	root, err := os.MkdirTemp("", "bids-example")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(root)
	dir := filepath.Join(root, "sub-07", "ses-2023", "eeg")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		fmt.Println(err)
		return
	}
	if err := os.WriteFile(filepath.Join(root, "participants.tsv"), []byte("participant_id\tage\tsex\nsub-07\t74\tF\n"), 0o644); err != nil {
		fmt.Println(err)
		return
	}
	for task, seconds := range map[string]float64{"restEC": 120, "restEO": 60} {
		s := synth.Default()
		s.Format, s.Duration, s.Periods = ingest.FormatEDF, seconds, nil
		b, err := synth.Bytes(s)
		if err != nil {
			fmt.Println(err)
			return
		}
		if err := os.WriteFile(filepath.Join(dir, "sub-07_ses-2023_task-"+task+"_eeg.edf"), b, 0o644); err != nil {
			fmt.Println(err)
			return
		}
	}

	d, err := bids.Read(root, ingest.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	p := d.Participants[0]
	fmt.Println(p.ID, p.Age, p.Sex)
	for _, v := range d.Visits {
		rec, err := v.Load(ingest.Options{})
		if err != nil {
			fmt.Println(err)
			return
		}
		fmt.Println(v.Subject, v.Session, rec.Conditions.Format, rec.Conditions.PeriodSource, rec.Periods)
	}
	// Output:
	// sub-07 74 F
	// sub-07 ses-2023 combined separate_runs [{closed 0 120} {open 120 180}]
}
