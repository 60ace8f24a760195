package api

import (
	"bytes"
	"errors"
	"fmt"
	"mime"
	"net/http"
	"strconv"
	"strings"

	"github.com/gin-gonic/gin"

	"kelvard/store"
	"kelvard/store/csvio"
)

// DefaultMaxImportBytes caps a CSV import body when Config.MaxImportBytes
// is not set: a register of tens of thousands of drives fits well inside.
const DefaultMaxImportBytes = 32 << 20

// csvKinds lists the kinds the import and export paths take.
func csvKinds() []string {
	var out []string
	for _, k := range append(csvio.Kinds(), csvio.KindReadings) {
		out = append(out, string(k))
	}
	return out
}

// registerCSV adds the register's CSV import and export.
func (s *Server) registerCSV(v1 string) {
	kind := []param{{Name: "kind", Enum: csvKinds(), Doc: "what the file holds"}}
	s.route(operation{Method: http.MethodPost, Path: v1 + "/import/:kind", Tag: "register", Role: store.RolePlanner,
		Summary: "Import a register CSV file (DEVELOPERS.md, CSV formats): rows create objects or update the one with the same natural key, " +
			"in one transaction; a bad row fails the whole file with 422 naming every bad row, unless partial",
		PathParams: kind, Query: []param{{Name: "partial", Kind: "boolean", Doc: "write the good rows and list the bad ones"}},
		RequestMedia: []string{"text/csv"}, Response: csvio.Result{}}, s.importCSV)
	s.route(operation{Method: http.MethodGet, Path: v1 + "/export/:kind", Tag: "register", Role: store.RoleViewer,
		Summary:    "Export the register as CSV in the import format, limited to the token's sites",
		PathParams: kind, ResponseMedia: []string{"text/csv"}}, s.exportCSV)
}

// csvKind reads the kind path parameter, answering 404 for an unknown one.
func csvKind(c *gin.Context) (csvio.Kind, bool) {
	k, err := csvio.ParseKind(c.Param("kind"))
	if err != nil {
		writeProblem(c, Problem{Status: http.StatusNotFound, Detail: fmt.Sprintf("no CSV kind %q; kinds are %s", c.Param("kind"), strings.Join(csvKinds(), ", "))})
		return "", false
	}
	return k, true
}

// onlyQuery answers 400 when the request carries a query parameter not in
// allowed, so a misspelt option is not silently ignored.
func onlyQuery(c *gin.Context, allowed ...string) bool {
	for key, vals := range c.Request.URL.Query() {
		ok := false
		for _, a := range allowed {
			ok = ok || key == a
		}
		if !ok {
			badRequest(c, key, "is not a parameter of this endpoint")
			return false
		}
		if len(vals) != 1 {
			badRequest(c, key, "give it once")
			return false
		}
	}
	return true
}

func (s *Server) importCSV(c *gin.Context) {
	kind, ok := csvKind(c)
	if !ok || !onlyQuery(c, "partial") {
		return
	}
	var opts csvio.Options
	if v := c.Query("partial"); v != "" {
		p, err := strconv.ParseBool(v)
		if err != nil {
			badRequest(c, "partial", "must be true or false")
			return
		}
		opts.Partial = p
	}
	mt, params, err := mime.ParseMediaType(c.GetHeader("Content-Type"))
	if cs := strings.ToLower(params["charset"]); err != nil || mt != "text/csv" || (cs != "" && cs != "utf-8") {
		writeProblem(c, Problem{Status: http.StatusUnsupportedMediaType, Detail: "send the file as text/csv in UTF-8"})
		return
	}
	opts.Size = max(c.Request.ContentLength, 0)
	res, err := csvio.Import(c.Request.Context(), s.store, kind, http.MaxBytesReader(c.Writer, c.Request.Body, s.cfg.MaxImportBytes), opts)
	if err != nil {
		s.failCSV(c, err)
		return
	}
	c.JSON(http.StatusOK, res)
}

func (s *Server) exportCSV(c *gin.Context) {
	kind, ok := csvKind(c)
	if !ok || !onlyQuery(c) {
		return
	}
	var buf bytes.Buffer
	if err := csvio.Export(c.Request.Context(), s.store, kind, &buf); err != nil {
		s.failCSV(c, err)
		return
	}
	c.Header("Content-Disposition", fmt.Sprintf("attachment; filename=%q", string(kind)+".csv"))
	c.Data(http.StatusOK, "text/csv; charset=utf-8", buf.Bytes())
}

// failCSV answers 501 for a kind not available yet, else as s.fail does.
func (s *Server) failCSV(c *gin.Context, err error) {
	if errors.Is(err, csvio.ErrNotAvailable) {
		writeProblem(c, Problem{Status: http.StatusNotImplemented, Detail: err.Error()})
		return
	}
	s.fail(c, err)
}
