package store_test

import (
	"context"
	"fmt"
	"os"
	"path/filepath"

	"longwave/server/store"
)

// A patient is added by its pseudonymous code; a later call with only the
// code keeps what is known.
func ExampleStore_UpsertPatient() {
	dir, _ := os.MkdirTemp("", "longwave-example")
	defer os.RemoveAll(dir)
	st, err := store.Open(filepath.Join(dir, "clinic.db"))
	if err != nil {
		fmt.Println(err)
		return
	}
	defer st.Close()
	ctx := context.Background()
	st.UpsertPatient(ctx, store.Patient{Code: "MC-0042", Sex: "F", BirthYear: 1948, Group: "patient"})
	st.UpsertPatient(ctx, store.Patient{Code: "MC-0042", Cohort: "memory clinic north"})
	p, _ := st.PatientByCode(ctx, "MC-0042")
	age, _, _ := store.AgeAt(p, "2024-07-01")
	fmt.Printf("%s %s %d %s / %s, %.0f years on 2024-07-01\n", p.Code, p.Sex, p.BirthYear, p.Group, p.Cohort, age)
	// Output: MC-0042 F 1948 patient / memory clinic north, 76 years on 2024-07-01
}
