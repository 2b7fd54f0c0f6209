package trends

import (
	"errors"
	"fmt"
	"time"
)

// ErrBadDate is returned for a visit date that is not a civil date
// YYYY-MM-DD.
var ErrBadDate = errors.New("trends: bad date")

// civilDate is a calendar day without a time zone, held as midnight UTC so
// that day differences never meet a daylight-saving change.
type civilDate struct{ t time.Time }

const dateLayout = "2006-01-02"

func parseDate(s string) (civilDate, error) {
	t, err := time.Parse(dateLayout, s)
	if err != nil {
		return civilDate{}, fmt.Errorf("%w %q: want YYYY-MM-DD", ErrBadDate, s)
	}
	return civilDate{t}, nil
}

// dateOf is the civil date of t in t's own location.
func dateOf(t time.Time) civilDate {
	y, m, d := t.Date()
	return civilDate{time.Date(y, m, d, 0, 0, 0, 0, time.UTC)}
}

func (d civilDate) String() string { return d.t.Format(dateLayout) }

// daysSince returns the whole days from o to d (negative when d is earlier).
func (d civilDate) daysSince(o civilDate) int {
	return int(d.t.Sub(o.t).Hours() / 24)
}

// addMonths adds whole months; a day that does not exist in the target month
// rolls over into the next (Go's time.AddDate: 31 January + 1 month = 3 March
// in a common year).
func (d civilDate) addMonths(n int) civilDate { return civilDate{d.t.AddDate(0, n, 0)} }

// addYears adds whole years (29 February + 1 year = 1 March).
func (d civilDate) addYears(n int) civilDate { return civilDate{d.t.AddDate(n, 0, 0)} }

func (d civilDate) before(o civilDate) bool { return d.t.Before(o.t) }
