package web

import (
	"encoding/json"
	"fmt"
	"math"
	"net/http"
	"strconv"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// drivePage is a drive explained: the register, where it stands, its
// life, its derating, its findings and its charts.
type drivePage struct {
	View       store.DriveView
	Assessment *store.Assessment
	Report     *health.DriveAssessment
	Findings   []store.Finding
	// PhysicalWork is true when a finding's remedy means work at the drive.
	PhysicalWork bool
	Derating     *deratingView
	Life         []lifeView
	Charts       []chartView
	Range        string
	Ranges       []choiceCount
	// Anchor is where the range form returns to.
	Anchor  string
	Caution string
	Now     time.Time
	// SuppressD and MaxD are the suppress form's default and latest dates.
	SuppressD, MaxD string
	// ForPosition is true when the page is a position's page showing the
	// drive standing there.
	ForPosition bool
	// Work are the drive's lines on work orders: OpenWork those still to
	// do, PastWork the most recent done or cancelled.
	OpenWork, PastWork []store.WorkLineRow
}

// driveWorkLines is how many of a drive's work order lines its page lists.
const driveWorkLines = 30

// deratingView is the allowed-current breakdown: rated current times each
// factor.
type deratingView struct {
	Duty        health.Duty
	RatedA      float64
	AllowedA    float64
	Utilisation *float64
	Overload    health.OverloadAllowance
	Factors     []factorView
}

type factorView struct {
	Name   string
	Value  float64
	Input  string
	Source string
	Note   string
	// AfterA is the allowed current once this factor is applied.
	AfterA      float64
	OutOfRating bool
}

// lifeView is one wearing part's life position.
type lifeView struct {
	Name       string
	Used       float64
	RemainingH float64
	EndOfLife  *time.Time
	Earliest   *time.Time
	Latest     *time.Time
	EndReached bool
	MeanTemp   float64
	Basis      string
}

// readingRanges are the chart ranges offered, with the bucket width that
// keeps each chart near 120 points.
var readingRanges = []struct {
	Key    string
	Label  string
	Span   time.Duration
	Bucket time.Duration
}{
	{"7d", "7 days", 7 * 24 * time.Hour, time.Hour},
	{"30d", "30 days", 30 * 24 * time.Hour, 6 * time.Hour},
	{"90d", "90 days", 90 * 24 * time.Hour, 18 * time.Hour},
	{"365d", "365 days", 365 * 24 * time.Hour, 72 * time.Hour},
}

func pathID(r *http.Request) (int64, bool) {
	id, err := strconv.ParseInt(r.PathValue("id"), 10, 64)
	return id, err == nil && id > 0
}

// drive shows one drive.
func (h *Handler) drive(w http.ResponseWriter, r *http.Request) {
	id, ok := pathID(r)
	if !ok {
		h.errorPage(w, r, http.StatusNotFound, "There is no such drive.")
		return
	}
	p, status, msg, err := h.loadDrive(r, id)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	if status != 0 {
		h.errorPage(w, r, status, msg)
		return
	}
	p.Anchor = "/drives/" + strconv.FormatInt(id, 10)
	title := "Drive " + p.View.Drive.Serial
	if p.View.Position != nil {
		title += " at " + p.View.Position.Position.Tag
	}
	h.render(w, r, http.StatusOK, "drive", title, "fleet", p)
}

// loadDrive gathers a drive page. A bad range answers a status and a
// message instead of an error.
func (h *Handler) loadDrive(r *http.Request, id int64) (*drivePage, int, string, error) {
	ctx := r.Context()
	rangeKey := r.URL.Query().Get("range")
	if rangeKey == "" {
		rangeKey = "30d"
	}
	ri := -1
	for i, rr := range readingRanges {
		if rr.Key == rangeKey {
			ri = i
		}
	}
	if ri < 0 {
		return nil, http.StatusBadRequest, "The chart range must be one of 7d, 30d, 90d or 365d.", nil
	}
	v, err := h.st.Drive(ctx, id)
	if err != nil {
		return nil, 0, "", err
	}
	now := h.st.Now()
	p := &drivePage{View: v, Range: rangeKey, Caution: health.SafetyCaution, Now: now,
		SuppressD: now.AddDate(0, 0, 30).Format(time.DateOnly), MaxD: now.AddDate(1, 0, 0).Format(time.DateOnly)}
	for _, rr := range readingRanges {
		p.Ranges = append(p.Ranges, choiceCount{Key: rr.Key, Label: rr.Label, Current: rr.Key == rangeKey})
	}
	a, err := h.st.LatestAssessment(ctx, id)
	switch {
	case store.IsNotFound(err):
	case err != nil:
		return nil, 0, "", err
	default:
		var rep health.DriveAssessment
		if err := json.Unmarshal(a.Report, &rep); err != nil {
			return nil, 0, "", fmt.Errorf("assessment report of drive %d: %w", id, err)
		}
		p.Assessment, p.Report = &a, &rep
		p.Life = lifeViews(a, rep, viewerFrom(ctx).Units)
		p.Derating = deratingOf(rep, a, viewerFrom(ctx).Units)
	}
	page, err := h.st.ListFindings(ctx, store.ListQuery{Filters: map[string]string{"drive_id": strconv.FormatInt(id, 10)}, Limit: store.MaxLimit})
	if err != nil {
		return nil, 0, "", err
	}
	p.Findings = sortFindings(page.Items)
	for _, f := range p.Findings {
		p.PhysicalWork = p.PhysicalWork || f.PhysicalWork
	}
	work, err := h.st.WorkLines(ctx, store.WorkLinesFilter{DriveID: id}, driveWorkLines)
	if err != nil {
		return nil, 0, "", err
	}
	for _, l := range work {
		if l.OrderStatus.Open() {
			p.OpenWork = append(p.OpenWork, l)
		} else {
			p.PastWork = append(p.PastWork, l)
		}
	}
	u := viewerFrom(ctx).Units
	// Life history reaches back to the older part's fitting, at most ten
	// years.
	since := now.AddDate(-1, 0, 0)
	for _, c := range []*store.Component{v.Capacitor, v.Fan} {
		if c != nil && c.InstalledAt.Before(since) {
			since = c.InstalledAt
		}
	}
	since = maxTime(since, now.AddDate(-10, 0, 0))
	hist, err := h.st.AssessmentHistory(ctx, id, since, now)
	if err != nil {
		return nil, 0, "", err
	}
	if p.Assessment != nil {
		p.Charts = append(p.Charts, lifeChart(v, *p.Assessment, hist, now))
	}
	rr := readingRanges[ri]
	buckets, err := h.st.ReadingBuckets(ctx, id, now.Add(-rr.Span), now, rr.Bucket)
	if err != nil {
		return nil, 0, "", err
	}
	p.Charts = append(p.Charts, readingCharts(v, p.Assessment, p.Derating, hist, buckets, now.Add(-rr.Span), now, rr.Label, u)...)
	return p, 0, "", nil
}

// sortFindings orders findings most severe first, keeping the store's
// order within a severity.
func sortFindings(fs []store.Finding) []store.Finding {
	out := make([]store.Finding, 0, len(fs))
	for _, s := range health.Severities() {
		for _, f := range fs {
			if f.Severity == s {
				out = append(out, f)
			}
		}
	}
	for _, f := range fs {
		if !f.Severity.Valid() {
			out = append(out, f)
		}
	}
	return out
}

// lifeViews reads the capacitor and fan life positions of an assessment.
func lifeViews(a store.Assessment, rep health.DriveAssessment, u Units) []lifeView {
	mk := func(name, basis string, used float64, lr health.LifeReport, eol *time.Time) lifeView {
		l := lifeView{Name: name, Basis: basis, Used: used, RemainingH: math.NaN(), MeanTemp: math.NaN(), EndReached: lr.EndReached, EndOfLife: eol}
		if lr.RemainingH > 0 {
			l.RemainingH = lr.RemainingH
		}
		if lr.MeanTempC > 0 {
			l.MeanTemp = lr.MeanTempC
		}
		if !lr.EndReached && lr.Projected {
			l.Earliest, l.Latest = unixTime(lr.EndOfLifeEarliestAt), unixTime(lr.EndOfLifeLatestAt)
		}
		return l
	}
	capBasis := fmt.Sprintf("%s, rated %s at %s core", rep.Capacitor.Law, hours(rep.Capacitor.RatedLifeH), u.Temp(rep.Capacitor.RefTempC))
	fanBasis := fmt.Sprintf("L10 %s at %s, halving every %s hotter", hours(rep.Fan.L10H), u.Temp(rep.Fan.RefTempC), u.Rise(rep.Fan.HalvingC))
	return []lifeView{
		mk("DC-bus capacitors", capBasis, a.CapacitorLifeUsedFraction, rep.Capacitor.LifeReport, a.CapacitorEndOfLife),
		mk("Cooling fan", fanBasis, a.FanLifeUsedFraction, rep.Fan.LifeReport, a.FanEndOfLife),
	}
}

func unixTime(s int64) *time.Time {
	if s == 0 {
		return nil
	}
	t := time.Unix(s, 0).UTC()
	return &t
}

// deratingOf builds the allowed-current breakdown of an installed drive.
func deratingOf(rep health.DriveAssessment, a store.Assessment, u Units) *deratingView {
	al := rep.Allowance
	if al == nil {
		return nil
	}
	d := &deratingView{Duty: al.Duty, RatedA: al.RatedA, AllowedA: al.AllowedA, Utilisation: a.UtilisationFraction, Overload: al.Overload}
	cur := al.RatedA
	for _, f := range al.Factors {
		cur *= f.Value
		fv := factorView{Name: f.Name, Value: f.Value, Source: f.Source, Note: f.Note, AfterA: cur, OutOfRating: f.OutOfRating()}
		fv.Input = u.Value(f.Input, f.Unit)
		d.Factors = append(d.Factors, fv)
	}
	return d
}

// positionPage is a position: where it is, how it is set up, who stood
// there, and the drive standing there now explained.
type positionPage struct {
	View  store.PositionView
	Drive *drivePage
}

// position shows one position and the drive standing in it.
func (h *Handler) position(w http.ResponseWriter, r *http.Request) {
	id, ok := pathID(r)
	if !ok {
		h.errorPage(w, r, http.StatusNotFound, "There is no such position.")
		return
	}
	v, err := h.st.Position(r.Context(), id)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	p := positionPage{View: v}
	if v.DriveID != nil {
		dp, status, msg, err := h.loadDrive(r, *v.DriveID)
		if err != nil {
			h.fail(w, r, err)
			return
		}
		if status != 0 {
			h.errorPage(w, r, status, msg)
			return
		}
		dp.ForPosition = true
		dp.Anchor = "/positions/" + strconv.FormatInt(id, 10)
		p.Drive = dp
	}
	h.render(w, r, http.StatusOK, "position", "Position "+v.Position.Tag, "sites", p)
}

func maxTime(a, b time.Time) time.Time {
	if a.After(b) {
		return a
	}
	return b
}
