package api

import (
	"bytes"
	"fmt"
	"io"
	"mime"
	"net/http"
	"strconv"
	"strings"
	"time"

	"github.com/gin-gonic/gin"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/plan"
)

// Media types of the planning exports.
const (
	mediaCSV      = "text/csv"
	mediaCalendar = "text/calendar"
)

// planningRoutes registers the forecast, the fleet statistics and the work
// orders.
func (s *Server) planningRoutes(v1 string) {
	s.route(operation{Method: http.MethodGet, Path: v1 + "/forecast", Tag: "planning", Role: store.RoleViewer,
		Summary: "Replacement forecast: each drive's capacitor and fan end of life with its band over the horizon, priced into a budget " +
			"by month and site (JSON; CSV of the items with Accept: text/csv, of the budget with table=budget)",
		Query: []param{
			{Name: "horizon_months", Kind: "integer", Doc: "months ahead, 1 to 120 (default 24)"},
			{Name: "refurbish_share", Kind: "number", Doc: "replace capacitors while a kit costs less than this share of a new drive (default 0.5, common practice)"},
			{Name: "table", Enum: []string{"items", "budget"}, Doc: "which table the CSV answer holds (default items)"},
		},
		Response: plan.Forecast{}, ResponseMedia: []string{mediaCSV}}, s.forecast)
	s.route(operation{Method: http.MethodGet, Path: v1 + "/reliability", Tag: "planning", Role: store.RoleViewer,
		Summary: "Fleet reliability: Weibull fits per group and failure mode with B10 and bounds, probability-plot points, expected " +
			"failures in 12 months, spares per model at 90 and 95 % service levels, and a backtest of the capacitor life model",
		Query: []param{
			{Name: "dimension", Enum: []string{plan.DimensionFleet, plan.DimensionModel, plan.DimensionEnvironment}, Doc: "report only these groups"},
			{Name: "mode", Doc: "report only this failure mode, or any"},
		},
		Response: plan.Reliability{}}, s.reliability)

	woQuery := listParams(store.WorkOrdersInfo())
	for i := range woQuery {
		if woQuery[i].Name == "status" {
			woQuery[i].Enum = append([]string{"open"}, woQuery[i].Enum...)
			woQuery[i].Doc = "open lists proposed, approved and scheduled orders; without status, every order but withdrawn proposals"
		}
	}
	woQuery = append(woQuery, param{Name: "drive_id", Kind: "integer", Doc: "orders with a line on this drive"},
		param{Name: "format", Enum: []string{"json", "csv", "ics"}, Doc: "export every matching order (no paging) as JSON, CSV or iCalendar; Accept: text/csv or text/calendar does the same"})
	s.route(operation{Method: http.MethodGet, Path: v1 + "/work-orders", Tag: "planning", Role: store.RoleViewer,
		Summary: "Work orders with their lines and the safety caution (a page as JSON; every matching order as CSV or iCalendar RFC 5545, one VTODO per order)",
		Query:   woQuery, Response: store.Page[store.WorkOrder]{}, ResponseMedia: []string{mediaCSV, mediaCalendar}}, s.listWorkOrders)
	s.route(operation{Method: http.MethodPost, Path: v1 + "/work-orders", Tag: "planning", Role: store.RolePlanner,
		Summary: "Write a work order by hand (proposed): lines on drives of one site; labour_h and parts default to the task's estimate",
		Request: newWorkOrderBody{}, Response: store.WorkOrder{}, Status: http.StatusCreated}, s.createWorkOrder)
	s.route(operation{Method: http.MethodPost, Path: v1 + "/work-orders/import", Tag: "planning", Role: store.RolePlanner,
		Summary: "Import status updates from the plant's maintenance system as CSV keyed by external_ref (or work_order_id): " +
			"status, scheduled_for, done_at, reason; every row or nothing",
		RequestMedia: []string{mediaCSV}, Response: store.StatusImportResult{}}, s.importWorkOrderStatuses)
	s.route(operation{Method: http.MethodGet, Path: v1 + "/work-orders/:id", Tag: "planning", Role: store.RoleViewer,
		Summary: "One work order with its lines and the safety caution", Response: store.WorkOrder{}}, s.getWorkOrder)
	s.route(operation{Method: http.MethodPatch, Path: v1 + "/work-orders/:id", Tag: "planning", Role: store.RolePlanner,
		Summary: "Move a work order on (approved, scheduled with scheduled_for, done with what was found and done per line, cancelled " +
			"with a reason), set its external reference or notes; completing a capacitor or fan replacement restarts that part's life",
		Request: store.WorkOrderChange{}, Response: store.WorkOrder{}}, s.changeWorkOrder)
}

