package web

import (
	"crypto/hmac"
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"errors"
	"fmt"
	"net/http"
	"strconv"
	"strings"
	"time"
)

// Sessions are stateless: the cookie carries the token id, the issue and
// expiry times and a random nonce, signed with HMAC-SHA256 under the
// server's session key and the token's stored hash. Nothing is kept on the
// server, so any replica that shares the key accepts the cookie, and
// revoking or expiring the token ends its sessions at once (the token row
// is read on every request). The CSRF token of a session is an HMAC of the
// cookie's payload under the same key: forms carry it, and a request
// without the cookie cannot know it.

// Cookie names. With Secure cookies the session takes the __Host- prefix,
// which browsers accept only from a secure origin, on path /, without a
// domain.
const (
	sessionCookie       = "kelvard_session"
	secureSessionCookie = "__Host-kelvard_session"
	signinCookie        = "kelvard_signin"
	unitsCookie         = "kelvard_units"
)

// session is a verified session cookie.
type session struct {
	TokenID   int64
	IssuedAt  time.Time
	ExpiresAt time.Time
	payload   string
}

// errBadSession covers every reason a cookie is refused; the reason is not
// told to the browser.
var errBadSession = errors.New("no valid session")

// sessionPayload writes the signed part of a cookie.
func sessionPayload(tokenID int64, issued, expires time.Time, nonce string) string {
	return fmt.Sprintf("1|%d|%d|%d|%s", tokenID, issued.Unix(), expires.Unix(), nonce)
}

// mac signs a payload for a purpose under the key and, for sessions, the
// token's stored hash.
func mac(key []byte, purpose, payload string, tokenHash []byte) []byte {
	m := hmac.New(sha256.New, key)
	m.Write([]byte("kelvard " + purpose + "\x00"))
	m.Write([]byte(payload))
	m.Write([]byte{0})
	m.Write(tokenHash)
	return m.Sum(nil)
}

var b64 = base64.RawURLEncoding

// newSessionValue makes the cookie value of a new session.
func newSessionValue(key []byte, tokenID int64, tokenHash []byte, now time.Time, ttl time.Duration) (string, error) {
	nonce, err := randomString(18)
	if err != nil {
		return "", err
	}
	p := sessionPayload(tokenID, now, now.Add(ttl), nonce)
	return b64.EncodeToString([]byte(p)) + "." + b64.EncodeToString(mac(key, "session", p, tokenHash)), nil
}

// parseSession reads a cookie value without checking its signature: the
// token id it names tells whose hash to check it with (checkSession).
func parseSession(value string, now time.Time) (session, []byte, error) {
	enc, sig, ok := strings.Cut(value, ".")
	if !ok || len(value) > 512 {
		return session{}, nil, errBadSession
	}
	raw, err := b64.DecodeString(enc)
	if err != nil {
		return session{}, nil, errBadSession
	}
	sum, err := b64.DecodeString(sig)
	if err != nil {
		return session{}, nil, errBadSession
	}
	parts := strings.Split(string(raw), "|")
	if len(parts) != 5 || parts[0] != "1" {
		return session{}, nil, errBadSession
	}
	id, err1 := strconv.ParseInt(parts[1], 10, 64)
	iss, err2 := strconv.ParseInt(parts[2], 10, 64)
	exp, err3 := strconv.ParseInt(parts[3], 10, 64)
	if err1 != nil || err2 != nil || err3 != nil || id <= 0 {
		return session{}, nil, errBadSession
	}
	s := session{TokenID: id, IssuedAt: time.Unix(iss, 0).UTC(), ExpiresAt: time.Unix(exp, 0).UTC(), payload: string(raw)}
	if !now.Before(s.ExpiresAt) || now.Add(time.Minute).Before(s.IssuedAt) {
		return session{}, nil, errBadSession
	}
	return s, sum, nil
}

// checkSession verifies a parsed cookie's signature against the token's
// stored hash, in constant time.
func checkSession(key []byte, s session, sum, tokenHash []byte) bool {
	return hmac.Equal(sum, mac(key, "session", s.payload, tokenHash))
}

// csrfToken is the form token of a session.
func csrfToken(key []byte, s session) string {
	return b64.EncodeToString(mac(key, "csrf", s.payload, nil))
}

// signinCSRF is the form token of the sign-in form, bound to the
// pre-session cookie's nonce.
func signinCSRF(key []byte, nonce string) string {
	return b64.EncodeToString(mac(key, "signin", nonce, nil))
}

// sameToken compares two form tokens in constant time.
func sameToken(a, b string) bool {
	return a != "" && subtle.ConstantTimeCompare([]byte(a), []byte(b)) == 1
}

func randomString(n int) (string, error) {
	b := make([]byte, n)
	if _, err := rand.Read(b); err != nil {
		return "", fmt.Errorf("random bytes: %w", err)
	}
	return b64.EncodeToString(b), nil
}

// secure reports whether cookies are marked Secure for this request: the
// request came over TLS, or the server is told it sits behind TLS.
func (h *Handler) secure(r *http.Request) bool { return h.cfg.SecureCookies || r.TLS != nil }

func (h *Handler) sessionCookieName(r *http.Request) string {
	if h.secure(r) {
		return secureSessionCookie
	}
	return sessionCookie
}

// setCookie sets a cookie with kelvard's attributes: HttpOnly,
// SameSite=Strict, path /, Secure when the request is secure. maxAge < 0
// deletes it.
func (h *Handler) setCookie(w http.ResponseWriter, r *http.Request, name, value string, maxAge time.Duration) {
	c := &http.Cookie{Name: name, Value: value, Path: "/", HttpOnly: true, SameSite: http.SameSiteStrictMode, Secure: h.secure(r)}
	switch {
	case maxAge < 0:
		c.MaxAge, c.Value = -1, ""
	case maxAge > 0:
		c.MaxAge = int(maxAge / time.Second)
	}
	http.SetCookie(w, c)
}
