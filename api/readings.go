package api

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/json"
	"errors"
	"fmt"

	"mime"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"

	"github.com/gin-gonic/gin"

	"kelvard/store"
)

// Defaults of the ingest limits.
const (
	DefaultMaxIngestBytes = 32 << 20
	DefaultMaxIngestRows  = 50000
)

// replayHeader marks an answer sent again for a repeated Idempotency-Key.
const replayHeader = "Kelvard-Idempotent-Replay"

// csvMedia is the media type of CSV bodies and answers.
const csvMedia = "text/csv"

// initReadings sets the ingest defaults and makes the counters.
func (s *Server) initReadings() error {
	if s.cfg.MaxIngestBytes <= 0 {
		s.cfg.MaxIngestBytes = DefaultMaxIngestBytes
	}
	if s.cfg.MaxIngestRows <= 0 {
		s.cfg.MaxIngestRows = DefaultMaxIngestRows
	}
	m, err := newIngestMetrics(s.registry)
	if err != nil {
		return err
	}
	s.ingest = m
	return nil
}

// readingInput documents a posted reading: the input columns only.
type readingInput struct {
	Site                           string    `json:"site,omitempty"`
	Position                       string    `json:"position"`
	At                             time.Time `json:"at"`
	InternalAirC                   *float64  `json:"internal_air_c"`
	AmbientC                       *float64  `json:"ambient_c"`
	HeatsinkC                      *float64  `json:"heatsink_c"`
	CurrentA                       *float64  `json:"current_a"`
	PeakCurrentA                   *float64  `json:"peak_current_a"`
	FrequencyHz                    *float64  `json:"frequency_hz"`
	BusV                           *float64  `json:"bus_v"`
	BusRippleV                     *float64  `json:"bus_ripple_v"`
	RunHoursH                      *float64  `json:"run_hours_h"`
	PowerOnHoursH                  *float64  `json:"power_on_hours_h"`
	DriveCapacitorLifeUsedFraction *float64  `json:"drive_capacitor_life_used_fraction"`
	DriveFanLifeUsedFraction       *float64  `json:"drive_fan_life_used_fraction"`
	CapacitanceUF                  *float64  `json:"capacitance_uf"`
	ESRMilliohm                    *float64  `json:"esr_milliohm"`
}

// readingRoutes registers the readings endpoints under v1.
func (s *Server) readingRoutes(v1 string) {
	partial := param{Name: "partial", Kind: "string", Enum: []string{"true", "false"},
		Doc: "true stores the valid rows and lists the rejected ones; by default any bad row refuses the whole batch (422)"}
	s.route(operation{Method: http.MethodPost, Path: v1 + "/readings", Tag: "readings", Role: store.RoleIngest,
		Summary: "Post readings: a JSON array or text/csv with a header row; each row names its position by tag (and site by name where the tag is used at several sites). Honours Idempotency-Key.",
		Query:   []param{partial}, Request: []readingInput{}, RequestMedia: []string{csvMedia},
		Response: store.IngestResult{}}, s.postReadings)
	s.route(operation{Method: http.MethodPost, Path: v1 + "/positions/:id/readings", Tag: "readings", Role: store.RoleIngest,
		Summary: "Post readings of one position: rows need no site or position column (one given must name this position). Honours Idempotency-Key.",
		Query:   []param{partial}, Request: []readingInput{}, RequestMedia: []string{csvMedia},
		Response: store.IngestResult{}}, s.postReadings)
	s.route(operation{Method: http.MethodGet, Path: v1 + "/drives/:id/readings", Tag: "readings", Role: store.RoleViewer,
		Summary: "A drive's readings, oldest first, one page at a time; JSON, or CSV with Accept: text/csv (the next page is then in the Link header)",
		Query: []param{{Name: "from", Doc: "RFC 3339, inclusive"}, {Name: "to", Doc: "RFC 3339, exclusive"},
			{Name: "limit", Kind: "integer", Doc: fmt.Sprintf("page size, 1 to %d (default %d)", store.MaxReadingsLimit, store.DefaultReadingsLimit)},
			{Name: "cursor", Doc: "opaque cursor from the previous page"}},
		Response: store.Page[store.Reading]{}, ResponseMedia: []string{csvMedia}}, s.getReadings)
}

