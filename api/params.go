package api

import (
	"fmt"
	"time"

	"github.com/gin-gonic/gin"

	"kelvard/store"
)

// queryTime reads an optional RFC 3339 query parameter; an empty one gives
// the zero time, which the store reads as an open end. It answers 400
// naming the parameter when it cannot parse, and for a to (an exclusive
// end) at the very start of year 1: that instant is the zero time, which
// would read as open, and no time lies before it anyway.
func queryTime(c *gin.Context, name string) (time.Time, bool) {
	v := c.Query(name)
	if v == "" {
		return time.Time{}, true
	}
	t, err := ParseTime(v)
	if err != nil {
		badRequest(c, name, "must be an RFC 3339 time in the years 0001 to 9999 (UTC), such as 2026-01-31T00:00:00Z")
		return time.Time{}, false
	}
	if name == "to" && t.IsZero() {
		badRequest(c, name, "must lie after 0001-01-01T00:00:00Z: the range ends before it starts")
		return time.Time{}, false
	}
	return t, true
}

// ParseTime reads an RFC 3339 time (with or without fractional seconds)
// and returns it in UTC. A time that falls outside the years 0001 to 9999
// in UTC is refused.
func ParseTime(s string) (time.Time, error) {
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return time.Time{}, err
	}
	t = t.UTC()
	if t.Before(store.EarliestTime) || t.After(store.LatestTime) {
		return time.Time{}, fmt.Errorf("time %q lies outside the years 0001 to 9999 in UTC", s)
	}
	return t, nil
}
