package web

import (
	"errors"
	"net/http"
	"net/url"
	"slices"
	"strconv"
	"strings"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// workOrdersPageSize is how many orders the list shows at once.
const workOrdersPageSize = 100

// dueWindows are the due-date choices of the work order filter, in days;
// "overdue" is offered beside them.
var dueWindows = []int{30, 90, 365}

// workOrdersForm is the work order filter as the form shows it.
type workOrdersForm struct {
	Site     int64
	Status   string
	Due      string
	Page     int
	Statuses []choiceCount
	Dues     []choiceCount
}

// workOrdersPage is the work order list's data.
type workOrdersPage struct {
	Form     workOrdersForm
	Places   []store.SitePlaces
	Counts   []choiceCount
	Total    int64
	Rows     []store.WorkOrderRow
	First    int
	Prev     string
	Next     string
	Filtered bool
	Caution  string
	Now      time.Time
}

// readWorkOrdersForm reads the work order filter from the query.
func readWorkOrdersForm(q url.Values) (workOrdersForm, store.WorkOrdersFilter, error) {
	f := workOrdersForm{Status: q.Get("status"), Due: q.Get("due"), Page: 1}
	if f.Status == "" {
		f.Status = store.OrdersOpen
	}
	var bad []string
	var ok bool
	if f.Site, ok = parseID(q.Get("site")); !ok {
		bad = append(bad, "site")
	}
	if f.Page, ok = parsePage(q.Get("page")); !ok {
		bad = append(bad, "page")
	}
	filter := store.WorkOrdersFilter{SiteID: f.Site, Status: f.Status}
	switch f.Due {
	case "":
	case "overdue":
		filter.Overdue = true
	default:
		n, err := strconv.Atoi(f.Due)
		if err != nil || !slices.Contains(dueWindows, n) {
			bad = append(bad, "due")
		}
		filter.DueWithin = time.Duration(n) * 24 * time.Hour
	}
	f.Statuses = []choiceCount{{Key: store.OrdersOpen, Label: "open (proposed, approved or scheduled)"}}
	for _, s := range store.WorkOrderStatuses() {
		f.Statuses = append(f.Statuses, choiceCount{Key: string(s), Label: string(s)})
	}
	f.Statuses = append(f.Statuses, choiceCount{Key: store.OrdersAll, Label: "any status but withdrawn"})
	for i := range f.Statuses {
		f.Statuses[i].Current = f.Statuses[i].Key == f.Status
	}
	f.Dues = []choiceCount{{Key: "overdue", Label: "overdue", Current: f.Due == "overdue"}}
	for _, d := range dueWindows {
		k := strconv.Itoa(d)
		f.Dues = append(f.Dues, choiceCount{Key: k, Label: "within " + k + " days", Current: f.Due == k})
	}
	if len(bad) > 0 {
		return f, filter, errors.New("these filters have values kelvard does not know: " + strings.Join(bad, ", "))
	}
	return f, filter, filter.Validate()
}

// workOrders lists the work orders, earliest due first.
func (h *Handler) workOrders(w http.ResponseWriter, r *http.Request) {
	q := r.URL.Query()
	form, filter, err := readWorkOrdersForm(q)
	if err != nil {
		h.errorPage(w, r, http.StatusBadRequest, pageError(err))
		return
	}
	ctx := r.Context()
	now := h.st.Now()
	v, err := h.st.WorkOrdersList(ctx, filter, now, workOrdersPageSize, (form.Page-1)*workOrdersPageSize)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	counts, err := h.st.CountWorkOrders(ctx, now)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	places, err := h.st.Places(ctx)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	p := workOrdersPage{Form: form, Places: places, Total: v.Total, Rows: v.Rows, First: (form.Page-1)*workOrdersPageSize + 1,
		Caution: health.SafetyCaution, Now: now}
	p.Counts = workOrderCounts(counts, form)
	if form.Page > 1 {
		p.Prev = "/work-orders?" + withPage(q, form.Page-1)
	}
	if int64(form.Page*workOrdersPageSize) < v.Total {
		p.Next = "/work-orders?" + withPage(q, form.Page+1)
	}
	p.Filtered = form.Site > 0 || form.Status != store.OrdersOpen || form.Due != ""
	h.render(w, r, http.StatusOK, "workorders", "Work orders", "workorders", p)
}

// workOrderCounts turns the counts by status into filter links: the open
// statuses and the overdue orders.
func workOrderCounts(c store.WorkOrderCounts, form workOrdersForm) []choiceCount {
	var out []choiceCount
	for _, s := range []store.WorkOrderStatus{store.OrderProposed, store.OrderApproved, store.OrderScheduled} {
		out = append(out, choiceCount{Key: string(s), Label: string(s), N: c.ByStatus[s], Link: "/work-orders?status=" + string(s),
			Current: form.Status == string(s) && form.Due == "" && form.Site == 0})
	}
	out = append(out, choiceCount{Key: "overdue", Label: "overdue", N: c.Overdue, Link: "/work-orders?due=overdue",
		Current: form.Due == "overdue" && form.Status == store.OrdersOpen && form.Site == 0})
	return out
}

// priorityWord says an RFC 5545 priority (section 3.8.1.9) in words:
// 1 to 4 high, 5 medium, 6 to 9 low, 0 undefined.
func priorityWord(p int) string {
	switch {
	case p >= 1 && p <= 4:
		return "high"
	case p == 5:
		return "medium"
	case p >= 6 && p <= 9:
		return "low"
	}
	return "not set"
}
