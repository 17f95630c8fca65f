package epoch

import (
	"testing"
	"time"
)

// The reproducible-builds.org specification: SOURCE_DATE_EPOCH is a
// decimal count of seconds since 1970-01-01 00:00:00 UTC; a value that
// is not one is ignored (the system clock is used).
func TestNow(t *testing.T) {
	for _, c := range []struct {
		name, env string
		want      time.Time // zero: the system clock
	}{
		{"set", "1700000000", time.Date(2023, 11, 14, 22, 13, 20, 0, time.UTC)}, // date(1) -u -d @1700000000
		{"zero", "0", time.Unix(0, 0).UTC()},
		{"not a number", "yesterday", time.Time{}},
		{"negative", "-5", time.Time{}},
	} {
		t.Run(c.name, func(t *testing.T) {
			t.Setenv("SOURCE_DATE_EPOCH", c.env)
			before := time.Now().Add(-time.Second)
			got := Now()
			if c.want.IsZero() {
				if got.Before(before) || got.After(time.Now().Add(time.Second)) {
					t.Errorf("Now() = %v, want the system clock", got)
				}
				return
			}
			if !got.Equal(c.want) || got.Location() != time.UTC {
				t.Errorf("Now() = %v, want %v", got, c.want)
			}
		})
	}
}
