package web

import (
	"errors"
	"log/slog"
	"net/http"
	"net/url"
	"strings"
	"time"

	"kelvard/store"
)

// signinPage is the sign-in form's data.
type signinPage struct {
	CSRF  string
	Next  string
	Error string
}

// signinForm shows the sign-in form. A pre-session cookie holds a random
// nonce the form token is bound to, so a form posted from elsewhere (login
// CSRF) is refused.
func (h *Handler) signinForm(w http.ResponseWriter, r *http.Request) {
	if _, _, err := h.authenticate(r); err == nil {
		http.Redirect(w, r, localPath(r.URL.Query().Get("next"), "/fleet"), http.StatusSeeOther)
		return
	}
	h.showSignin(w, r, http.StatusOK, "")
}

func (h *Handler) showSignin(w http.ResponseWriter, r *http.Request, status int, msg string) {
	nonce := ""
	if c, err := r.Cookie(signinCookie); err == nil && len(c.Value) >= 16 && len(c.Value) <= 64 {
		nonce = c.Value
	} else {
		var err error
		if nonce, err = randomString(18); err != nil {
			h.serverError(w, r, err)
			return
		}
		h.setCookie(w, r, signinCookie, nonce, time.Hour)
	}
	next := r.URL.Query().Get("next")
	if r.Method == http.MethodPost {
		next = r.PostForm.Get("next")
	}
	h.render(w, r, status, "signin", "Sign in", "", signinPage{CSRF: signinCSRF(h.cfg.SessionKey, nonce), Next: localPath(next, ""), Error: msg})
}

// signin checks the token typed into the form and starts a session.
func (h *Handler) signin(w http.ResponseWriter, r *http.Request) {
	r.Body = http.MaxBytesReader(w, r.Body, 16<<10)
	if err := r.ParseForm(); err != nil {
		h.errorPage(w, r, http.StatusBadRequest, "The form could not be read.")
		return
	}
	c, err := r.Cookie(signinCookie)
	if err != nil || !sameToken(r.PostForm.Get("csrf"), signinCSRF(h.cfg.SessionKey, c.Value)) {
		h.showSignin(w, r, http.StatusForbidden, "The sign-in form had expired. It has been renewed: please enter your token again.")
		return
	}
	secret := strings.TrimSpace(r.PostForm.Get("token"))
	if secret == "" {
		h.showSignin(w, r, http.StatusUnprocessableEntity, "Enter your token.")
		return
	}
	t, err := h.st.Authenticate(r.Context(), secret)
	if errors.Is(err, store.ErrUnauthenticated) {
		h.showSignin(w, r, http.StatusUnauthorized, "That token is unknown, expired or revoked.")
		return
	}
	if err != nil {
		h.serverError(w, r, err)
		return
	}
	value, err := newSessionValue(h.cfg.SessionKey, t.ID, t.Hash, h.st.Now(), h.cfg.SessionTTL)
	if err != nil {
		h.serverError(w, r, err)
		return
	}
	h.setCookie(w, r, h.sessionCookieName(r), value, h.cfg.SessionTTL)
	h.setCookie(w, r, signinCookie, "", -1)
	http.Redirect(w, r, localPath(r.PostForm.Get("next"), "/fleet"), http.StatusSeeOther)
}

// signout ends the session: it clears the cookie in this browser and
// marks the token so that every page session it opened so far, a copied
// cookie included, is refused on every replica (store.EndSessions).
//
// The cookie is cleared first, so this browser is signed out even when the
// database cannot be reached; the error page then tells the reader that
// the other sessions could not be ended.
func (h *Handler) signout(w http.ResponseWriter, r *http.Request) {
	h.setCookie(w, r, h.sessionCookieName(r), "", -1)
	if v := viewerFrom(r.Context()); v != nil {
		// Clearing the cookie is not enough: a copy of it would still be
		// good until it expires.
		if err := h.st.EndSessions(r.Context(), v.Token.ID); err != nil {
			h.log.ErrorContext(r.Context(), "end sessions", slog.Int64("token", v.Token.ID), slog.Any("err", err))
			h.errorPage(w, r, http.StatusServiceUnavailable,
				"You are signed out in this browser, but the server could not end this token's other sessions. "+
					"Sign in and out again once the server answers, or revoke the token.")
			return
		}
	}
	http.Redirect(w, r, "/signin", http.StatusSeeOther)
}

// settingsPage is the settings form's data.
type settingsPage struct {
	Back string
}

func (h *Handler) settings(w http.ResponseWriter, r *http.Request) {
	h.render(w, r, http.StatusOK, "settings", "Settings", "settings", settingsPage{Back: localPath(r.URL.Query().Get("back"), "")})
}

// saveSettings keeps the display units in a cookie for a year.
func (h *Handler) saveSettings(w http.ResponseWriter, r *http.Request) {
	units := r.PostForm.Get("units")
	if units != "si" && units != "imperial" {
		h.errorPage(w, r, http.StatusUnprocessableEntity, "Choose SI or imperial units.")
		return
	}
	h.setCookie(w, r, unitsCookie, units, 365*24*time.Hour)
	back := localPath(r.PostForm.Get("back"), "/settings")
	http.Redirect(w, r, withQuery(back, "done", "units"), http.StatusSeeOther)
}

// withQuery sets key=value in a local address's query (replacing any
// earlier value), keeping its fragment.
func withQuery(p, key, value string) string {
	u, err := url.Parse(p)
	if err != nil {
		return p
	}
	q := u.Query()
	q.Set(key, value)
	u.RawQuery = q.Encode()
	return u.String()
}