// planConfig reads the forecast settings from the query.
func planConfig(c *gin.Context) (plan.Config, bool) {
	var cfg plan.Config
	if v := c.Query("horizon_months"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 || n > 120 {
			badRequest(c, "horizon_months", "must be an integer from 1 to 120")
			return cfg, false
		}
		cfg.HorizonMonths = n
	}
	if v := c.Query("refurbish_share"); v != "" {
		f, err := strconv.ParseFloat(v, 64)
		if err != nil || !(f > 0 && f <= 1) {
			badRequest(c, "refurbish_share", "must be a number in (0, 1]")
			return cfg, false
		}
		cfg.RefurbishShare = f
	}
	return cfg, true
}

// wants reports whether the request asks for a media type by format or
// Accept.
func wants(c *gin.Context, format, media string) bool {
	if f := c.Query("format"); f != "" {
		return f == format
	}
	for _, part := range strings.Split(c.GetHeader("Accept"), ",") {
		if mt, _, err := mime.ParseMediaType(strings.TrimSpace(part)); err == nil && mt == media {
			return true
		}
	}
	return false
}

func (s *Server) forecast(c *gin.Context) {
	if !onlyQuery(c, "horizon_months", "refurbish_share", "table") {
		return
	}
	cfg, ok := planConfig(c)
	if !ok {
		return
	}
	table := c.Query("table")
	if table != "" && table != "items" && table != "budget" {
		badRequest(c, "table", "must be items or budget")
		return
	}
	f, err := plan.ForecastFor(c.Request.Context(), s.store, cfg)
	if err != nil {
		s.fail(c, err)
		return
	}
	if wants(c, "csv", mediaCSV) {
		var buf bytes.Buffer
		write, name := plan.WriteForecastCSV, "forecast.csv"
		if table == "budget" {
			write, name = plan.WriteBudgetCSV, "budget.csv"
		}
		if err := write(&buf, f); err != nil {
			s.fail(c, err)
			return
		}
		c.Header("Content-Disposition", fmt.Sprintf("attachment; filename=%q", name))
		c.Data(http.StatusOK, "text/csv; charset=utf-8", buf.Bytes())
		return
	}
	c.JSON(http.StatusOK, f)
}

func (s *Server) reliability(c *gin.Context) {
	if !onlyQuery(c, "dimension", "mode") {
		return
	}
	filter := plan.ReliabilityFilter{Dimension: c.Query("dimension"), Mode: c.Query("mode")}
	switch filter.Dimension {
	case "", plan.DimensionFleet, plan.DimensionModel, plan.DimensionEnvironment:
	default:
		badRequest(c, "dimension", "must be fleet, model or environment")
		return
	}
	if m := filter.Mode; m != "" && m != plan.ModeAny && !health.FailureMode(m).Valid() {
		badRequest(c, "mode", "must be any or one of %v", health.FailureModes())
		return
	}
	r, err := plan.ReliabilityFor(c.Request.Context(), s.store, plan.Config{})
	if err != nil {
		s.fail(c, err)
		return
	}
	filter.Apply(&r)
	c.JSON(http.StatusOK, r)
}

func (s *Server) listWorkOrders(c *gin.Context) {
	lq := store.ListQuery{Filters: map[string]string{}}
	for key, vals := range c.Request.URL.Query() {
		if len(vals) != 1 {
			badRequest(c, key, "give it once")
			return
		}
		v := vals[0]
		switch key {
		case "limit":
			n, err := strconv.Atoi(v)
			if err != nil || n < 1 || n > store.MaxLimit {
				badRequest(c, "limit", "must be an integer from 1 to %d", store.MaxLimit)
				return
			}
			lq.Limit = n
		case "cursor":
			lq.Cursor = v
		case "format":
			if v != "json" && v != "csv" && v != "ics" {
				badRequest(c, "format", "must be json, csv or ics")
				return
			}
		case "drive_id":
			if n, err := strconv.ParseInt(v, 10, 64); err != nil || n <= 0 {
				badRequest(c, "drive_id", "must be a positive integer id")
				return
			}
			lq.Filters[key] = v
		case "status":
			if v == "open" {
				lq.Filters[key] = v
				continue
			}
			fallthrough
		default:
			known := false
			for _, f := range store.WorkOrdersInfo().Filters {
				known = known || f.Param == key
			}
			if !known {
				badRequest(c, key, "is not a filter of work-orders")
				return
			}
			lq.Filters[key] = v
		}
	}
	ctx := c.Request.Context()
	csvOut, icsOut := wants(c, "csv", mediaCSV), wants(c, "ics", mediaCalendar)
	if !csvOut && !icsOut && c.Query("format") != "json" {
		page, err := s.store.ListWorkOrders(ctx, lq)
		if err != nil {
			s.fail(c, err)
			return
		}
		c.JSON(http.StatusOK, page)
		return
	}
	orders, err := s.store.AllWorkOrders(ctx, lq.Filters)
	if err != nil {
		s.fail(c, err)
		return
	}
	var buf bytes.Buffer
	switch {
	case csvOut:
		err = plan.WriteWorkOrdersCSV(&buf, orders)
		c.Header("Content-Disposition", `attachment; filename="work-orders.csv"`)
	case icsOut:
		err = plan.WriteICalendar(&buf, orders, s.store.Now())
		c.Header("Content-Disposition", `attachment; filename="work-orders.ics"`)
	default:
		c.JSON(http.StatusOK, store.Page[store.WorkOrder]{Items: orders})
		return
	}
	if err != nil {
		s.fail(c, err)
		return
	}
	ct := "text/csv; charset=utf-8"
	if icsOut {
		ct = "text/calendar; charset=utf-8"
	}
	c.Data(http.StatusOK, ct, buf.Bytes())
}

