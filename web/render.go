package web

import (
	"bytes"
	"crypto/sha256"
	"embed"
	"encoding/hex"
	"fmt"
	"html/template"
	"io/fs"
	"log/slog"
	"net/http"
	"net/url"
	"path"
	"strings"
)

//go:embed templates/*.html
var templateFS embed.FS

//go:embed assets
var assetFS embed.FS

// pageFiles lists the page templates; each defines "title" and "content"
// and is parsed with the layout and the shared partials.
var pageFiles = []string{"signin", "fleet", "sites", "site", "drive", "position", "findings", "finding", "settings", "error",
	"workorders", "workorder", "workorder_print", "forecast", "reliability"}

// parsePages parses every page with the layout.
func parsePages() (map[string]*template.Template, error) {
	out := map[string]*template.Template{}
	for _, name := range pageFiles {
		t, err := template.New(name).Funcs(funcs()).ParseFS(templateFS,
			"templates/layout.html", "templates/partials.html", "templates/"+name+".html")
		if err != nil {
			return nil, fmt.Errorf("parse page %s: %w", name, err)
		}
		out[name] = t
	}
	return out, nil
}

// layout is what every page template receives: the page's own data in
// Body and what the frame around it needs.
type layout struct {
	Title  string
	Nav    string
	NavAll []navItem
	Who    *viewer
	U      Units
	CSS    string
	// Path is the page's own address (for "back" after a form).
	Path   string
	Notice string
	// Done names the change the notice confirms (the redirect's done=).
	Done string
	Body any
}

// render writes a page with its status. The page is rendered into memory
// first, so a template error answers 500 instead of half a page.
func (h *Handler) render(w http.ResponseWriter, r *http.Request, status int, name, title, nav string, body any) {
	h.renderFrame(w, r, status, name, "layout", h.cssPath, title, nav, body)
}

// renderFrame writes a page inside the named frame: "layout" (navigation
// and footer around the content) or "printframe" (the content alone, for
// paper), with the given style sheet.
func (h *Handler) renderFrame(w http.ResponseWriter, r *http.Request, status int, name, frame, css, title, nav string, body any) {
	t, ok := h.pages[name]
	if !ok {
		h.serverError(w, r, fmt.Errorf("no page template %q", name))
		return
	}
	v := viewerFrom(r.Context())
	data := layout{Title: title, Nav: nav, NavAll: navigation(), Who: v, CSS: css, Path: r.URL.RequestURI(), Body: body,
		Notice: noticeText(r.URL.Query().Get("done"))}
	if data.Notice != "" {
		data.Done = r.URL.Query().Get("done")
	}
	if v != nil {
		data.U = v.Units
	} else if uc, err := r.Cookie(unitsCookie); err == nil {
		data.U = unitsFromCookie(uc.Value)
	}
	var buf bytes.Buffer
	if err := t.ExecuteTemplate(&buf, frame, data); err != nil {
		h.serverError(w, r, fmt.Errorf("render %s: %w", name, err))
		return
	}
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.WriteHeader(status)
	w.Write(buf.Bytes())
}

// noticeText is the confirmation shown after a form redirect.
func noticeText(done string) string {
	switch done {
	case "acknowledged":
		return "The finding is acknowledged."
	case "suppressed":
		return "The finding is suppressed until the date given."
	case "units":
		return "Your display units are saved in this browser."
	case "approved":
		return "The work order is approved. Schedule it when the date is known."
	case "scheduled":
		return "The work order is scheduled."
	case "completed":
		return "The work order is recorded as done. Replaced parts start a new life; the next assessment shows them."
	case "cancelled":
		return "The work order is cancelled."
	}
	return ""
}

// errorPage answers with a plain page that says what went wrong.
func (h *Handler) errorPage(w http.ResponseWriter, r *http.Request, status int, message string) {
	h.render(w, r, status, "error", http.StatusText(status), "", message)
}

// serverError logs err and answers 500 without its text.
func (h *Handler) serverError(w http.ResponseWriter, r *http.Request, err error) {
	h.log.ErrorContext(r.Context(), "page failed", slog.String("path", r.URL.Path), slog.Any("err", err))
	t := h.pages["error"]
	var buf bytes.Buffer
	msg := "Something went wrong on the server; it has been logged. Try again in a moment."
	if t == nil || t.ExecuteTemplate(&buf, "layout", layout{Title: "Server error", Body: msg, CSS: h.cssPath, NavAll: navigation()}) != nil {
		http.Error(w, msg, http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.WriteHeader(http.StatusInternalServerError)
	w.Write(buf.Bytes())
}

// assetPath returns the address of an embedded asset with its content
// hash, so a new build's style sheet is never read from a stale cache.
func assetPath(name string) (string, error) {
	b, err := fs.ReadFile(assetFS, "assets/"+name)
	if err != nil {
		return "", fmt.Errorf("asset %s: %w", name, err)
	}
	sum := sha256.Sum256(b)
	return "/assets/" + name + "?v=" + hex.EncodeToString(sum[:6]), nil
}

// asset serves an embedded file; the hashed address may be cached long.
func (h *Handler) asset(w http.ResponseWriter, r *http.Request) {
	name := path.Base(r.PathValue("name"))
	b, err := fs.ReadFile(assetFS, "assets/"+name)
	if err != nil {
		h.errorPage(w, r, http.StatusNotFound, "There is no such file.")
		return
	}
	switch path.Ext(name) {
	case ".css":
		w.Header().Set("Content-Type", "text/css; charset=utf-8")
	case ".svg":
		w.Header().Set("Content-Type", "image/svg+xml")
	}
	if r.URL.Query().Get("v") != "" {
		w.Header().Set("Cache-Control", "public, max-age=31536000, immutable")
	} else {
		w.Header().Set("Cache-Control", "public, max-age=3600")
	}
	w.WriteHeader(http.StatusOK)
	w.Write(b)
}

// favicon serves the mark for browsers that ask for /favicon.ico.
func (h *Handler) favicon(w http.ResponseWriter, r *http.Request) {
	r.SetPathValue("name", "mark.svg")
	h.asset(w, r)
}

// urlQueryEscape escapes a value for a query string.
func urlQueryEscape(s string) string { return url.QueryEscape(s) }

// localPath returns p when it is a path on this server (so a redirect to
// it cannot leave the site), else def.
func localPath(p, def string) string {
	if p == "" || !strings.HasPrefix(p, "/") || strings.HasPrefix(p, "//") || strings.HasPrefix(p, "/\\") || strings.ContainsAny(p, "\r\n") {
		return def
	}
	u, err := url.Parse(p)
	if err != nil || u.Host != "" || u.Scheme != "" {
		return def
	}
	return p
}
