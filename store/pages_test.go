package store_test

import (
	"context"
	"encoding/json"
	"errors"
	"reflect"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// pagesFleet builds two sites with one drive each, assesses them by hand
// (site a: urgent, capacitors ending in 60 days, a critical finding; site
// b: sound, ending in 300 days, no finding) and adds readings to drive a.
func pagesFleet(t *testing.T, s *store.Store) (a, b storetest.Fixture, now time.Time) {
	t.Helper()
	ctx := context.Background()
	a, b = storetest.Build(t, s, "a"), storetest.Build(t, s, "b")
	now = time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	result := func(f storetest.Fixture, band health.Band, score float64, eolDays int, findings []health.Finding) store.AssessResult {
		pos, area := f.Position.ID, f.Area.ID
		var da health.DriveAssessment
		da.At = now.Unix()
		da.Capacitor.Projected = true
		da.Capacitor.EndOfLifeAt = now.AddDate(0, 0, eolDays).Unix()
		da.Capacitor.LifeUsedAtAssessmentFraction = 0.5
		da.Risk = health.RiskAssessment{Band: band, RiskScore: score}
		da.Enclosure = &health.EnclosureReport{Checks: []health.EnclosureCheck{{Rule: "enclosure.water", Verdict: health.VerdictPass}}}
		da.Findings = findings
		return store.AssessResult{DriveID: f.Drive.ID, SiteID: f.Site.ID, AreaID: &area, PositionID: &pos, Assessment: da}
	}
	crit := health.Finding{Rule: "enclosure.water", Kind: health.KindEnclosure, Severity: health.SeverityCritical,
		Message: "water", Remedy: "fit a better enclosure", PhysicalWork: true, Evidence: []health.Evidence{{Name: "water", Value: "hose_down"}}}
	err := s.SaveAssessments(ctx, []store.AssessResult{
		result(a, health.BandUrgent, 72, 60, []health.Finding{crit}),
		result(b, health.BandSound, 5, 300, nil),
	}, store.SaveOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var rows []store.Reading
	for h := 0; h < 48; h++ {
		amb, cur := 20+float64(h%2), 40.0
		rows = append(rows, store.Reading{PositionID: a.Position.ID, At: now.Add(time.Duration(h-48) * time.Hour), AmbientC: &amb, CurrentA: &cur})
	}
	if _, err := s.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
		t.Fatal(err)
	}
	return a, b, now
}

func TestFleetPageQueries(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		a, b, now := pagesFleet(t, s)
		all, err := s.Fleet(ctx, store.FleetFilter{}, now, 50, 0)
		if err != nil {
			t.Fatal(err)
		}
		if len(all.Rows) != 2 || all.Rows[0].DriveID != a.Drive.ID || all.Rows[1].DriveID != b.Drive.ID {
			t.Fatalf("rows not ranked by risk: %+v", all.Rows)
		}
		r := all.Rows[0]
		if r.PositionTag != a.Position.Tag || r.AreaName != a.Area.Name || r.SiteName != a.Site.Name || r.ModelName != a.Model.Name ||
			r.OpenFindings != 1 || r.WorstSeverity() != health.SeverityCritical || r.CapacitorEndOfLife == nil {
			t.Errorf("row a = %+v", r)
		}
		sum := all.Summary
		if sum.Total != 2 || sum.Matching != 2 || sum.Bands[health.BandUrgent] != 1 || sum.Bands[health.BandSound] != 1 {
			t.Errorf("summary = %+v", sum)
		}
		day := 24 * time.Hour
		if sum.EndOfLife[90*day] != 1 || sum.EndOfLife[180*day] != 1 || sum.EndOfLife[365*day] != 2 {
			t.Errorf("end-of-life counts = %v", sum.EndOfLife)
		}

		for name, tc := range map[string]struct {
			f    store.FleetFilter
			want []int64
		}{
			"site":     {store.FleetFilter{SiteID: b.Site.ID}, []int64{b.Drive.ID}},
			"area":     {store.FleetFilter{AreaID: a.Area.ID}, []int64{a.Drive.ID}},
			"band":     {store.FleetFilter{Band: health.BandSound}, []int64{b.Drive.ID}},
			"severity": {store.FleetFilter{Severity: health.SeverityMajor}, []int64{a.Drive.ID}},
			"eol":      {store.FleetFilter{EndOfLifeWithin: 180 * day}, []int64{a.Drive.ID}},
			"status":   {store.FleetFilter{Status: health.StatusInStores}, nil},
			"search":   {store.FleetFilter{Search: "sn-B"}, []int64{b.Drive.ID}},
			"wildcard": {store.FleetFilter{Search: "%"}, nil},
		} {
			v, err := s.Fleet(ctx, tc.f, now, 50, 0)
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			var got []int64
			for _, r := range v.Rows {
				got = append(got, r.DriveID)
			}
			if len(got) != len(tc.want) || (len(got) > 0 && got[0] != tc.want[0]) || v.Summary.Matching != int64(len(tc.want)) {
				t.Errorf("%s: drives %v (matching %d), want %v", name, got, v.Summary.Matching, tc.want)
			}
		}
		// The band filter leaves the band counts whole; the site filter
		// narrows them.
		v, err := s.Fleet(ctx, store.FleetFilter{Band: health.BandSound}, now, 50, 0)
		if err != nil || v.Summary.Bands[health.BandUrgent] != 1 {
			t.Errorf("band-filtered summary = %+v, %v", v.Summary, err)
		}
		if _, err := s.Fleet(ctx, store.FleetFilter{Band: "grim"}, now, 50, 0); !isValidation(err) {
			t.Errorf("bad band: %v", err)
		}
		// A token limited to site b sees only b.
		limited := store.WithPrincipal(ctx, store.Principal{Actor: "t", Sites: []int64{b.Site.ID}})
		v, err = s.Fleet(limited, store.FleetFilter{}, now, 50, 0)
		if err != nil || len(v.Rows) != 1 || v.Rows[0].DriveID != b.Drive.ID || v.Summary.Total != 1 {
			t.Errorf("site-limited fleet = %+v, %v", v, err)
		}
	})
}

