package api

import (
	"context"
	"encoding/json"
	"net/http"
	"strconv"
	"time"

	"github.com/gin-gonic/gin"

	"kelvard/health"
	"kelvard/store"
)

// DriveHealth is the answer of GET /api/v1/drives/{id}/health: the contract
// fields (DESIGN.md section 5) with the factor breakdown and the evidence.
type DriveHealth struct {
	DriveID     int64           `json:"drive_id"`
	Serial      string          `json:"serial"`
	PositionID  *int64          `json:"position_id"`
	At          time.Time       `json:"at"`
	Capacitor   ComponentHealth `json:"capacitor"`
	Fan         ComponentHealth `json:"fan"`
	Current     CurrentHealth   `json:"current"`
	HealthBand  health.Band     `json:"health_band"`
	RiskScore   float64         `json:"risk_score"`
	HealthScore float64         `json:"health_score"`
	Findings    []store.Finding `json:"findings"`
	// Report is the whole assessment: every model's inputs and outputs.
	Report json.RawMessage `json:"report"`
	// Caution applies to any work a finding's remedy proposes.
	Caution string `json:"caution"`
}

// ComponentHealth is the life position of a capacitor bank or fan.
type ComponentHealth struct {
	LifeUsedFraction    float64    `json:"life_used_fraction"`
	RemainingH          *float64   `json:"remaining_h"`
	RemainingAtPresentH *float64   `json:"remaining_at_present_h"`
	EndOfLife           *time.Time `json:"end_of_life"`
	EndOfLifeEarliest   *time.Time `json:"end_of_life_earliest"`
	EndOfLifeLatest     *time.Time `json:"end_of_life_latest"`
	EndReached          bool       `json:"end_reached"`
	MeanTempC           *float64   `json:"mean_temp_c"`
}

// CurrentHealth is the derating and duty of an installed drive.
type CurrentHealth struct {
	Duty                health.Duty           `json:"duty,omitempty"`
	RatedA              *float64              `json:"rated_a"`
	AllowedA            *float64              `json:"allowed_a"`
	UtilisationFraction *float64              `json:"utilisation_fraction"`
	Factors             []health.DerateFactor `json:"factors"`
}

func (s *Server) healthRoutes(v1 string) {
	s.route(operation{Method: http.MethodGet, Path: v1 + "/drives/:id/health", Tag: "health", Role: store.RoleViewer,
		Summary:  "The drive's latest assessment: capacitor and fan life, allowed current and utilisation, health band, risk and findings",
		Response: DriveHealth{}}, s.driveHealth)
	s.route(operation{Method: http.MethodGet, Path: v1 + "/drives/:id/health/history", Tag: "health", Role: store.RoleViewer,
		Summary:  "The drive's daily assessments between from and to (default the last 365 days)",
		Query:    []param{{Name: "from", Doc: "RFC 3339"}, {Name: "to", Doc: "RFC 3339"}},
		Response: []store.AssessmentDay{}}, s.driveHealthHistory)

	s.route(operation{Method: http.MethodGet, Path: v1 + "/findings", Tag: "health", Role: store.RoleViewer,
		Summary: "Findings (unresolved unless status is given), filtered", Query: listParams(store.FindingsInfo()),
		Response: store.Page[store.Finding]{}}, s.listFindings)
	s.route(operation{Method: http.MethodGet, Path: v1 + "/findings/:id", Tag: "health", Role: store.RoleViewer,
		Summary: "One finding", Response: store.Finding{}}, s.getFinding)
	s.route(operation{Method: http.MethodPost, Path: v1 + "/findings/:id/acknowledge", Tag: "health", Role: store.RolePlanner,
		Summary: "Acknowledge a finding: seen, still counted", Request: store.FindingAction{}, RequestFields: []string{"reason"},
		Response: store.Finding{}}, s.findingAction(s.store.AcknowledgeFinding, []string{"reason"}))
	s.route(operation{Method: http.MethodPost, Path: v1 + "/findings/:id/suppress", Tag: "health", Role: store.RolePlanner,
		Summary: "Suppress a finding until a time, with a reason: not counted toward risk meanwhile", Request: store.FindingAction{},
		Response: store.Finding{}}, s.findingAction(s.store.SuppressFinding, []string{"reason", "until"}))
}

// listParams documents a list endpoint's query parameters.
func listParams(info *store.ResourceInfo) []param {
	ps := []param{{Name: "limit", Kind: "integer"}, {Name: "cursor"}}
	for _, f := range info.Filters {
		ps = append(ps, param{Name: f.Param, Doc: "filter: " + string(f.Kind), Enum: f.Values})
	}
	return ps
}

