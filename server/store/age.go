package store

import (
	"fmt"
	"time"
)

// daysPerYear is the mean Gregorian year (365.2425 days), used to turn a
// span of days into fractional years of age.
const daysPerYear = 365.2425

// AgeAt returns the patient's age in years on date (YYYY-MM-DD): exact
// fractional years from a birth date; from a birth year alone, the age of
// someone born on 1 July of that year (the mid-year estimate, error at most
// half a year, and 0 in the first half of the birth year). known is false
// when the patient has neither; a date before the birth is an error.
func AgeAt(p Patient, date string) (age float64, known bool, err error) {
	d, err := time.Parse(time.DateOnly, date)
	if err != nil {
		return 0, false, fmt.Errorf("%w: visit date %q: want YYYY-MM-DD", ErrInvalid, date)
	}
	var birth time.Time
	switch {
	case p.BirthDate != "":
		birth, err = time.Parse(time.DateOnly, p.BirthDate)
		if err != nil {
			return 0, false, fmt.Errorf("%w: birth date %q: want YYYY-MM-DD", ErrInvalid, p.BirthDate)
		}
	case p.BirthYear != 0:
		birth = time.Date(p.BirthYear, time.July, 1, 0, 0, 0, 0, time.UTC)
	default:
		return 0, false, nil
	}
	if d.Year() < birth.Year() || (p.BirthDate != "" && d.Before(birth)) {
		return 0, false, fmt.Errorf("%w: visit date %s is before the birth", ErrInvalid, date)
	}
	days := max(0, d.Sub(birth).Hours()/24)
	return days / daysPerYear, true, nil
}
