package api

import (
	"net/http"
	"strconv"

	"github.com/gin-gonic/gin"

	"kelvard/store"
)

// operation documents one route: the OpenAPI document is built from the
// same list that registers the handlers, so the two cannot drift apart.
type operation struct {
	Method, Path, Summary, Tag string
	// Role is the least role allowed; "" leaves the route open.
	Role store.Role
	// Query lists the query parameters.
	Query []param
	// PathParams documents path parameters that are not integer ids.
	PathParams []param
	// Request is a value of the JSON body type (nil: no body);
	// RequestFields limits the documented properties to those accepted.
	Request       any
	RequestFields []string
	// RequestMedia lists extra body media types (text/csv, say).
	RequestMedia []string
	// Response is a value of the JSON answer type (nil: no body).
	Response any
	// ResponseMedia lists extra answer media types.
	ResponseMedia []string
	// Status is the success status (default 200).
	Status int
}

// param is a query parameter.
type param struct {
	Name, Doc string
	// Kind is the JSON schema type ("string" when empty).
	Kind     string
	Enum     []string
	Required bool
}

// route registers a handler and records its operation.
func (s *Server) route(op operation, h gin.HandlerFunc) {
	if op.Status == 0 {
		op.Status = http.StatusOK
	}
	chain := []gin.HandlerFunc{}
	if op.Role != "" {
		chain = append(chain, s.authenticate, require(op.Role), s.limit)
	}
	chain = append(chain, h)
	s.engine.Handle(op.Method, op.Path, chain...)
	s.ops = append(s.ops, op)
}

// routes registers every endpoint.
func (s *Server) routes() {
	s.route(operation{Method: http.MethodGet, Path: "/healthz", Summary: "Liveness: the process answers", Tag: "probes",
		Response: map[string]string{}}, s.health)
	s.route(operation{Method: http.MethodGet, Path: "/readyz", Summary: "Readiness: the database answers and migrations are current", Tag: "probes",
		Response: map[string]string{}}, s.ready)
	metricsRole := store.Role("")
	if s.cfg.MetricsToken {
		metricsRole = store.RoleViewer
	}
	s.route(operation{Method: http.MethodGet, Path: "/metrics", Summary: "Prometheus metrics (text exposition format)", Tag: "probes",
		Role: metricsRole}, s.metricsHandler())
	s.route(operation{Method: http.MethodGet, Path: "/api/v1/openapi.json", Summary: "This API's OpenAPI 3 document", Tag: "meta",
		Response: map[string]any{}}, s.openAPIHandler)

	const v1 = "/api/v1"
	registerCRUD[store.Site](s, crudSpec{path: v1 + "/sites", itemParam: "id", tag: "register"})
	registerCRUD[store.Area](s, crudSpec{path: v1 + "/areas", itemParam: "id", tag: "register"})
	registerCRUD[store.DriveModel](s, crudSpec{path: v1 + "/drive-models", itemParam: "id", tag: "register"})
	registerCRUD[store.Position](s, crudSpec{path: v1 + "/positions", itemParam: "id", tag: "register"})
	registerCRUD[store.Drive](s, crudSpec{path: v1 + "/drives", itemParam: "id", tag: "register"})
	registerCRUD[store.Component](s, crudSpec{path: v1 + "/drives/:id/components", itemParam: "cid", tag: "register",
		parentParam: "id", parentField: "drive_id",
		setParent: func(v any, parent int64) { v.(*store.Component).DriveID = parent },
		parentOf:  func(v any) int64 { return v.(*store.Component).DriveID }})
	registerCRUD[store.Installation](s, crudSpec{path: v1 + "/drives/:id/installations", itemParam: "iid", tag: "register",
		parentParam: "id", parentField: "drive_id", noCreate: true,
		parentOf: func(v any) int64 { return v.(*store.Installation).DriveID }})
	s.route(operation{Method: http.MethodPost, Path: v1 + "/drives/:id/installations", Tag: "register", Role: store.RolePlanner,
		Summary: "Move the drive into a position (position_id) or out of its position (position_id null), in one transaction",
		Request: store.Move{}, Response: store.MoveResult{}, Status: http.StatusCreated}, s.moveDrive)
	registerCRUD[store.Event](s, crudSpec{path: v1 + "/events", itemParam: "id", tag: "register"})
	s.healthRoutes(v1)
	s.registerCSV(v1)
	s.jobRoutes(v1)
	s.readingRoutes(v1)
	s.planningRoutes(v1)

	s.route(operation{Method: http.MethodGet, Path: v1 + "/tokens", Summary: "List tokens (never their secrets)", Tag: "admin",
		Role: store.RoleAdmin, Response: []store.Token{}}, s.listTokens)
	s.route(operation{Method: http.MethodPost, Path: v1 + "/tokens", Summary: "Make a token; the secret is shown once", Tag: "admin",
		Role: store.RoleAdmin, Request: store.NewToken{}, Response: newTokenAnswer{}, Status: http.StatusCreated}, s.createToken)
	s.route(operation{Method: http.MethodDelete, Path: v1 + "/tokens/:id", Summary: "Revoke a token", Tag: "admin",
		Role: store.RoleAdmin, Status: http.StatusNoContent}, s.revokeToken)
	s.route(operation{Method: http.MethodGet, Path: v1 + "/audit", Summary: "The audit log of every write, newest first", Tag: "admin",
		Role: store.RoleAdmin, Response: store.Page[store.AuditEntry]{}, Query: []param{
			{Name: "resource", Doc: "collection name, e.g. drives"}, {Name: "resource_id", Kind: "integer"},
			{Name: "actor"}, {Name: "from", Doc: "RFC 3339"}, {Name: "to", Doc: "RFC 3339"},
			{Name: "limit", Kind: "integer"}, {Name: "cursor"}}}, s.listAudit)
}

