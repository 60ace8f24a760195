package api

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"strings"

	"github.com/gin-gonic/gin"

	"kelvard/store"
)

// Problem is an RFC 9457 problem details body, with kelvard's extension
// member "errors" naming each bad field and row.
type Problem struct {
	Type     string             `json:"type"`
	Title    string             `json:"title"`
	Status   int                `json:"status"`
	Detail   string             `json:"detail,omitempty"`
	Instance string             `json:"instance,omitempty"`
	Errors   []store.FieldError `json:"errors,omitempty"`
}

// problemContentType is the media type of RFC 9457 bodies.
const problemContentType = "application/problem+json"

// writeProblem answers with a problem body and aborts the handler chain.
func writeProblem(c *gin.Context, p Problem) {
	if p.Type == "" {
		p.Type = "about:blank"
	}
	if p.Title == "" {
		p.Title = http.StatusText(p.Status)
	}
	p.Instance = c.Request.URL.Path
	body, _ := json.Marshal(p)
	c.Abort()
	c.Data(p.Status, problemContentType, body)
}

// badRequest answers 400 with one named field; a query parameter with no
// name ("?=1") is named "query".
func badRequest(c *gin.Context, field, format string, args ...any) {
	if field == "" {
		field = "query"
	}
	writeProblem(c, Problem{Status: http.StatusBadRequest, Detail: "the request cannot be read",
		Errors: []store.FieldError{{Field: field, Reason: fmt.Sprintf(format, args...)}}})
}

// fail maps an error from the store or the decoder to a problem answer.
// Internal errors are logged with their chain and answered with a plain
// message: no SQL, no stack.
func (s *Server) fail(c *gin.Context, err error) {
	var (
		ve  *store.ValidationError
		mbe *http.MaxBytesError
		de  *decodeError
	)
	switch {
	case errors.As(err, &de):
		writeProblem(c, Problem{Status: http.StatusBadRequest, Detail: "the request body cannot be read", Errors: de.fields})
	case errors.As(err, &mbe):
		writeProblem(c, Problem{Status: http.StatusRequestEntityTooLarge, Detail: fmt.Sprintf("the body exceeds the limit of %d bytes", mbe.Limit)})
	case errors.As(err, &ve):
		writeProblem(c, Problem{Status: http.StatusUnprocessableEntity, Detail: "one or more fields are invalid; nothing was written", Errors: ve.Fields})
	case errors.Is(err, store.ErrNotFound):
		writeProblem(c, Problem{Status: http.StatusNotFound, Detail: "no such object, or it lies outside your sites"})
	case errors.Is(err, store.ErrReferenced):
		writeProblem(c, Problem{Status: http.StatusConflict, Detail: "cannot delete while referenced: " + lastPart(err)})
	case errors.Is(err, store.ErrDuplicate):
		writeProblem(c, Problem{Status: http.StatusConflict, Detail: "an object with that name, tag or serial already exists"})
	case errors.Is(err, store.ErrUnavailable):
		c.Header("Retry-After", "5")
		writeProblem(c, Problem{Status: http.StatusServiceUnavailable, Detail: "the database is unavailable; retry shortly"})
	case errors.Is(err, c.Request.Context().Err()) && c.Request.Context().Err() != nil:
		writeProblem(c, Problem{Status: 499, Title: "Client Closed Request"})
	default:
		s.log.ErrorContext(c.Request.Context(), "request failed", slog.String("path", c.Request.URL.Path), slog.Any("err", err))
		writeProblem(c, Problem{Status: http.StatusInternalServerError, Detail: "an internal error occurred; it has been logged"})
	}
}

// lastPart returns the store's plain explanation after the wrapped context
// ("... still referenced: 2 areas refer to it" → "2 areas refer to it").
func lastPart(err error) string {
	msg := err.Error()
	if i := strings.LastIndex(msg, ": "); i >= 0 {
		return msg[i+2:]
	}
	return msg
}

// unknownFieldReason is the reason given for a field the object lacks.
const unknownFieldReason = "is not a field of this object"

// decodeError is a body that is not the JSON the endpoint takes.
type decodeError struct{ fields []store.FieldError }

func (e *decodeError) Error() string { return fmt.Sprintf("bad body: %v", e.fields) }

// describeJSONError turns a decoder error into a field error.
func describeJSONError(err error) error {
	var (
		se  *json.SyntaxError
		te  *json.UnmarshalTypeError
		mbe *http.MaxBytesError
	)
	switch {
	case errors.As(err, &mbe):
		return err
	case errors.As(err, &se):
		return &decodeError{[]store.FieldError{{Field: "body", Reason: fmt.Sprintf("malformed JSON at byte %d", se.Offset)}}}
	case errors.As(err, &te):
		field := te.Field
		if field == "" {
			field = "body"
		}
		return &decodeError{[]store.FieldError{{Field: field, Reason: "must be a JSON " + jsonKind(te.Type.Kind().String())}}}
	case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF):
		return &decodeError{[]store.FieldError{{Field: "body", Reason: "is empty or cut short"}}}
	case strings.HasPrefix(err.Error(), "json: unknown field "):
		name := strings.Trim(strings.TrimPrefix(err.Error(), "json: unknown field "), `"`)
		return &decodeError{[]store.FieldError{{Field: name, Reason: unknownFieldReason}}}
	case strings.Contains(err.Error(), "parsing time"):
		return &decodeError{[]store.FieldError{{Field: "body", Reason: "a time is not RFC 3339 (for example 2026-01-31T08:00:00Z)"}}}
	}
	return &decodeError{[]store.FieldError{{Field: "body", Reason: err.Error()}}}
}

func jsonKind(goKind string) string {
	switch goKind {
	case "int", "int64", "int32", "float64", "float32", "uint", "uint64":
		return "number"
	case "bool":
		return "boolean"
	case "slice", "array":
		return "array"
	case "struct", "map", "ptr":
		return "object"
	}
	return goKind
}