func TestSiteDrivePositionQueries(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		a, b, now := pagesFleet(t, s)
		// An empty position beside drive a.
		empty, err := store.Create(ctx, s, func(v *store.Position) error {
			v.AreaID, v.Tag, v.SupplyVoltageV = a.Area.ID, "P-EMPTY", 400
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		sv, err := s.Site(ctx, a.Site.ID)
		if err != nil {
			t.Fatal(err)
		}
		if len(sv.Areas) != 1 || len(sv.Positions) != 2 {
			t.Fatalf("site view: %d areas, %d positions", len(sv.Areas), len(sv.Positions))
		}
		for _, pv := range sv.Positions {
			switch pv.Position.ID {
			case a.Position.ID:
				var rep health.EnclosureReport
				if pv.DriveID == nil || *pv.DriveID != a.Drive.ID || pv.HealthBand != health.BandUrgent || json.Unmarshal(pv.Enclosure, &rep) != nil ||
					len(rep.Checks) != 1 || rep.Checks[0].Rule != "enclosure.water" {
					t.Errorf("position a: %+v (%s)", pv, pv.Enclosure)
				}
			case empty.ID:
				if pv.DriveID != nil || pv.Enclosure != nil {
					t.Errorf("empty position: %+v", pv)
				}
			}
		}
		places, err := s.Places(ctx)
		if err != nil || len(places) != 2 || len(places[0].Areas) != 1 {
			t.Errorf("places = %+v, %v", places, err)
		}
		counts, err := s.AreaCounts(ctx)
		if err != nil || counts[a.Area.ID].Positions != 2 || counts[a.Area.ID].Bands[health.BandUrgent] != 1 {
			t.Errorf("area counts = %+v, %v", counts[a.Area.ID], err)
		}

		dv, err := s.Drive(ctx, a.Drive.ID)
		if err != nil {
			t.Fatal(err)
		}
		if dv.Model.ID != a.Model.ID || dv.Site.ID != a.Site.ID || dv.Position == nil || dv.Position.Area.ID != a.Area.ID ||
			dv.Capacitor == nil || dv.Fan == nil || len(dv.Stays) != 1 || dv.Stays[0].PositionTag != a.Position.Tag || dv.Stays[0].Serial != a.Drive.Serial {
			t.Errorf("drive view = %+v", dv)
		}
		pv, err := s.Position(ctx, a.Position.ID)
		if err != nil || pv.DriveID == nil || *pv.DriveID != a.Drive.ID || len(pv.Stays) != 1 || pv.Site.ID != a.Site.ID {
			t.Errorf("position view = %+v, %v", pv, err)
		}
		limited := store.WithPrincipal(ctx, store.Principal{Actor: "t", Sites: []int64{b.Site.ID}})
		if _, err := s.Drive(limited, a.Drive.ID); !store.IsNotFound(err) {
			t.Errorf("drive outside the site limit: %v", err)
		}
		if _, err := s.Site(limited, a.Site.ID); !store.IsNotFound(err) {
			t.Errorf("site outside the site limit: %v", err)
		}

		// 48 hourly readings in 6-hour buckets: 8 buckets of 6, the
		// ambient alternating 20 and 21 averages 20.5.
		bs, err := s.ReadingBuckets(ctx, a.Drive.ID, now.Add(-48*time.Hour), now, 6*time.Hour)
		if err != nil {
			t.Fatal(err)
		}
		if len(bs) != 8 {
			t.Fatalf("%d buckets, want 8", len(bs))
		}
		for _, bk := range bs {
			if bk.N != 6 || bk.AmbientC == nil || *bk.AmbientC != 20.5 || bk.CurrentA == nil || *bk.CurrentA != 40 || bk.BusV != nil ||
				bk.PeakCurrentA == nil || *bk.PeakCurrentA != 40 || bk.Start.Unix()%(6*3600) != 0 {
				t.Errorf("bucket %+v", bk)
			}
		}
		if _, err := s.ReadingBuckets(ctx, a.Drive.ID, now, now, time.Hour); !isValidation(err) {
			t.Errorf("empty range: %v", err)
		}
	})
}