func (s *Server) driveHealth(c *gin.Context) {
	id, ok := pathID(c, "id")
	if !ok {
		return
	}
	ctx := c.Request.Context()
	d, err := store.Get[store.Drive](ctx, s.store, id)
	if err != nil {
		s.fail(c, err)
		return
	}
	a, err := s.store.LatestAssessment(ctx, id)
	if err != nil {
		s.fail(c, err)
		return
	}
	var rep health.DriveAssessment
	if err := json.Unmarshal(a.Report, &rep); err != nil {
		s.fail(c, err)
		return
	}
	findings, err := s.store.ListFindings(ctx, store.ListQuery{Filters: map[string]string{"drive_id": strconv.FormatInt(id, 10)}, Limit: store.MaxLimit})
	if err != nil {
		s.fail(c, err)
		return
	}
	out := DriveHealth{DriveID: id, Serial: d.Serial, PositionID: a.PositionID, At: a.At,
		Capacitor: componentHealth(rep.Capacitor.LifeReport), Fan: componentHealth(rep.Fan.LifeReport),
		HealthBand: a.HealthBand, RiskScore: a.RiskScore, HealthScore: a.HealthScore, Findings: findings.Items,
		Report: a.Report, Caution: health.SafetyCaution}
	out.Capacitor.LifeUsedFraction = a.CapacitorLifeUsedFraction
	out.Fan.LifeUsedFraction = a.FanLifeUsedFraction
	out.Current.Factors = []health.DerateFactor{}
	if al := rep.Allowance; al != nil {
		out.Current.Duty, out.Current.RatedA, out.Current.AllowedA = al.Duty, &al.RatedA, a.AllowedCurrentA
		out.Current.Factors = al.Factors
	}
	out.Current.UtilisationFraction = a.UtilisationFraction
	c.JSON(http.StatusOK, out)
}

// componentHealth maps a ledger report; the report was stored through
// SafeJSON, so unknowns read back as zero and are returned as null.
func componentHealth(r health.LifeReport) ComponentHealth {
	h := ComponentHealth{EndReached: r.EndReached}
	pos := func(v float64) *float64 {
		if v <= 0 {
			return nil
		}
		return &v
	}
	h.RemainingH, h.RemainingAtPresentH, h.MeanTempC = pos(r.RemainingH), pos(r.RemainingAtPresentH), pos(r.MeanTempC)
	if r.EndReached {
		h.EndOfLife = unixTime(r.EndReachedAt)
		zero := 0.0
		h.RemainingH = &zero
	} else if r.Projected {
		h.EndOfLife, h.EndOfLifeEarliest, h.EndOfLifeLatest = unixTime(r.EndOfLifeAt), unixTime(r.EndOfLifeEarliestAt), unixTime(r.EndOfLifeLatestAt)
	}
	return h
}

func unixTime(s int64) *time.Time {
	if s == 0 {
		return nil
	}
	t := time.Unix(s, 0).UTC()
	return &t
}

func (s *Server) driveHealthHistory(c *gin.Context) {
	id, ok := pathID(c, "id")
	if !ok {
		return
	}
	from, ok := queryTime(c, "from")
	if !ok {
		return
	}
	to, ok := queryTime(c, "to")
	if !ok {
		return
	}
	if to.IsZero() {
		to = time.Now().UTC()
	}
	if from.IsZero() {
		from = to.AddDate(-1, 0, 0)
	}
	if to.Before(from) {
		badRequest(c, "to", "must not be before from")
		return
	}
	days, err := s.store.AssessmentHistory(c.Request.Context(), id, from, to)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusOK, days)
}

func (s *Server) listFindings(c *gin.Context) {
	lq, ok := listQueryFrom(c, store.FindingsInfo(), crudSpec{})
	if !ok {
		return
	}
	page, err := s.store.ListFindings(c.Request.Context(), lq)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusOK, page)
}

func (s *Server) getFinding(c *gin.Context) {
	id, ok := pathID(c, "id")
	if !ok {
		return
	}
	f, err := s.store.GetFinding(c.Request.Context(), id)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusOK, f)
}

func (s *Server) findingAction(act func(ctx context.Context, id int64, a store.FindingAction) (store.Finding, error), fields []string) gin.HandlerFunc {
	return func(c *gin.Context) {
		id, ok := pathID(c, "id")
		if !ok {
			return
		}
		body, ok := s.readObject(c, fields)
		if !ok {
			return
		}
		var a store.FindingAction
		if err := decodeStrict(body, &a); err != nil {
			s.fail(c, err)
			return
		}
		f, err := act(c.Request.Context(), id, a)
		if err != nil {
			s.fail(c, err)
			return
		}
		c.JSON(http.StatusOK, f)
	}
}