func (s *Server) moveDrive(c *gin.Context) {
	id, ok := pathID(c, "id")
	if !ok {
		return
	}
	body, ok := s.readObject(c, []string{"position_id", "at", "status", "notes"})
	if !ok {
		return
	}
	var m store.Move
	if err := decodeStrict(body, &m); err != nil {
		s.fail(c, err)
		return
	}
	res, err := s.store.MoveDrive(c.Request.Context(), id, m)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusCreated, res)
}

// newTokenAnswer is the answer to a token create: the token and, once
// only, its secret.
type newTokenAnswer struct {
	Token  store.Token `json:"token"`
	Secret string      `json:"secret"`
}

func (s *Server) listTokens(c *gin.Context) {
	ts, err := s.store.Tokens(c.Request.Context())
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusOK, ts)
}

func (s *Server) createToken(c *gin.Context) {
	body, ok := s.readObject(c, []string{"name", "role", "sites", "expires_at"})
	if !ok {
		return
	}
	var n store.NewToken
	if err := decodeStrict(body, &n); err != nil {
		s.fail(c, err)
		return
	}
	t, secret, err := s.store.CreateToken(c.Request.Context(), n)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusCreated, newTokenAnswer{Token: t, Secret: secret})
}

func (s *Server) revokeToken(c *gin.Context) {
	id, ok := pathID(c, "id")
	if !ok {
		return
	}
	if _, err := s.store.RevokeToken(c.Request.Context(), id); err != nil {
		s.fail(c, err)
		return
	}
	c.Status(http.StatusNoContent)
}

func (s *Server) listAudit(c *gin.Context) {
	q := store.AuditQuery{Resource: c.Query("resource"), Actor: c.Query("actor"), Cursor: c.Query("cursor")}
	for key := range c.Request.URL.Query() {
		switch key {
		case "resource", "resource_id", "actor", "from", "to", "limit", "cursor":
		default:
			badRequest(c, key, "is not a filter of the audit log")
			return
		}
	}
	if v := c.Query("resource_id"); v != "" {
		n, err := strconv.ParseInt(v, 10, 64)
		if err != nil || n <= 0 {
			badRequest(c, "resource_id", "must be a positive integer")
			return
		}
		q.ResourceID = n
	}
	if v := c.Query("limit"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 || n > store.MaxLimit {
			badRequest(c, "limit", "must be an integer from 1 to %d", store.MaxLimit)
			return
		}
		q.Limit = n
	}
	var ok bool
	if q.From, ok = queryTime(c, "from"); !ok {
		return
	}
	if q.To, ok = queryTime(c, "to"); !ok {
		return
	}
	page, err := s.store.Audit(c.Request.Context(), q)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusOK, page)
}

// Route is a registered endpoint and the least role it needs ("" when
// open).
type Route struct {
	Method, Path string
	Role         store.Role
}

// Routes lists every registered endpoint, in registration order.
func (s *Server) Routes() []Route {
	out := make([]Route, len(s.ops))
	for i, op := range s.ops {
		out[i] = Route{Method: op.Method, Path: op.Path, Role: op.Role}
	}
	return out
}
