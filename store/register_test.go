package store_test

import (
	"context"
	"errors"
	"strconv"
	"testing"
	"time"

	"kelvard/health"
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

func TestRegisterRoundTrip(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "a")
		got, err := store.Get[store.Area](ctx, s, f.Area.ID)
		if err != nil {
			t.Fatal(err)
		}
		if got.Environment != f.Area.Environment || got.Name != f.Area.Name {
			t.Errorf("area read back %+v, want %+v", got, f.Area)
		}
		if got.CreatedAt.Location() != time.UTC {
			t.Errorf("created_at in %v, want UTC", got.CreatedAt.Location())
		}
		m, err := store.Get[store.DriveModel](ctx, s, f.Model.ID)
		if err != nil {
			t.Fatal(err)
		}
		if m.Capacitor.RatedLifeH != 5000 || m.Fan.Runs != health.FanAlways || m.Enclosure.NEMAType != "1" || m.BusTripV != health.DefaultBusTripV(480) {
			t.Errorf("model defaults not kept: %+v", m)
		}
		if f.Position.SiteID != f.Site.ID {
			t.Errorf("position site %d, want %d from its area", f.Position.SiteID, f.Site.ID)
		}
		comps, err := store.List[store.Component](ctx, s, store.ListQuery{Filters: map[string]string{"drive_id": "1"}})
		if err != nil {
			t.Fatal(err)
		}
		if len(comps.Items) != 2 {
			t.Errorf("new drive has %d components, want a capacitor bank and a fan", len(comps.Items))
		}
	})
}

func TestValidationNamesFields(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		_, err := store.Create(ctx, s, func(v *store.Area) error {
			v.SiteID = 999
			v.Environment.Water = "firehose"
			return nil
		})
		var ve *store.ValidationError
		if !errors.As(err, &ve) {
			t.Fatalf("got %v, want a validation error", err)
		}
		fields := map[string]bool{}
		for _, f := range ve.Fields {
			fields[f.Field] = true
		}
		for _, want := range []string{"site_id", "name", "environment.water"} {
			if !fields[want] {
				t.Errorf("validation error %v does not name %s", err, want)
			}
		}
		var n int64
		s.DB(ctx).Model(&store.Area{}).Count(&n)
		if n != 0 {
			t.Errorf("%d areas written after a failed create", n)
		}
	})
}

func TestDeleteWhileReferenced(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "a")
		err := store.Delete[store.Site](ctx, s, f.Site.ID)
		if !errors.Is(err, store.ErrReferenced) {
			t.Fatalf("delete referenced site: %v, want ErrReferenced", err)
		}
		site, err := store.Create(ctx, s, func(v *store.Site) error {
			v.Name, v.AmbientMinC, v.AmbientMaxC = "Empty", 0, 30
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		if err := store.Delete[store.Site](ctx, s, site.ID); err != nil {
			t.Fatalf("delete unreferenced site: %v", err)
		}
		if _, err := store.Get[store.Site](ctx, s, site.ID); !errors.Is(err, store.ErrNotFound) {
			t.Fatalf("deleted site still readable: %v", err)
		}
	})
}

func TestDuplicateName(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		storetest.Build(t, s, "a")
		_, err := store.Create(ctx, s, func(v *store.Site) error {
			v.Name, v.AmbientMinC, v.AmbientMaxC = "Works a", 0, 30
			return nil
		})
		if !errors.Is(err, store.ErrDuplicate) {
			t.Fatalf("duplicate site name: %v, want ErrDuplicate", err)
		}
	})
}

func TestPagingAndScope(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		a := storetest.Build(t, s, "a")
		b := storetest.Build(t, s, "b")
		for i := 0; i < 5; i++ {
			storetest.Build(t, s, string(rune('c'+i)))
		}
		var seen []int64
		q := store.ListQuery{Limit: 3}
		for pages := 0; ; pages++ {
			p, err := store.List[store.Site](ctx, s, q)
			if err != nil {
				t.Fatal(err)
			}
			for _, it := range p.Items {
				seen = append(seen, it.ID)
			}
			if p.Next == "" {
				break
			}
			if pages > 5 {
				t.Fatal("paging does not end")
			}
			q.Cursor = p.Next
		}
		if len(seen) != 7 {
			t.Errorf("paged through %d sites, want 7", len(seen))
		}
		for i := 1; i < len(seen); i++ {
			if seen[i] <= seen[i-1] {
				t.Errorf("ids not ascending across pages: %v", seen)
			}
		}
		limited := store.WithPrincipal(ctx, store.Principal{Actor: "test", Sites: []int64{a.Site.ID}})
		p, err := store.List[store.Drive](limited, s, store.ListQuery{})
		if err != nil {
			t.Fatal(err)
		}
		if len(p.Items) != 1 || p.Items[0].ID != a.Drive.ID {
			t.Errorf("site-limited list gave %d drives", len(p.Items))
		}
		if _, err := store.Get[store.Drive](limited, s, b.Drive.ID); !errors.Is(err, store.ErrNotFound) {
			t.Errorf("site-limited get of another site's drive: %v, want not found", err)
		}
		comps, err := store.List[store.Component](limited, s, store.ListQuery{Filters: map[string]string{"drive_id": itoa(b.Drive.ID)}})
		if err != nil || len(comps.Items) != 0 {
			t.Errorf("site-limited components of another site: %d, %v", len(comps.Items), err)
		}
		if _, err := store.DecodeCursor("%%%"); err == nil {
			t.Error("a broken cursor decodes")
		}
	})
}

