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

// findingsPageSize is how many findings the list shows at once.
const findingsPageSize = 100

// findingsForm is the findings filter as the form shows it.
type findingsForm struct {
	Site, Area, Drive                 int64
	Kind, Severity, Status, Rule      string
	Page                              int
	Kinds, Severities, Statuses, Bads []string
}

// findingsPage is the findings list's data.
type findingsPage struct {
	Form      findingsForm
	Places    []store.SitePlaces
	Total     int64
	Rows      []store.FindingRow
	First     int
	Prev      string
	Next      string
	Filtered  bool
	Physical  bool
	Caution   string
	Back      string
	SuppressD string
	MaxD      string
}

func readFindingsForm(q url.Values) (findingsForm, store.FindingsFilter, error) {
	f := findingsForm{Kind: q.Get("kind"), Severity: q.Get("severity"), Status: q.Get("status"), Rule: strings.TrimSpace(q.Get("rule")), Page: 1}
	var bad []string
	var ok bool
	if f.Site, ok = parseID(q.Get("site")); !ok {
		bad = append(bad, "site")
	}
	if f.Area, ok = parseID(q.Get("area")); !ok {
		bad = append(bad, "area")
	}
	if f.Drive, ok = parseID(q.Get("drive")); !ok {
		bad = append(bad, "drive")
	}
	if f.Page, ok = parsePage(q.Get("page")); !ok {
		bad = append(bad, "page")
	}
	for _, k := range health.Kinds() {
		f.Kinds = append(f.Kinds, string(k))
	}
	for _, s := range health.Severities() {
		f.Severities = append(f.Severities, string(s))
	}
	for _, s := range store.FindingStatuses() {
		f.Statuses = append(f.Statuses, string(s))
	}
	filter := store.FindingsFilter{SiteID: f.Site, AreaID: f.Area, DriveID: f.Drive, Kind: health.Kind(f.Kind), Severity: health.Severity(f.Severity),
		Status: store.FindingStatus(f.Status), Rule: f.Rule}
	if len(bad) > 0 {
		return f, filter, errors.New("these filters have values kelvard does not know: " + strings.Join(bad, ", "))
	}
	return f, filter, filter.Validate()
}

// findings lists findings with filters; a planner may act on each.
func (h *Handler) findings(w http.ResponseWriter, r *http.Request) {
	q := r.URL.Query()
	form, filter, err := readFindingsForm(q)
	if err != nil {
		h.errorPage(w, r, http.StatusBadRequest, pageError(err))
		return
	}
	ctx := r.Context()
	v, err := h.st.FindingsList(ctx, filter, findingsPageSize, (form.Page-1)*findingsPageSize)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	places, err := h.st.Places(ctx)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	now := h.st.Now()
	p := findingsPage{Form: form, Places: places, Total: v.Total, Rows: v.Rows, First: (form.Page-1)*findingsPageSize + 1,
		Caution: health.SafetyCaution, Back: r.URL.RequestURI(), SuppressD: now.AddDate(0, 0, 30).Format(time.DateOnly),
		MaxD: now.AddDate(1, 0, 0).Format(time.DateOnly)}
	for _, f := range v.Rows {
		p.Physical = p.Physical || f.PhysicalWork
	}
	if form.Page > 1 {
		p.Prev = "/findings?" + withPage(q, form.Page-1)
	}
	if int64(form.Page*findingsPageSize) < v.Total {
		p.Next = "/findings?" + withPage(q, form.Page+1)
	}
	p.Filtered = form.Site > 0 || form.Area > 0 || form.Drive > 0 || form.Kind != "" || form.Severity != "" || form.Status != "" || form.Rule != ""
	h.render(w, r, http.StatusOK, "findings", "Findings", "findings", p)
}

// findingPage is one finding with the forms to act on it.
type findingPage struct {
	Finding   store.Finding
	Drive     store.Drive
	Position  *store.Position
	Caution   string
	Error     string
	Reason    string
	Until     string
	SuppressD string
	MaxD      string
	Back      string
	// Work are the work order lines this finding caused or is named in.
	Work []store.WorkLineRow
}

// finding shows one finding.
func (h *Handler) finding(w http.ResponseWriter, r *http.Request) {
	id, ok := pathID(r)
	if !ok {
		h.errorPage(w, r, http.StatusNotFound, "There is no such finding.")
		return
	}
	h.showFinding(w, r, id, http.StatusOK, "", "", "")
}

func (h *Handler) showFinding(w http.ResponseWriter, r *http.Request, id int64, status int, msg, reason, until string) {
	ctx := r.Context()
	f, err := h.st.GetFinding(ctx, id)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	d, err := store.Get[store.Drive](ctx, h.st, f.DriveID)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	now := h.st.Now()
	p := findingPage{Finding: f, Drive: d, Caution: health.SafetyCaution, Error: msg, Reason: reason, Until: until,
		SuppressD: now.AddDate(0, 0, 30).Format(time.DateOnly), MaxD: now.AddDate(1, 0, 0).Format(time.DateOnly)}
	if p.Until == "" {
		p.Until = p.SuppressD
	}
	p.Back = localPath(r.URL.Query().Get("back"), "")
	if r.Method == http.MethodPost {
		p.Back = localPath(r.PostForm.Get("back"), "")
	}
	if f.PositionID != nil {
		pos, err := store.Get[store.Position](ctx, h.st, *f.PositionID)
		if err != nil {
			h.fail(w, r, err)
			return
		}
		p.Position = &pos
	}
	if p.Work, err = h.st.WorkLines(ctx, store.WorkLinesFilter{FindingID: id}, 20); err != nil {
		h.fail(w, r, err)
		return
	}
	h.render(w, r, status, "finding", "Finding: "+f.Message, "findings", p)
}

// acknowledge marks a finding acknowledged, with an optional reason.
func (h *Handler) acknowledge(w http.ResponseWriter, r *http.Request) {
	h.act(w, r, "acknowledged", func(id int64, reason string) error {
		_, err := h.st.AcknowledgeFinding(r.Context(), id, store.FindingAction{Reason: reason})
		return err
	})
}

// suppress hides a finding from risk until a date, with a reason.
func (h *Handler) suppress(w http.ResponseWriter, r *http.Request) {
	h.act(w, r, "suppressed", func(id int64, reason string) error {
		v := r.PostForm.Get("until")
		day, err := time.Parse(time.DateOnly, v)
		if err != nil {
			return store.Invalid("until", "must be a date such as 2027-01-31")
		}
		// The suppression lasts to the end of the day given.
		until := day.Add(24*time.Hour - time.Second)
		_, err = h.st.SuppressFinding(r.Context(), id, store.FindingAction{Reason: reason, Until: &until})
		return err
	})
}

// act runs a planner's action and returns to the page the form came
// from, or shows the finding again with what was wrong.
func (h *Handler) act(w http.ResponseWriter, r *http.Request, done string, do func(id int64, reason string) error) {
	id, ok := pathID(r)
	if !ok {
		h.errorPage(w, r, http.StatusNotFound, "There is no such finding.")
		return
	}
	reason := strings.TrimSpace(r.PostForm.Get("reason"))
	err := do(id, reason)
	var ve *store.ValidationError
	if errors.As(err, &ve) {
		h.showFinding(w, r, id, http.StatusUnprocessableEntity, pageError(err), reason, r.PostForm.Get("until"))
		return
	}
	if err != nil {
		h.fail(w, r, err)
		return
	}
	back := localPath(r.PostForm.Get("back"), "/findings/"+strconv.FormatInt(id, 10))
	http.Redirect(w, r, withQuery(back, "done", done), http.StatusSeeOther)
}
