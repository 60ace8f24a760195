package web

import (
	"strings"
	"testing"
	"time"
)

func TestSessionCookie(t *testing.T) {
	key := []byte(strings.Repeat("k", 32))
	hash := []byte("stored token hash")
	now := time.Date(2026, 11, 30, 8, 0, 0, 0, time.UTC)
	v, err := newSessionValue(key, 7, hash, now, 12*time.Hour)
	if err != nil {
		t.Fatal(err)
	}
	s, sum, err := parseSession(v, now.Add(time.Hour))
	if err != nil || s.TokenID != 7 || !s.ExpiresAt.Equal(now.Add(12*time.Hour)) {
		t.Fatalf("parse: %+v, %v", s, err)
	}
	if !checkSession(key, s, sum, hash) {
		t.Error("a good cookie does not check")
	}
	if checkSession(key, s, sum, []byte("another token's hash")) {
		t.Error("the cookie checks against another token's hash")
	}
	if checkSession([]byte(strings.Repeat("z", 32)), s, sum, hash) {
		t.Error("the cookie checks under another key")
	}
	if _, _, err := parseSession(v, now.Add(12*time.Hour)); err == nil {
		t.Error("an expired cookie parses")
	}
	if _, _, err := parseSession(v, now.Add(-time.Hour)); err == nil {
		t.Error("a cookie issued in the future parses")
	}
	// Changing the token id in the payload breaks the signature.
	enc, sig, _ := strings.Cut(v, ".")
	raw, _ := b64.DecodeString(enc)
	forged := b64.EncodeToString([]byte(strings.Replace(string(raw), "1|7|", "1|8|", 1))) + "." + sig
	fs, fsum, err := parseSession(forged, now)
	if err != nil || fs.TokenID != 8 || checkSession(key, fs, fsum, hash) {
		t.Errorf("a forged token id checks: %+v %v", fs, err)
	}
	for _, bad := range []string{"", "x", "a.b", "!!.!!", b64.EncodeToString([]byte("2|7|1|2|n")) + ".AA", strings.Repeat("a", 600) + ".b"} {
		if _, _, err := parseSession(bad, now); err == nil {
			t.Errorf("%q parses", bad)
		}
	}
	// Two sessions of one token have different form tokens; the sign-in
	// form token is bound to its nonce.
	v2, _ := newSessionValue(key, 7, hash, now, 12*time.Hour)
	s2, _, _ := parseSession(v2, now)
	if csrfToken(key, s) == csrfToken(key, s2) {
		t.Error("two sessions share a form token")
	}
	if signinCSRF(key, "a") == signinCSRF(key, "b") || !sameToken(signinCSRF(key, "a"), signinCSRF(key, "a")) || sameToken("", "") {
		t.Error("sign-in form tokens")
	}
}

func TestParseSessionKey(t *testing.T) {
	k, err := ParseSessionKey("MDEyMzQ1Njc4OWFiY2RlZjAxMjM0NTY3ODlhYmNkZWY=")
	if err != nil || string(k) != "0123456789abcdef0123456789abcdef" {
		t.Errorf("key %q, %v", k, err)
	}
	if k, err := ParseSessionKey(""); k != nil || err != nil {
		t.Errorf("empty key: %q, %v", k, err)
	}
	if _, err := ParseSessionKey("c2hvcnQ="); err == nil {
		t.Error("a short key is accepted")
	}
	if _, err := ParseSessionKey("not base64 at all!"); err == nil {
		t.Error("a key that is not base64 is accepted")
	}
	if _, err := New(nil, Config{SessionKey: []byte("short")}); err == nil {
		t.Error("New takes a short key")
	}
}