func TestMoveDriveKeepsHistory(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "a")
		spare, err := store.Create(ctx, s, func(v *store.Drive) error {
			v.Serial, v.ModelID, v.SiteID = "SPARE-1", f.Model.ID, f.Site.ID
			v.ManufacturedAt = time.Date(2021, 1, 1, 0, 0, 0, 0, time.UTC)
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		swap := time.Date(2024, 5, 6, 7, 0, 0, 0, time.UTC)
		res, err := s.MoveDrive(ctx, spare.ID, store.Move{PositionID: &f.Position.ID, At: swap})
		if err != nil {
			t.Fatal(err)
		}
		if res.Displaced == nil || *res.Displaced != f.Drive.ID || len(res.Closed) != 1 {
			t.Fatalf("swap result %+v", res)
		}
		old, _ := store.Get[store.Drive](ctx, s, f.Drive.ID)
		if old.Status != health.StatusInStores || old.PositionID != nil {
			t.Errorf("displaced drive %+v, want in stores", old)
		}
		for _, c := range []struct {
			at   time.Time
			want int64
		}{
			{swap.Add(-time.Hour), f.Drive.ID},
			{swap, spare.ID},
			{swap.Add(time.Hour), spare.ID},
		} {
			got, err := s.InstalledAt(ctx, f.Position.ID, c.at)
			if err != nil || got != c.want {
				t.Errorf("drive at %s: %d, %v; want %d", c.at, got, err, c.want)
			}
		}
		if _, err := s.InstalledAt(ctx, f.Position.ID, time.Date(2019, 1, 1, 0, 0, 0, 0, time.UTC)); !errors.Is(err, store.ErrNotFound) {
			t.Errorf("before any installation: %v, want not found", err)
		}
		// History is append-only.
		_, err = s.MoveDrive(ctx, f.Drive.ID, store.Move{PositionID: &f.Position.ID, At: swap.Add(-24 * time.Hour)})
		var ve *store.ValidationError
		if !errors.As(err, &ve) {
			t.Errorf("move dated before the latest: %v, want a validation error", err)
		}
		hist, err := store.List[store.Installation](ctx, s, store.ListQuery{Filters: map[string]string{"position_id": itoa(f.Position.ID)}})
		if err != nil || len(hist.Items) != 2 {
			t.Fatalf("position history %d rows, %v", len(hist.Items), err)
		}
		if hist.Items[0].RemovedAt == nil || !hist.Items[0].RemovedAt.Equal(swap) {
			t.Errorf("first installation closed at %v, want %s", hist.Items[0].RemovedAt, swap)
		}
		// Take the spare out for repair.
		if _, err := s.MoveDrive(ctx, spare.ID, store.Move{At: swap.Add(48 * time.Hour), Status: health.StatusInRepair}); err != nil {
			t.Fatal(err)
		}
		sp, _ := store.Get[store.Drive](ctx, s, spare.ID)
		if sp.Status != health.StatusInRepair || sp.PositionID != nil {
			t.Errorf("removed drive %+v", sp)
		}
		audit, err := s.Audit(ctx, store.AuditQuery{Resource: "drives"})
		if err != nil || len(audit.Items) == 0 {
			t.Errorf("no audit of drive moves: %v", err)
		}
	})
}

func TestTokens(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		tok, secret, err := s.CreateToken(ctx, store.NewToken{Name: "gateway", Role: store.RoleIngest})
		if err != nil {
			t.Fatal(err)
		}
		got, err := s.Authenticate(ctx, secret)
		if err != nil || got.ID != tok.ID || got.Role != store.RoleIngest {
			t.Fatalf("authenticate: %+v, %v", got, err)
		}
		for _, bad := range []string{"", "kvd", secret + "x", "kvd_" + tok.Prefix + "_wrong", "Bearer " + secret} {
			if _, err := s.Authenticate(ctx, bad); !errors.Is(err, store.ErrUnauthenticated) {
				t.Errorf("authenticate %q: %v", bad, err)
			}
		}
		if _, err := s.RevokeToken(ctx, tok.ID); err != nil {
			t.Fatal(err)
		}
		if _, err := s.Authenticate(ctx, secret); !errors.Is(err, store.ErrUnauthenticated) {
			t.Errorf("revoked token authenticates: %v", err)
		}
		list, err := s.Tokens(ctx)
		if err != nil || len(list) != 1 || list[0].Hash != nil {
			t.Errorf("token list %+v, %v", list, err)
		}
		boot, _ := store.NewSecret()
		if made, err := s.Bootstrap(ctx, boot); err != nil || made {
			t.Errorf("bootstrap with tokens present: made=%v err=%v", made, err)
		}
	})
}

func itoa(v int64) string { return strconv.FormatInt(v, 10) }
