package api

import (
	"math"
	"net/http"
	"strconv"
	"sync"
	"time"

	"github.com/gin-gonic/gin"
	"golang.org/x/time/rate"
)

// limiters holds one token-bucket limiter per API token. The limit is per
// replica: behind a load balancer with n replicas a token may reach n times
// the rate.
type limiters struct {
	rate  rate.Limit
	burst int
	mu    sync.Mutex
	m     map[int64]*rate.Limiter
}

func newLimiters(perSecond float64, burst int) *limiters {
	if perSecond <= 0 {
		return nil
	}
	if burst <= 0 {
		burst = int(math.Max(1, 2*perSecond))
	}
	return &limiters{rate: rate.Limit(perSecond), burst: burst, m: map[int64]*rate.Limiter{}}
}

func (l *limiters) get(token int64) *rate.Limiter {
	l.mu.Lock()
	defer l.mu.Unlock()
	lim, ok := l.m[token]
	if !ok {
		lim = rate.NewLimiter(l.rate, l.burst)
		l.m[token] = lim
	}
	return lim
}

// limit answers 429 with Retry-After when the request's token has used up
// its rate; requests without a token are not limited here (they are
// refused by require).
func (s *Server) limit(c *gin.Context) {
	if s.limiters == nil {
		c.Next()
		return
	}
	t := tokenOf(c)
	if t.ID == 0 {
		c.Next()
		return
	}
	r := s.limiters.get(t.ID).Reserve()
	if d := r.Delay(); d > 0 {
		r.Cancel()
		c.Header("Retry-After", strconv.Itoa(int(math.Ceil(d.Seconds()))))
		writeProblem(c, Problem{Status: http.StatusTooManyRequests,
			Detail: "this token has used its request rate; retry after " + d.Round(time.Millisecond).String()})
		return
	}
	c.Next()
}