// postReadings takes a batch of readings. It answers 200 with the counts
// (inserted, already_present) and the conflicts and rejected rows, whether
// or not anything new was stored, so a replay gets the same status as the
// first post.
func (s *Server) postReadings(c *gin.Context) {
	var opts store.IngestOptions
	if c.Param("id") != "" {
		id, ok := pathID(c, "id")
		if !ok {
			return
		}
		opts.PositionID = id
	}
	for key, vals := range c.Request.URL.Query() {
		if key != "partial" {
			badRequest(c, key, "is not a parameter of this endpoint (partial is)")
			return
		}
		if len(vals) != 1 {
			badRequest(c, key, "give it once")
			return
		}
		b, err := strconv.ParseBool(vals[0])
		if err != nil {
			badRequest(c, "partial", "must be true or false")
			return
		}
		opts.Partial = b
	}
	media, ok := ingestMedia(c)
	if !ok {
		return
	}
	key, ok := idempotencyKey(c)
	if !ok {
		return
	}
	body, err := s.readIngestBody(c)
	if err != nil {
		s.fail(c, describeJSONError(err))
		return
	}

	ctx := c.Request.Context()
	if key != "" {
		tok := tokenOf(c)
		fp := sha256.New()
		fmt.Fprintf(fp, "%s\n%s\npartial=%t\n%s\n", c.Request.Method, c.Request.URL.Path, opts.Partial, media)
		fp.Write(body)
		outcome, prior, err := s.store.ClaimIdempotencyKey(ctx, tok.ID, key, fp.Sum(nil))
		if err != nil {
			s.fail(c, err)
			return
		}
		switch outcome {
		case store.IdempotencyReplay:
			c.Header(replayHeader, "true")
			c.Data(prior.Status, prior.ContentType, prior.Body)
			return
		case store.IdempotencyMismatch:
			writeProblem(c, Problem{Status: http.StatusUnprocessableEntity, Title: "Idempotency-Key Reused",
				Detail: "this Idempotency-Key was used for a different request; use a new key for a new request"})
			return
		case store.IdempotencyInFlight:
			c.Header("Retry-After", "1")
			writeProblem(c, Problem{Status: http.StatusConflict, Title: "Request In Progress",
				Detail: "a request with this Idempotency-Key is still being processed; retry shortly"})
			return
		}
		kept := false
		defer func() {
			if !kept {
				// The request failed: free the key so the client may retry.
				if err := s.store.ReleaseIdempotencyKey(context.WithoutCancel(ctx), tok.ID, key); err != nil {
					s.log.WarnContext(ctx, "release idempotency key", "err", err)
				}
			}
		}()
		answer, ok := s.ingestBody(c, body, media, opts)
		if !ok {
			return
		}
		err = s.store.SaveIdempotentAnswer(context.WithoutCancel(ctx), tok.ID, key,
			store.StoredAnswer{Status: http.StatusOK, ContentType: gin.MIMEJSON, Body: answer})
		if err != nil {
			// The readings are stored; only the kept answer is lost, and a
			// replay would find them already present.
			s.log.WarnContext(ctx, "keep idempotent answer", "err", err)
		} else {
			kept = true
		}
		c.Data(http.StatusOK, gin.MIMEJSON, answer)
		return
	}
	if answer, ok := s.ingestBody(c, body, media, opts); ok {
		c.Data(http.StatusOK, gin.MIMEJSON, answer)
	}
}

// ingestBody parses and stores a body and returns the JSON answer; on
// failure it has already answered.
func (s *Server) ingestBody(c *gin.Context, body []byte, media string, opts store.IngestOptions) ([]byte, bool) {
	popts := store.ParseOptions{MaxRows: s.cfg.MaxIngestRows}
	var (
		batch store.ReadingBatch
		err   error
	)
	if media == csvMedia {
		batch, err = store.ParseReadingsCSV(body, popts)
	} else {
		batch, err = store.ParseReadingsJSON(body, popts)
	}
	var (
		me *store.MalformedError
		tm *store.TooManyRowsError
		ve *store.ValidationError
	)
	switch {
	case errors.As(err, &me):
		writeProblem(c, Problem{Status: http.StatusBadRequest, Detail: "the body cannot be read as readings; nothing was written", Errors: me.Fields})
		return nil, false
	case errors.As(err, &tm):
		writeProblem(c, Problem{Status: http.StatusRequestEntityTooLarge,
			Detail: fmt.Sprintf("the body holds more than %d readings; send at most %d per request", tm.Limit, tm.Limit)})
		return nil, false
	case err != nil:
		s.fail(c, err)
		return nil, false
	}
	opts.Refused = batch.Refused
	res, err := s.store.Ingest(c.Request.Context(), batch.Rows, opts)
	if errors.As(err, &ve) {
		s.ingest.Rejected.WithLabelValues(rejectedInvalid).Add(float64(countRows(ve.Fields)))
	}
	if err != nil {
		s.fail(c, err)
		return nil, false
	}
	s.ingest.Ingested.Add(float64(res.Inserted))
	s.ingest.Rejected.WithLabelValues(rejectedInvalid).Add(float64(countRows(res.Rejected)))
	s.ingest.Rejected.WithLabelValues(rejectedConflict).Add(float64(len(res.Conflicts)))
	answer, err := json.Marshal(res)
	if err != nil {
		s.fail(c, fmt.Errorf("encode ingest answer: %w", err))
		return nil, false
	}
	return answer, true
}

