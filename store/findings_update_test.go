package store_test

import (
	"context"
	"reflect"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// TestChangedFindingKeepsPlannerStatus: a run that loaded a finding before
// a planner acknowledged it writes the finding's new content (a silence
// counted in hours grows every run) but leaves the acknowledgement made
// meanwhile; a suppression that ran out reopens the finding, unless a
// planner changed it meanwhile.
func TestChangedFindingKeepsPlannerStatus(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "ack-race")
		// The store checks a suppression's end against its own clock.
		at := time.Now().UTC().Truncate(time.Second)
		finding := func(msg string, hours float64) health.Finding {
			return health.Finding{Rule: "data_quality.silent", Kind: health.KindDataQuality, Severity: health.SeverityMinor,
				Message: msg, Remedy: "Check the link.", Evidence: []health.Evidence{{Name: "silent", Value: hours, Unit: "h"}}}
		}
		save := func(at time.Time, existing []store.Finding, fs ...health.Finding) {
			t.Helper()
			rs := []store.AssessResult{{DriveID: f.Drive.ID, SiteID: f.Site.ID, PositionID: &f.Position.ID, Existing: existing,
				Assessment: health.DriveAssessment{At: at.Unix(), Findings: fs, Evaluated: []string{"data_quality.silent"}}, AssessedTo: &at}}
			if err := s.SaveAssessments(ctx, rs, store.SaveOptions{}); err != nil {
				t.Fatal(err)
			}
		}
		loaded := func() []store.Finding {
			t.Helper()
			cs, err := s.LoadAssessContexts(ctx, []int64{f.Drive.ID}, at)
			if err != nil {
				t.Fatal(err)
			}
			return cs[0].Findings
		}
		save(at, nil, finding("Silent for 25 hours.", 25))
		existing := loaded()
		if len(existing) != 1 {
			t.Fatalf("%d findings after the first save, want 1", len(existing))
		}
		id := existing[0].ID

		// A planner acknowledges after the run loaded the finding.
		planner := store.WithPrincipal(ctx, store.Principal{Actor: "planner"})
		if _, err := s.AcknowledgeFinding(planner, id, store.FindingAction{Reason: "link works ordered"}); err != nil {
			t.Fatal(err)
		}
		later := at.Add(time.Hour)
		save(later, existing, finding("Silent for 26 hours.", 26))
		got, err := s.GetFinding(ctx, id)
		if err != nil {
			t.Fatal(err)
		}
		if got.Status != store.FindingAcknowledged || got.AcknowledgedBy != "planner" || got.StatusReason != "link works ordered" {
			t.Errorf("after the run: status %s by %q (%q), want the acknowledgement kept", got.Status, got.AcknowledgedBy, got.StatusReason)
		}
		want := finding("Silent for 26 hours.", 26)
		if got.Message != want.Message || !got.LastSeenAt.Equal(later) || got.ClearedAt != nil ||
			!reflect.DeepEqual(got.Evidence, []health.Evidence{{Name: "silent", Value: 26.0, Unit: "h"}}) {
			t.Errorf("after the run: message %q, last seen %s, evidence %+v; want the new content", got.Message, got.LastSeenAt, got.Evidence)
		}

		// A suppression that has run out reopens the finding.
		until := later.Add(2 * time.Hour)
		if _, err := s.SuppressFinding(planner, id, store.FindingAction{Reason: "outage planned", Until: &until}); err != nil {
			t.Fatal(err)
		}
		existing = loaded()
		save(until.Add(time.Minute), existing, finding("Silent for 29 hours.", 29))
		if got, err = s.GetFinding(ctx, id); err != nil {
			t.Fatal(err)
		}
		if got.Status != store.FindingOpen || got.StatusReason != "suppression expired" || got.SuppressedUntil != nil || got.Message != "Silent for 29 hours." {
			t.Errorf("after the suppression ran out: status %s (%q), until %v, message %q; want open again", got.Status, got.StatusReason,
				got.SuppressedUntil, got.Message)
		}

		// Run out again, but acknowledged after the run loaded it: the
		// acknowledgement stands.
		until = until.Add(4 * time.Hour)
		if _, err := s.SuppressFinding(planner, id, store.FindingAction{Reason: "outage planned", Until: &until}); err != nil {
			t.Fatal(err)
		}
		existing = loaded()
		if _, err := s.AcknowledgeFinding(planner, id, store.FindingAction{Reason: "seen"}); err != nil {
			t.Fatal(err)
		}
		save(until.Add(time.Minute), existing, finding("Silent for 34 hours.", 34))
		if got, err = s.GetFinding(ctx, id); err != nil {
			t.Fatal(err)
		}
		if got.Status != store.FindingAcknowledged || got.StatusReason != "seen" {
			t.Errorf("acknowledged while the run ran: status %s (%q), want acknowledged", got.Status, got.StatusReason)
		}
	})
}
