package web

import (
	"errors"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// fleetPageSize is how many drives the fleet page lists at once.
const fleetPageSize = 100

// fleetForm is the fleet filter as the form shows it.
type fleetForm struct {
	Site, Area                  int64
	Band, Severity, Status, Q   string
	EOL                         int
	Page                        int
	Bands, Severities, Statuses []string
}

// fleetPage is the fleet page's data.
type fleetPage struct {
	Form      fleetForm
	Places    []store.SitePlaces
	Summary   store.FleetSummary
	Bands     []choiceCount
	EndOfLife []choiceCount
	// Work counts the open work orders by status, and the overdue ones.
	Work     []choiceCount
	Rows     []store.FleetRow
	First    int
	Prev     string
	Next     string
	Filtered bool
	// Narrowed is true when a filter other than band and end of life
	// applies (the counts above the list follow those).
	Narrowed  bool
	ClearLink string
	Now       time.Time
}

// choiceCount is a count that doubles as a filter link.
type choiceCount struct {
	Key     string
	Label   string
	N       int64
	Link    string
	Current bool
}

// eolWindows are the end-of-life windows offered, in days.
var eolWindows = []int{90, 180, 365}

// parseID reads an optional positive id from a query value.
func parseID(v string) (int64, bool) {
	if v == "" {
		return 0, true
	}
	n, err := strconv.ParseInt(v, 10, 64)
	return n, err == nil && n > 0
}

// parsePage reads a 1-based page number (1 to 10 000, 1 when empty); a
// bad one gives page 1 and false.
func parsePage(v string) (int, bool) {
	if v == "" {
		return 1, true
	}
	n, err := strconv.Atoi(v)
	return max(n, 1), err == nil && n >= 1 && n <= 10000
}

// readFleetForm reads the fleet filter from the query; bad values are
// named in the error.
func readFleetForm(q url.Values) (fleetForm, store.FleetFilter, error) {
	f := fleetForm{Band: q.Get("band"), Severity: q.Get("severity"), Status: q.Get("status"), Q: strings.TrimSpace(q.Get("q")), Page: 1}
	var bad []string
	var ok bool
	if f.Site, ok = parseID(q.Get("site")); !ok {
		bad = append(bad, "site")
	}
	if f.Area, ok = parseID(q.Get("area")); !ok {
		bad = append(bad, "area")
	}
	if v := q.Get("eol"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || (n != 90 && n != 180 && n != 365) {
			bad = append(bad, "end-of-life window")
		}
		f.EOL = n
	}
	if f.Page, ok = parsePage(q.Get("page")); !ok {
		bad = append(bad, "page")
	}
	for _, b := range health.Bands() {
		f.Bands = append(f.Bands, string(b))
	}
	for _, s := range health.Severities() {
		f.Severities = append(f.Severities, string(s))
	}
	for _, s := range health.DriveStatuses() {
		if s != health.StatusRetired {
			f.Statuses = append(f.Statuses, string(s))
		}
	}
	filter := store.FleetFilter{SiteID: f.Site, AreaID: f.Area, Band: health.Band(f.Band), Severity: health.Severity(f.Severity),
		Status: health.DriveStatus(f.Status), Search: f.Q, EndOfLifeWithin: time.Duration(f.EOL) * 24 * time.Hour}
	if len(bad) > 0 {
		return f, filter, errors.New("these filters have values kelvard does not know: " + strings.Join(bad, ", "))
	}
	if err := filter.Validate(); err != nil {
		return f, filter, err
	}
	return f, filter, nil
}

// fleet lists the drives ranked by risk, with counts by band and by
// capacitor end-of-life window.
func (h *Handler) fleet(w http.ResponseWriter, r *http.Request) {
	q := r.URL.Query()
	form, filter, err := readFleetForm(q)
	if err != nil {
		h.errorPage(w, r, http.StatusBadRequest, pageError(err))
		return
	}
	ctx := r.Context()
	now := h.st.Now()
	view, err := h.st.Fleet(ctx, filter, now, fleetPageSize, (form.Page-1)*fleetPageSize)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	places, err := h.st.Places(ctx)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	counts, err := h.st.CountWorkOrders(ctx, now)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	p := fleetPage{Form: form, Places: places, Summary: view.Summary, Rows: view.Rows, First: (form.Page-1)*fleetPageSize + 1, Now: now,
		Work: workOrderCounts(counts, workOrdersForm{})}
	for _, b := range health.Bands() {
		p.Bands = append(p.Bands, choiceCount{Key: string(b), Label: bandLabel(b), N: view.Summary.Bands[b],
			Link: "/fleet?" + with(q, "band", string(b), string(b) == form.Band), Current: string(b) == form.Band})
	}
	for _, d := range eolWindows {
		k := strconv.Itoa(d)
		p.EndOfLife = append(p.EndOfLife, choiceCount{Key: k, Label: "within " + k + " days", N: view.Summary.EndOfLife[time.Duration(d)*24*time.Hour],
			Link: "/fleet?" + with(q, "eol", k, d == form.EOL), Current: d == form.EOL})
	}
	if form.Page > 1 {
		p.Prev = "/fleet?" + withPage(q, form.Page-1)
	}
	if int64(form.Page*fleetPageSize) < view.Summary.Matching {
		p.Next = "/fleet?" + withPage(q, form.Page+1)
	}
	p.Narrowed = form.Site > 0 || form.Area > 0 || form.Severity != "" || form.Status != "" || form.Q != ""
	p.Filtered = p.Narrowed || form.Band != "" || form.EOL > 0
	h.render(w, r, http.StatusOK, "fleet", "Fleet", "fleet", p)
}

// with returns the query with key set to value (or removed when toggle
// is true: a second click on a current choice clears it), back on page 1.
func with(q url.Values, key, value string, toggle bool) string {
	c := url.Values{}
	for k, v := range q {
		if k != "page" && k != "done" {
			c[k] = v
		}
	}
	if toggle {
		c.Del(key)
	} else {
		c.Set(key, value)
	}
	return c.Encode()
}

func withPage(q url.Values, page int) string {
	c := url.Values{}
	for k, v := range q {
		if k != "done" {
			c[k] = v
		}
	}
	c.Set("page", strconv.Itoa(page))
	return c.Encode()
}

// pageError turns a store validation error into a sentence.
func pageError(err error) string {
	var ve *store.ValidationError
	if errors.As(err, &ve) {
		parts := make([]string, len(ve.Fields))
		for i, f := range ve.Fields {
			parts[i] = f.Field + " " + f.Reason
		}
		return "Please correct: " + strings.Join(parts, "; ") + "."
	}
	return err.Error()
}

// fail answers a store error: 404 for what is missing or outside the
// token's sites, 422 for bad input, 500 otherwise.
func (h *Handler) fail(w http.ResponseWriter, r *http.Request, err error) {
	var ve *store.ValidationError
	switch {
	case store.IsNotFound(err):
		h.errorPage(w, r, http.StatusNotFound, "There is nothing here, or your token does not reach its site.")
	case errors.As(err, &ve):
		h.errorPage(w, r, http.StatusUnprocessableEntity, pageError(err))
	default:
		h.serverError(w, r, err)
	}
}