// ingestMedia reads the body's media type: JSON or CSV, else 415.
func ingestMedia(c *gin.Context) (string, bool) {
	ct := c.GetHeader("Content-Type")
	media, _, err := mime.ParseMediaType(ct)
	switch {
	case err == nil && media == csvMedia:
		return csvMedia, true
	case err == nil && (media == gin.MIMEJSON || strings.HasSuffix(media, "+json")):
		return gin.MIMEJSON, true
	}
	writeProblem(c, Problem{Status: http.StatusUnsupportedMediaType,
		Detail: fmt.Sprintf("Content-Type %q: send readings as application/json (an array) or text/csv (with a header row)", ct)})
	return "", false
}

// readIngestBody reads the body up to the ingest limit.
func (s *Server) readIngestBody(c *gin.Context) ([]byte, error) {
	limit := s.cfg.MaxIngestBytes
	if c.Request.ContentLength > limit {
		return nil, &http.MaxBytesError{Limit: limit}
	}
	var buf bytes.Buffer
	if n := c.Request.ContentLength; n > 0 {
		buf.Grow(int(n) + 1)
	}
	_, err := buf.ReadFrom(http.MaxBytesReader(c.Writer, c.Request.Body, limit))
	return buf.Bytes(), err
}

// idempotencyKey reads the Idempotency-Key header: a structured-field
// string ("…", RFC 8941), or for leniency a bare token, of 1 to 255
// printable ASCII characters. Absent gives "".
func idempotencyKey(c *gin.Context) (string, bool) {
	vals := c.Request.Header.Values("Idempotency-Key")
	if len(vals) == 0 {
		return "", true
	}
	bad := func(reason string) (string, bool) {
		badRequest(c, "Idempotency-Key", "%s", reason)
		return "", false
	}
	if len(vals) > 1 {
		return bad("give the header once")
	}
	v := strings.TrimSpace(vals[0])
	if strings.HasPrefix(v, `"`) {
		if len(v) < 2 || v[len(v)-1] != '"' {
			return bad("is a malformed quoted string")
		}
		var b strings.Builder
		in := v[1 : len(v)-1]
		for i := 0; i < len(in); i++ {
			switch ch := in[i]; {
			case ch == '\\':
				if i+1 == len(in) || (in[i+1] != '"' && in[i+1] != '\\') {
					return bad("is a malformed quoted string")
				}
				i++
				b.WriteByte(in[i])
			case ch == '"':
				return bad("is a malformed quoted string")
			default:
				b.WriteByte(ch)
			}
		}
		v = b.String()
	} else if strings.ContainsAny(v, `"\`) {
		return bad("must be a quoted string or a bare token without quotes or backslashes")
	}
	if v == "" || len(v) > store.MaxIdempotencyKeyLen {
		return bad(fmt.Sprintf("must hold 1 to %d characters", store.MaxIdempotencyKeyLen))
	}
	for i := 0; i < len(v); i++ {
		if v[i] < 0x20 || v[i] > 0x7e {
			return bad("must hold printable ASCII characters only")
		}
	}
	return v, true
}

// getReadings answers a page of a drive's readings as JSON or CSV.
func (s *Server) getReadings(c *gin.Context) {
	id, ok := pathID(c, "id")
	if !ok {
		return
	}
	var limit int
	for key, vals := range c.Request.URL.Query() {
		if len(vals) != 1 {
			badRequest(c, key, "give it once")
			return
		}
		switch key {
		case "from", "to", "cursor":
		case "limit":
			n, err := strconv.Atoi(vals[0])
			if err != nil || n < 1 || n > store.MaxReadingsLimit {
				badRequest(c, "limit", "must be an integer from 1 to %d", store.MaxReadingsLimit)
				return
			}
			limit = n
		default:
			badRequest(c, key, "is not a parameter of this endpoint (from, to, limit and cursor are)")
			return
		}
	}
	from, ok := queryTime(c, "from")
	if !ok {
		return
	}
	to, ok := queryTime(c, "to")
	if !ok {
		return
	}
	page, err := s.store.Readings(c.Request.Context(), id, from, to, limit, c.Query("cursor"))
	if err != nil {
		s.fail(c, err)
		return
	}
	if c.NegotiateFormat(gin.MIMEJSON, csvMedia) != csvMedia {
		c.JSON(http.StatusOK, page)
		return
	}
	if page.Next != "" {
		next := *c.Request.URL
		q := next.Query()
		q.Set("cursor", page.Next)
		next.RawQuery = q.Encode()
		c.Header("Link", fmt.Sprintf("<%s>; rel=\"next\"", (&url.URL{Path: next.Path, RawQuery: next.RawQuery}).String()))
	}
	c.Header("Content-Type", csvMedia+"; charset=utf-8")
	c.Status(http.StatusOK)
	if err := store.WriteReadingsCSV(c.Writer, page.Items, store.ReadingOutputColumns()); err != nil {
		s.log.WarnContext(c.Request.Context(), "write readings CSV", "err", err)
	}
}