func TestFindingsPageQuery(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		a, b, _ := pagesFleet(t, s)
		v, err := s.FindingsList(ctx, store.FindingsFilter{}, 50, 0)
		if err != nil {
			t.Fatal(err)
		}
		if v.Total != 1 || len(v.Rows) != 1 {
			t.Fatalf("findings = %+v", v)
		}
		r := v.Rows[0]
		if r.Serial != a.Drive.Serial || r.PositionTag != a.Position.Tag || r.SiteName != a.Site.Name || r.AreaName != a.Area.Name ||
			r.Caution != health.SafetyCaution || len(r.Evidence) != 1 || r.Evidence[0].Name != "water" {
			t.Errorf("row = %+v", r)
		}
		for name, f := range map[string]store.FindingsFilter{
			"other site": {SiteID: b.Site.ID}, "other kind": {Kind: health.KindFan}, "resolved": {Status: store.FindingResolved},
			"other rule": {Rule: "fan.end_of_life"}, "minor": {Severity: health.SeverityMinor},
		} {
			if v, err := s.FindingsList(ctx, f, 50, 0); err != nil || v.Total != 0 || len(v.Rows) != 0 {
				t.Errorf("%s: %+v, %v", name, v, err)
			}
		}
		if _, err := s.FindingsList(ctx, store.FindingsFilter{Kind: "noise"}, 50, 0); !isValidation(err) {
			t.Errorf("bad kind: %v", err)
		}
	})
}

func TestSessionToken(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		tok, _, err := s.CreateToken(ctx, store.NewToken{Name: "pages", Role: store.RoleViewer})
		if err != nil {
			t.Fatal(err)
		}
		got, err := s.SessionToken(ctx, tok.ID)
		if err != nil || got.ID != tok.ID || len(got.Hash) == 0 {
			t.Fatalf("session token = %+v, %v", got, err)
		}
		if _, err := s.SessionToken(ctx, tok.ID+100); !errors.Is(err, store.ErrUnauthenticated) {
			t.Errorf("unknown token: %v", err)
		}
		if _, err := s.RevokeToken(ctx, tok.ID); err != nil {
			t.Fatal(err)
		}
		if _, err := s.SessionToken(ctx, tok.ID); !errors.Is(err, store.ErrUnauthenticated) {
			t.Errorf("revoked token: %v", err)
		}
	})
}

func isValidation(err error) bool {
	var ve *store.ValidationError
	return errors.As(err, &ve)
}

// TestPlanningDataLives: the capacitor and fan life reports planning reads
// (cut out of each assessment's report by the database) are the ones the
// assessment saved, field for field.
func TestPlanningDataLives(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		a, b, now := pagesFleet(t, s)
		d, err := s.LoadPlanningData(ctx)
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range []storetest.Fixture{a, b} {
			got, ok := d.Lives[f.Drive.ID]
			if !ok {
				t.Fatalf("no life of drive %d", f.Drive.ID)
			}
			saved, err := s.LatestAssessment(ctx, f.Drive.ID)
			if err != nil {
				t.Fatal(err)
			}
			var rep health.DriveAssessment
			if err := json.Unmarshal(saved.Report, &rep); err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(got.Capacitor, rep.Capacitor.LifeReport) || !reflect.DeepEqual(got.Fan, rep.Fan.LifeReport) {
				t.Errorf("drive %d: planning reads %+v / %+v, the report holds %+v / %+v", f.Drive.ID, got.Capacitor, got.Fan,
					rep.Capacitor.LifeReport, rep.Fan.LifeReport)
			}
			if got.Capacitor.EndOfLifeAt == 0 || got.Capacitor.LifeUsedAtAssessmentFraction != 0.5 || !got.At.Equal(now) {
				t.Errorf("drive %d: life %+v at %v", f.Drive.ID, got.Capacitor, got.At)
			}
		}
	})
}
