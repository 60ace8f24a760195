package api_test

import (
	"context"
	"net/http"
	"slices"
	"strings"
	"testing"

	"github.com/getkin/kin-openapi/openapi3"

	"kelvard/store/storetest"
)

// TestOpenAPIDocument validates the served document with kin-openapi and
// checks that it lists exactly the operations gin has registered.
func TestOpenAPIDocument(t *testing.T) {
	t.Parallel()
	h := newHarness(t, storetest.Dialects[1])
	a := h.must(http.StatusOK, http.MethodGet, "/api/v1/openapi.json", "", nil)
	doc, err := openapi3.NewLoader().LoadFromData(a.body)
	if err != nil {
		t.Fatalf("load document: %v", err)
	}
	if err := doc.Validate(context.Background()); err != nil {
		t.Fatalf("document is not valid OpenAPI 3: %v", err)
	}
	var documented []string
	for path, item := range doc.Paths.Map() {
		for method := range item.Operations() {
			documented = append(documented, method+" "+path)
		}
	}
	var registered []string
	for _, r := range h.srv.Engine().Routes() {
		parts := strings.Split(r.Path, "/")
		for i, p := range parts {
			if strings.HasPrefix(p, ":") {
				parts[i] = "{" + p[1:] + "}"
			}
		}
		registered = append(registered, r.Method+" "+strings.Join(parts, "/"))
	}
	slices.Sort(documented)
	slices.Sort(registered)
	if !slices.Equal(documented, registered) {
		t.Errorf("document and router differ:\ndocumented %v\nregistered %v", documented, registered)
	}
	// Spot checks: a PATCH body documents only the listed fields.
	op := doc.Paths.Find("/api/v1/areas/{id}").Patch
	props := op.RequestBody.Value.Content.Get("application/json").Schema.Value.Properties
	if _, ok := props["site_id"]; ok {
		t.Error("PATCH /areas/{id} documents site_id, which it refuses")
	}
	if _, ok := props["environment"]; !ok {
		t.Error("PATCH /areas/{id} does not document environment")
	}
	if doc.Paths.Find("/api/v1/drives").Get.Security == nil {
		t.Error("GET /api/v1/drives is not marked as needing a token")
	}
}
