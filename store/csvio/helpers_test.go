package csvio

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"kelvard/store"
	"kelvard/store/storetest"
)

// forEachStore runs f against PostgreSQL and SQLite, each on a fresh
// database, in parallel.
func forEachStore(t *testing.T, f func(t *testing.T, s *store.Store)) {
	t.Helper()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			f(t, storetest.Open(t, d))
		})
	}
}

// fixture reads testdata/register/KIND.csv.
func fixture(t *testing.T, k Kind) string {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("testdata", "register", string(k)+".csv"))
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// mustImport imports text and fails the test on any error.
func mustImport(t *testing.T, s *store.Store, k Kind, text string) Result {
	t.Helper()
	res, err := Import(context.Background(), s, k, strings.NewReader(text), Options{})
	if err != nil {
		t.Fatalf("import %s: %v", k, err)
	}
	return res
}

// importAll imports every fixture file in order.
func importAll(t *testing.T, s *store.Store) map[Kind]Result {
	t.Helper()
	out := map[Kind]Result{}
	for _, k := range Kinds() {
		out[k] = mustImport(t, s, k, fixture(t, k))
	}
	return out
}

// export returns Export's bytes.
func export(t *testing.T, ctx context.Context, s *store.Store, k Kind) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := Export(ctx, s, k, &b); err != nil {
		t.Fatalf("export %s: %v", k, err)
	}
	return b.Bytes()
}

// auditCount counts audit rows, to show that an import wrote nothing.
func auditCount(t *testing.T, s *store.Store) int64 {
	t.Helper()
	var n int64
	if err := s.DB(context.Background()).Model(&store.AuditEntry{}).Count(&n).Error; err != nil {
		t.Fatal(err)
	}
	return n
}

// get finds one object by list filters, failing the test when there is not
// exactly one.
func get[T any, P store.Record[T]](t *testing.T, s *store.Store, filters map[string]string) T {
	t.Helper()
	page, err := store.List[T, P](context.Background(), s, store.ListQuery{Filters: filters})
	if err != nil {
		t.Fatal(err)
	}
	if len(page.Items) != 1 {
		t.Fatalf("%v: %d objects, want 1", filters, len(page.Items))
	}
	return page.Items[0]
}

// lines lists "line: field" of each field error.
func lines(fe []store.FieldError) []string {
	out := make([]string, len(fe))
	for i, f := range fe {
		out[i] = itoa(f.Line) + ":" + f.Field
	}
	return out
}

func itoa(n int) string { return id(int64(n)) }
