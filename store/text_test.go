package store_test

import (
	"context"
	"errors"
	"strings"
	"testing"
	"time"

	"kelvard/store"
	"kelvard/store/storetest"
)

// TestBadTextIsRefused: text PostgreSQL cannot hold (a NUL character,
// bytes that are not UTF-8) in a list filter, a register object or a
// reading's position is a validation error naming the field on both
// stores, never a database error.
func TestBadTextIsRefused(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "text")
		names := func(err error) string {
			var ve *store.ValidationError
			if !errors.As(err, &ve) {
				return "not a validation error: " + errorText(err)
			}
			var fields []string
			for _, fe := range ve.Fields {
				fields = append(fields, fe.Field)
			}
			return strings.Join(fields, ",")
		}
		for _, bad := range []string{"A\x00B", "A\xffB"} {
			_, err := store.List[store.Site](ctx, s, store.ListQuery{Filters: map[string]string{"name": bad}})
			if got := names(err); got != "name" {
				t.Errorf("list sites named %q: %s", bad, got)
			}
			_, err = store.Create(ctx, s, func(v *store.Site) error {
				v.Name, v.AmbientMinC, v.AmbientMaxC, v.Notes = "Good", 0, 30, bad
				return nil
			})
			if got := names(err); got != "notes" {
				t.Errorf("create a site with notes %q: %s", bad, got)
			}
			_, err = store.Update(ctx, s, f.Position.ID, func(v *store.Position) error {
				v.Description = bad
				return nil
			})
			if got := names(err); got != "description" {
				t.Errorf("update a position's description to %q: %s", bad, got)
			}
			_, err = s.Audit(ctx, store.AuditQuery{Actor: bad})
			if got := names(err); got != "actor" {
				t.Errorf("audit by actor %q: %s", bad, got)
			}
			_, err = s.JobRuns(ctx, store.JobRunQuery{Job: bad})
			if got := names(err); got != "job" {
				t.Errorf("job runs of %q: %s", bad, got)
			}
			v := 20.0
			at := time.Date(2021, 3, 1, 0, 0, 0, 0, time.UTC)
			res, err := s.Ingest(ctx, []store.Reading{{Position: bad, At: at, AmbientC: &v}, {Position: f.Position.Tag, Site: bad, At: at, AmbientC: &v},
				{Position: f.Position.Tag, At: at, AmbientC: &v}}, store.IngestOptions{Partial: true})
			if err != nil || res.Inserted != 1 || len(res.Rejected) != 2 || res.Rejected[0].Field != "position" || res.Rejected[1].Field != "site" {
				t.Errorf("ingest with position or site %q: %+v %v", bad, res, err)
			}
			if _, err := s.Ingest(ctx, []store.Reading{{Position: f.Position.Tag, At: at, AmbientC: &v}}, store.IngestOptions{}); err != nil {
				t.Fatal(err)
			}
			if err := s.DB(ctx).Exec("DELETE FROM readings").Error; err != nil {
				t.Fatal(err)
			}
		}
	})
}

func errorText(err error) string {
	if err == nil {
		return "no error"
	}
	return err.Error()
}
