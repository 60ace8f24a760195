package api

import (
	"errors"
	"net/http"
	"slices"
	"strings"

	"github.com/gin-gonic/gin"

	"kelvard/store"
)

// roleRank orders roles: each role may do what the roles below it may.
func roleRank(r store.Role) int { return slices.Index(store.Roles(), r) + 1 }

const tokenKey = "kelvard.token"

// authenticate reads the bearer token, if any, and puts the token and the
// store principal on the request. It never rejects: require decides.
func (s *Server) authenticate(c *gin.Context) {
	h := c.GetHeader("Authorization")
	if h == "" {
		c.Next()
		return
	}
	scheme, secret, ok := strings.Cut(h, " ")
	if !ok || !strings.EqualFold(scheme, "Bearer") || secret == "" {
		c.Header("WWW-Authenticate", `Bearer realm="kelvard", error="invalid_request"`)
		writeProblem(c, Problem{Status: http.StatusUnauthorized, Detail: "the Authorization header must be \"Bearer <token>\""})
		return
	}
	t, err := s.store.Authenticate(c.Request.Context(), strings.TrimSpace(secret))
	if errors.Is(err, store.ErrUnauthenticated) {
		c.Header("WWW-Authenticate", `Bearer realm="kelvard", error="invalid_token"`)
		writeProblem(c, Problem{Status: http.StatusUnauthorized, Detail: "the token is unknown, expired or revoked"})
		return
	}
	if err != nil {
		s.fail(c, err)
		return
	}
	c.Set(tokenKey, t)
	c.Request = c.Request.WithContext(store.WithPrincipal(c.Request.Context(), t.Principal()))
	c.Next()
}

// require answers 401 without a token and 403 when the token's role is
// below min.
func require(min store.Role) gin.HandlerFunc {
	return func(c *gin.Context) {
		v, ok := c.Get(tokenKey)
		if !ok {
			c.Header("WWW-Authenticate", `Bearer realm="kelvard"`)
			writeProblem(c, Problem{Status: http.StatusUnauthorized, Detail: "this endpoint needs a bearer token"})
			return
		}
		if t := v.(store.Token); roleRank(t.Role) < roleRank(min) {
			writeProblem(c, Problem{Status: http.StatusForbidden, Detail: "this endpoint needs the " + string(min) + " role or higher"})
			return
		}
		c.Next()
	}
}

// tokenOf returns the request's token; only valid after require.
func tokenOf(c *gin.Context) store.Token {
	v, _ := c.Get(tokenKey)
	t, _ := v.(store.Token)
	return t
}