func (s *Server) getWorkOrder(c *gin.Context) {
	id, ok := pathID(c, "id")
	if !ok {
		return
	}
	o, err := s.store.GetWorkOrder(c.Request.Context(), id)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusOK, o)
}

// newWorkOrderBody is the body of a hand-written order: labour_h and parts
// may be left out to take the task's estimate for the drive's model.
type newWorkOrderBody struct {
	Lines []struct {
		DriveID int64          `json:"drive_id"`
		Task    store.WorkTask `json:"task"`
		Reason  string         `json:"reason"`
		Parts   *string        `json:"parts"`
		LabourH *float64       `json:"labour_h"`
	} `json:"lines"`
	DueAt       *time.Time `json:"due_at"`
	ExternalRef string     `json:"external_ref"`
	Notes       string     `json:"notes"`
}

func (s *Server) createWorkOrder(c *gin.Context) {
	body, ok := s.readObject(c, []string{"lines", "due_at", "external_ref", "notes"})
	if !ok {
		return
	}
	var b newWorkOrderBody
	if err := decodeStrict(body, &b); err != nil {
		s.fail(c, err)
		return
	}
	ctx := c.Request.Context()
	n := store.NewWorkOrder{DueAt: b.DueAt, ExternalRef: b.ExternalRef, Notes: b.Notes}
	cfg := plan.Config{}.Defaults()
	for _, l := range b.Lines {
		nl := store.NewWorkOrderLine{DriveID: l.DriveID, Task: l.Task, Reason: l.Reason}
		if l.LabourH == nil || l.Parts == nil {
			// The store reports a missing drive with the line's field.
			if d, err := store.Get[store.Drive](ctx, s.store, l.DriveID); err == nil {
				if m, err := store.Get[store.DriveModel](ctx, s.store, d.ModelID); err == nil {
					nl.LabourH, nl.Parts = cfg.TaskLabourH(l.Task, m), plan.TaskParts(l.Task, m)
				}
			}
		}
		if l.LabourH != nil {
			nl.LabourH = *l.LabourH
		}
		if l.Parts != nil {
			nl.Parts = *l.Parts
		}
		n.Lines = append(n.Lines, nl)
	}
	o, err := s.store.CreateWorkOrder(ctx, n)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.Header("Location", c.Request.URL.Path+"/"+strconv.FormatInt(o.ID, 10))
	c.JSON(http.StatusCreated, o)
}

func (s *Server) changeWorkOrder(c *gin.Context) {
	id, ok := pathID(c, "id")
	if !ok {
		return
	}
	body, ok := s.readObject(c, []string{"status", "scheduled_for", "external_ref", "notes", "reason", "done_at", "lines"})
	if !ok {
		return
	}
	var ch store.WorkOrderChange
	if err := decodeStrict(body, &ch); err != nil {
		s.fail(c, err)
		return
	}
	o, err := s.store.ChangeWorkOrder(c.Request.Context(), id, ch)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusOK, o)
}

func (s *Server) importWorkOrderStatuses(c *gin.Context) {
	if !onlyQuery(c) {
		return
	}
	mt, params, err := mime.ParseMediaType(c.GetHeader("Content-Type"))
	if cs := strings.ToLower(params["charset"]); err != nil || mt != mediaCSV || (cs != "" && cs != "utf-8") {
		writeProblem(c, Problem{Status: http.StatusUnsupportedMediaType, Detail: "send the file as text/csv in UTF-8"})
		return
	}
	data, err := io.ReadAll(http.MaxBytesReader(c.Writer, c.Request.Body, s.cfg.MaxImportBytes))
	if err != nil {
		s.fail(c, err)
		return
	}
	rows, err := plan.ParseStatusCSV(bytes.NewReader(data))
	if err != nil {
		s.fail(c, err)
		return
	}
	res, err := s.store.ImportWorkOrderStatuses(c.Request.Context(), rows)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusOK, res)
}
