package api

import (
	"encoding/json"
	"net/http"
	"slices"
	"strconv"
	"strings"

	"github.com/getkin/kin-openapi/openapi3"
	"github.com/getkin/kin-openapi/openapi3gen"
	"github.com/gin-gonic/gin"
)

func (s *Server) openAPIHandler(c *gin.Context) {
	// The document depends only on the routes, which never change after
	// New, so it is built once.
	s.openapi.Do(func() {
		doc, err := s.OpenAPI()
		if err != nil {
			s.openapi.err = err
			return
		}
		s.openapi.body, s.openapi.err = json.Marshal(doc)
	})
	if s.openapi.err != nil {
		s.fail(c, s.openapi.err)
		return
	}
	c.Data(http.StatusOK, "application/json", s.openapi.body)
}

// OpenAPI builds the OpenAPI 3 document from the registered operations.
func (s *Server) OpenAPI() (*openapi3.T, error) {
	doc := &openapi3.T{
		OpenAPI: "3.0.3",
		Info: &openapi3.Info{
			Title:       "kelvard",
			Version:     s.cfg.Version,
			Description: "Fleet register and health tracking for variable-frequency drives. Units are SI and named in each field; times are RFC 3339 UTC. Errors are RFC 9457 application/problem+json.",
		},
		Paths: openapi3.NewPaths(),
		Components: &openapi3.Components{
			Schemas: openapi3.Schemas{},
			SecuritySchemes: openapi3.SecuritySchemes{
				"bearer": &openapi3.SecuritySchemeRef{Value: openapi3.NewSecurityScheme().WithType("http").WithScheme("bearer")},
			},
		},
	}
	gen := openapi3gen.NewGenerator(openapi3gen.UseAllExportedFields())
	schemaOf := func(v any) (*openapi3.SchemaRef, error) {
		return gen.NewSchemaRefForValue(v, doc.Components.Schemas)
	}
	problem, err := schemaOf(Problem{})
	if err != nil {
		return nil, err
	}
	doc.Components.Schemas["Problem"] = problem
	problemRef := &openapi3.SchemaRef{Ref: "#/components/schemas/Problem"}

	for _, op := range s.ops {
		path, pathParams := openAPIPath(op.Path)
		o := &openapi3.Operation{
			Summary:     op.Summary,
			Tags:        []string{op.Tag},
			OperationID: operationID(op.Method, path),
			Responses:   openapi3.NewResponses(),
		}
		if op.Role != "" {
			o.Security = &openapi3.SecurityRequirements{{"bearer": []string{}}}
			o.Description = "Needs the " + string(op.Role) + " role or higher."
		}
		for _, p := range pathParams {
			sch := openapi3.NewInt64Schema()
			if slices.Contains(op.PathStrings, p) {
				sch = openapi3.NewStringSchema()
			}
			o.Parameters = append(o.Parameters, &openapi3.ParameterRef{Value: openapi3.NewPathParameter(p).WithSchema(sch)})
		}
		for _, q := range op.Query {
			sch := openapi3.NewStringSchema()
			if q.Kind == "integer" {
				sch = openapi3.NewInt64Schema()
			}
			for _, e := range q.Enum {
				sch.Enum = append(sch.Enum, e)
			}
			p := openapi3.NewQueryParameter(q.Name).WithSchema(sch).WithDescription(q.Doc)
			p.Required = q.Required
			o.Parameters = append(o.Parameters, &openapi3.ParameterRef{Value: p})
		}
		if op.Request != nil {
			ref, err := schemaOf(op.Request)
			if err != nil {
				return nil, err
			}
			if len(op.RequestFields) > 0 {
				ref = onlyFields(ref, op.RequestFields)
			}
			content := openapi3.NewContentWithJSONSchemaRef(ref)
			for _, m := range op.RequestMedia {
				content[m] = openapi3.NewMediaType().WithSchema(openapi3.NewStringSchema())
			}
			o.RequestBody = &openapi3.RequestBodyRef{Value: openapi3.NewRequestBody().WithRequired(true).WithContent(content)}
		}
		ok := openapi3.NewResponse().WithDescription(http.StatusText(op.Status))
		if op.Response != nil && op.Status != http.StatusNoContent {
			ref, err := schemaOf(op.Response)
			if err != nil {
				return nil, err
			}
			content := openapi3.NewContentWithJSONSchemaRef(ref)
			for _, m := range op.ResponseMedia {
				content[m] = openapi3.NewMediaType().WithSchema(openapi3.NewStringSchema())
			}
			ok.Content = content
		}
		o.Responses.Set(strconv.Itoa(op.Status), &openapi3.ResponseRef{Value: ok})
		o.Responses.Set("default", &openapi3.ResponseRef{Value: openapi3.NewResponse().
			WithDescription("An RFC 9457 problem: 400 unreadable input, 401 no or bad token, 403 role too low, 404 not found or outside your sites, 409 conflict, 413 too large, 422 invalid fields, 503 database unavailable.").
			WithContent(openapi3.Content{problemContentType: openapi3.NewMediaType().WithSchemaRef(problemRef)})})
		doc.AddOperation(path, op.Method, o)
	}
	return doc, nil
}

// openAPIPath turns a gin path ("/drives/:id") into an OpenAPI path
// ("/drives/{id}") and lists its parameters.
func openAPIPath(p string) (string, []string) {
	parts := strings.Split(p, "/")
	var params []string
	for i, part := range parts {
		if strings.HasPrefix(part, ":") {
			params = append(params, part[1:])
			parts[i] = "{" + part[1:] + "}"
		}
	}
	return strings.Join(parts, "/"), params
}

func operationID(method, path string) string {
	var b strings.Builder
	b.WriteString(strings.ToLower(method))
	for _, part := range strings.Split(path, "/") {
		part = strings.Trim(part, "{}")
		if part == "" || part == "api" || part == "v1" {
			continue
		}
		for _, w := range strings.FieldsFunc(part, func(r rune) bool { return r == '-' || r == '_' || r == '.' }) {
			b.WriteString(strings.ToUpper(w[:1]) + w[1:])
		}
	}
	return b.String()
}

// onlyFields copies an object schema keeping only the named properties, so
// a create or PATCH body documents exactly what it accepts.
func onlyFields(ref *openapi3.SchemaRef, fields []string) *openapi3.SchemaRef {
	if ref.Value == nil {
		return ref
	}
	cp := *ref.Value
	cp.Properties = openapi3.Schemas{}
	for name, p := range ref.Value.Properties {
		if slices.Contains(fields, name) {
			cp.Properties[name] = p
		}
	}
	cp.AdditionalProperties = openapi3.AdditionalProperties{Has: new(false)}
	return &openapi3.SchemaRef{Value: &cp}
}
