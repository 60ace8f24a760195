package api

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"slices"
	"strconv"
	"strings"

	"github.com/gin-gonic/gin"

	"kelvard/store"
)

// crudSpec describes how one register collection is exposed.
type crudSpec struct {
	// path is the collection path, e.g. "/sites" or "/drives/:id/components".
	path string
	// parentParam and parentField bind a nested collection to its parent:
	// the path parameter and the JSON filter it sets (e.g. "id" → "drive_id").
	parentParam, parentField string
	// itemParam names the item id parameter ("id", or "cid" when nested).
	itemParam string
	// tag groups the operations in the OpenAPI document.
	tag string
	// noCreate leaves out the generic create (installations are moves).
	noCreate bool
	// setParent writes the parent id into a new object.
	setParent func(v any, parent int64)
	// parentOf reads the parent id of an object, to check nested paths.
	parentOf func(v any) int64
}

// registerCRUD adds list, create, get, PATCH and delete for collection T.
func registerCRUD[T any, P store.Record[T]](s *Server, spec crudSpec) {
	info := store.Info[T, P]()
	item := spec.path + "/:" + spec.itemParam
	var zero T
	name := strings.TrimSuffix(info.Name, "s")

	listQuery := []param{{Name: "limit", Doc: fmt.Sprintf("page size, 1 to %d (default %d)", store.MaxLimit, store.DefaultLimit), Kind: "integer"},
		{Name: "cursor", Doc: "opaque cursor from the previous page's next_cursor"}}
	for _, f := range info.Filters {
		if spec.parentField != "" && f.Param == spec.parentField {
			continue
		}
		listQuery = append(listQuery, param{Name: f.Param, Doc: "filter: " + string(f.Kind), Enum: f.Values})
	}
	s.route(operation{Method: http.MethodGet, Path: spec.path, Summary: "List " + info.Name, Tag: spec.tag, Role: store.RoleViewer,
		Query: listQuery, Response: store.Page[T]{}}, func(c *gin.Context) {
		lq, ok := listQueryFrom(c, info, spec)
		if !ok {
			return
		}
		if spec.parentParam != "" {
			parent, ok := pathID(c, spec.parentParam)
			if !ok {
				return
			}
			lq.Filters[spec.parentField] = strconv.FormatInt(parent, 10)
		}
		page, err := store.List[T, P](c.Request.Context(), s.store, lq)
		if err != nil {
			s.fail(c, err)
			return
		}
		c.JSON(http.StatusOK, page)
	})

	if !spec.noCreate {
		s.route(operation{Method: http.MethodPost, Path: spec.path, Summary: "Create a " + name, Tag: spec.tag, Role: store.RolePlanner,
			Request: zero, RequestFields: info.Create, Response: zero, Status: http.StatusCreated}, func(c *gin.Context) {
			var parent int64
			if spec.parentParam != "" {
				var ok bool
				if parent, ok = pathID(c, spec.parentParam); !ok {
					return
				}
				// The parent must exist and be visible.
				if _, err := store.Get[store.Drive](c.Request.Context(), s.store, parent); err != nil {
					s.fail(c, err)
					return
				}
			}
			body, ok := s.readObject(c, info.Create)
			if !ok {
				return
			}
			v, err := store.Create[T, P](c.Request.Context(), s.store, func(v *T) error {
				if err := decodeStrict(body, v); err != nil {
					return err
				}
				if spec.setParent != nil {
					spec.setParent(v, parent)
				}
				return nil
			})
			if err != nil {
				s.fail(c, err)
				return
			}
			c.Header("Location", c.Request.URL.Path+"/"+strconv.FormatInt(P(&v).Key(), 10))
			c.JSON(http.StatusCreated, v)
		})
	}

	// load fetches the item and checks it belongs to the parent in the path.
	load := func(c *gin.Context) (int64, bool) {
		id, ok := pathID(c, spec.itemParam)
		if !ok {
			return 0, false
		}
		v, err := store.Get[T, P](c.Request.Context(), s.store, id)
		if err != nil {
			s.fail(c, err)
			return 0, false
		}
		if spec.parentParam != "" {
			parent, ok := pathID(c, spec.parentParam)
			if !ok {
				return 0, false
			}
			if spec.parentOf(&v) != parent {
				s.fail(c, fmt.Errorf("%s %d under %d: %w", info.Name, id, parent, store.ErrNotFound))
				return 0, false
			}
		}
		c.Set("kelvard.item", v)
		return id, true
	}

	s.route(operation{Method: http.MethodGet, Path: item, Summary: "Get a " + name, Tag: spec.tag, Role: store.RoleViewer, Response: zero},
		func(c *gin.Context) {
			if _, ok := load(c); !ok {
				return
			}
			v, _ := c.Get("kelvard.item")
			c.JSON(http.StatusOK, v)
		})

	s.route(operation{Method: http.MethodPatch, Path: item, Summary: "Change listed fields of a " + name, Tag: spec.tag, Role: store.RolePlanner,
		Request: zero, RequestFields: info.Patch, Response: zero}, func(c *gin.Context) {
		id, ok := load(c)
		if !ok {
			return
		}
		body, ok := s.readObject(c, info.Patch)
		if !ok {
			return
		}
		v, err := store.Update[T, P](c.Request.Context(), s.store, id, func(v *T) error { return decodeStrict(body, v) })
		if err != nil {
			s.fail(c, err)
			return
		}
		c.JSON(http.StatusOK, v)
	})

	s.route(operation{Method: http.MethodDelete, Path: item, Summary: "Delete a " + name + " (409 while referenced)", Tag: spec.tag,
		Role: store.RolePlanner, Status: http.StatusNoContent}, func(c *gin.Context) {
		id, ok := load(c)
		if !ok {
			return
		}
		if err := store.Delete[T, P](c.Request.Context(), s.store, id); err != nil {
			s.fail(c, err)
			return
		}
		c.Status(http.StatusNoContent)
	})
}

