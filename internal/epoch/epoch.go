// Package epoch is the one clock of outputs that record when they were
// made: SOURCE_DATE_EPOCH when it is set (reproducible-builds.org
// specification, "SOURCE_DATE_EPOCH"), else the system clock. With it
// set, the same inputs give the same bytes whenever and wherever they
// are converted or packed (a cluster's job array and a laptop alike).
package epoch

import (
	"os"
	"strconv"
	"time"
)

// Now is SOURCE_DATE_EPOCH (seconds since 1970-01-01 UTC, a decimal
// integer) when set and valid, else time.Now(); always in UTC.
func Now() time.Time {
	if s := os.Getenv("SOURCE_DATE_EPOCH"); s != "" {
		if n, err := strconv.ParseInt(s, 10, 64); err == nil && n >= 0 {
			return time.Unix(n, 0).UTC()
		}
	}
	return time.Now().UTC()
}
