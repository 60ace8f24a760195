package api

import (
	"time"

	"github.com/gin-gonic/gin"
)

// queryTime reads an optional RFC 3339 query parameter; an empty one gives
// the zero time. It answers 400 naming the parameter when it cannot parse.
func queryTime(c *gin.Context, name string) (time.Time, bool) {
	v := c.Query(name)
	if v == "" {
		return time.Time{}, true
	}
	t, err := ParseTime(v)
	if err != nil {
		badRequest(c, name, "must be an RFC 3339 time such as 2026-01-31T00:00:00Z")
		return time.Time{}, false
	}
	return t, true
}

// ParseTime reads an RFC 3339 time (with or without fractional seconds)
// and returns it in UTC.
func ParseTime(s string) (time.Time, error) {
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return time.Time{}, err
	}
	return t.UTC(), nil
}