// listQueryFrom reads limit, cursor and the collection's filters, refusing
// any other query parameter so a misspelt filter is not silently ignored.
func listQueryFrom(c *gin.Context, info *store.ResourceInfo, spec crudSpec) (store.ListQuery, bool) {
	lq := store.ListQuery{Filters: map[string]string{}}
	for key, vals := range c.Request.URL.Query() {
		if len(vals) != 1 {
			badRequest(c, key, "give it once")
			return lq, false
		}
		v := vals[0]
		switch key {
		case "limit":
			n, err := strconv.Atoi(v)
			if err != nil || n < 1 || n > store.MaxLimit {
				badRequest(c, "limit", "must be an integer from 1 to %d", store.MaxLimit)
				return lq, false
			}
			lq.Limit = n
		case "cursor":
			lq.Cursor = v
		default:
			known := slices.ContainsFunc(info.Filters, func(f store.Filter) bool { return f.Param == key && f.Param != spec.parentField })
			if !known {
				badRequest(c, key, "is not a filter of %s", info.Name)
				return lq, false
			}
			lq.Filters[key] = v
		}
	}
	return lq, true
}

// pathID reads a positive integer path parameter, answering 404 when it is
// not one (no object can have that id).
func pathID(c *gin.Context, name string) (int64, bool) {
	id, err := strconv.ParseInt(c.Param(name), 10, 64)
	if err != nil || id <= 0 {
		writeProblem(c, Problem{Status: http.StatusNotFound, Detail: fmt.Sprintf("%q is not an id", c.Param(name))})
		return 0, false
	}
	return id, true
}

// readObject reads a JSON object body no larger than the configured limit
// and checks that every key is one of allowed, answering 400 naming the
// first offending key otherwise.
func (s *Server) readObject(c *gin.Context, allowed []string) ([]byte, bool) {
	body, err := io.ReadAll(http.MaxBytesReader(c.Writer, c.Request.Body, s.cfg.MaxBodyBytes))
	if err != nil {
		s.fail(c, describeJSONError(err))
		return nil, false
	}
	var keys map[string]json.RawMessage
	if err := json.Unmarshal(body, &keys); err != nil {
		s.fail(c, describeJSONError(err))
		return nil, false
	}
	if keys == nil {
		badRequest(c, "body", "must be a JSON object")
		return nil, false
	}
	var bad []store.FieldError
	for k := range keys {
		if !slices.Contains(allowed, k) {
			bad = append(bad, store.FieldError{Field: k, Reason: "cannot be set here; accepted fields: " + strings.Join(allowed, ", ")})
		}
	}
	if len(bad) > 0 {
		slices.SortFunc(bad, func(a, b store.FieldError) int { return strings.Compare(a.Field, b.Field) })
		writeProblem(c, Problem{Status: http.StatusBadRequest, Detail: "the body names fields this endpoint does not accept", Errors: bad})
		return nil, false
	}
	return body, true
}

// keyPath finds where a key sits in a JSON document ("environment.rain"),
// because the standard decoder names an unknown field without its path.
func keyPath(body []byte, key string) string {
	var doc any
	if json.Unmarshal(body, &doc) != nil {
		return key
	}
	var walk func(v any, prefix string) (string, bool)
	walk = func(v any, prefix string) (string, bool) {
		switch t := v.(type) {
		case map[string]any:
			if _, ok := t[key]; ok {
				return prefix + key, true
			}
			names := make([]string, 0, len(t))
			for k := range t {
				names = append(names, k)
			}
			slices.Sort(names)
			for _, k := range names {
				if p, ok := walk(t[k], prefix+k+"."); ok {
					return p, true
				}
			}
		case []any:
			for i, e := range t {
				if p, ok := walk(e, fmt.Sprintf("%s[%d].", strings.TrimSuffix(prefix, "."), i)); ok {
					return p, true
				}
			}
		}
		return "", false
	}
	if p, ok := walk(doc, ""); ok {
		return p
	}
	return key
}

// decodeStrict decodes body into v, refusing unknown nested fields and
// trailing data.
func decodeStrict(body []byte, v any) error {
	dec := json.NewDecoder(bytes.NewReader(body))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		err = describeJSONError(err)
		var de *decodeError
		if errors.As(err, &de) && len(de.fields) == 1 && de.fields[0].Reason == unknownFieldReason {
			de.fields[0].Field = keyPath(body, de.fields[0].Field)
		}
		return err
	}
	if dec.More() {
		return &decodeError{[]store.FieldError{{Field: "body", Reason: "holds more than one JSON value"}}}
	}
	return nil
}
