package plan

import (
	"strings"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// proposalData is a small register in memory: a hall without dust and a
// mill with conductive dust, a drive installed in each, three drives in
// stores powered 11, 31 and 2 months ago, a retired drive, and findings.
func proposalData(at time.Time) *store.PlanningData {
	ptr := func(v int64) *int64 { return &v }
	tm := func(s string) *time.Time {
		t, _ := time.Parse(time.DateOnly, s)
		return &t
	}
	made := time.Date(2020, 1, 1, 0, 0, 0, 0, time.UTC)
	seen := at.AddDate(0, 0, -2)
	return &store.PlanningData{
		At:    at,
		Sites: map[int64]store.Site{1: {ID: 1, Name: "Works"}},
		Areas: map[int64]store.Area{
			1: {ID: 1, SiteID: 1, Name: "Hall", Environment: store.Environment{Dust: health.DustNone}},
			2: {ID: 2, SiteID: 1, Name: "Mill", Environment: store.Environment{Dust: health.DustConductive}},
			3: {ID: 3, SiteID: 1, Name: "Stores", Environment: store.Environment{Dust: health.DustSettling}},
		},
		Models:    map[int64]store.DriveModel{1: {ID: 1, Name: "M", FanLabourH: 0.75}},
		Positions: map[int64]store.Position{1: {ID: 1, SiteID: 1, AreaID: 1, Tag: "H-1"}, 2: {ID: 2, SiteID: 1, AreaID: 2, Tag: "M-1"}},
		Drives: []store.Drive{
			{ID: 1, Serial: "D1", ModelID: 1, SiteID: 1, Status: health.StatusInstalled, PositionID: ptr(1), ManufacturedAt: made},
			{ID: 2, Serial: "D2", ModelID: 1, SiteID: 1, Status: health.StatusInstalled, PositionID: ptr(2), ManufacturedAt: made},
			{ID: 3, Serial: "D3", ModelID: 1, SiteID: 1, Status: health.StatusInStores, StoresAreaID: ptr(3), ManufacturedAt: made, LastEnergisedAt: tm("2026-01-05")},
			{ID: 4, Serial: "D4", ModelID: 1, SiteID: 1, Status: health.StatusInStores, StoresAreaID: ptr(3), ManufacturedAt: made, LastEnergisedAt: tm("2024-05-01")},
			{ID: 5, Serial: "D5", ModelID: 1, SiteID: 1, Status: health.StatusInStores, StoresAreaID: ptr(3), ManufacturedAt: made, LastEnergisedAt: tm("2026-10-01")},
			{ID: 6, Serial: "D6", ModelID: 1, SiteID: 1, Status: health.StatusRetired, ManufacturedAt: made},
		},
		Lives: map[int64]store.AssessmentLife{1: {DriveID: 1, RiskScore: 72}, 2: {DriveID: 2, RiskScore: 10}},
		Findings: []store.Finding{
			{ID: 10, DriveID: 1, SiteID: 1, AreaID: ptr(1), PositionID: ptr(1), Rule: "enclosure.water", Severity: health.SeverityMajor, Message: "wet", PhysicalWork: true, FirstSeenAt: seen},
			{ID: 11, DriveID: 1, SiteID: 1, AreaID: ptr(1), PositionID: ptr(1), Rule: "enclosure.corrosion", Severity: health.SeverityCritical, Message: "salty", PhysicalWork: true, FirstSeenAt: seen},
			{ID: 12, DriveID: 1, SiteID: 1, AreaID: ptr(1), PositionID: ptr(1), Rule: "environment.board_corrosion", Severity: health.SeverityMinor, Message: "boards", PhysicalWork: true, FirstSeenAt: seen},
			{ID: 13, DriveID: 1, SiteID: 1, AreaID: ptr(1), PositionID: ptr(1), Rule: "data_quality.fahrenheit_suspected", Severity: health.SeverityMajor, Message: "°F", FirstSeenAt: seen},
			{ID: 14, DriveID: 6, SiteID: 1, Rule: "fan.end_of_life", Severity: health.SeverityMajor, Message: "old", PhysicalWork: true, FirstSeenAt: seen},
		},
	}
}

// TestBuildProposals checks the lines planning proposes from findings and
// the calendar: one line per drive and task caused by the most severe
// finding, filter cleaning in calendar periods set by the dust, energising
// spares yearly and reforming those unpowered more than two years.
func TestBuildProposals(t *testing.T) {
	at := time.Date(2026, 11, 30, 12, 0, 0, 0, time.UTC)
	got := BuildProposals(proposalData(at), Forecast{}, Config{}, at)
	byKey := map[string]store.ProposedLine{}
	for _, p := range got {
		byKey[p.CauseKey] = p
		if start, end := store.MonthWindow(p.DueAt); !p.WindowStart.Equal(start) || !p.WindowEnd.Equal(end) {
			t.Errorf("%s: window %s–%s for due %s", p.CauseKey, p.WindowStart, p.WindowEnd, p.DueAt)
		}
	}
	day := func(s string) time.Time { t, _ := time.Parse(time.DateOnly, s); return t }
	for key, want := range map[string]struct {
		task  store.WorkTask
		due   time.Time
		drive int64
		area  int64
	}{
		// The critical corrosion finding causes the enclosure line, due 7
		// days after it was first seen; water and board corrosion ride on it.
		"finding:11": {store.TaskUpgradeEnclosure, at.AddDate(0, 0, -2+7), 1, 1},
		// No dust: yearly, the calendar year ending 2026-12-31, inside the
		// 60-day look-ahead. Conductive dust: monthly.
		"recurring:clean_filters_and_heatsink:1:2026-01": {store.TaskCleanFilters, day("2026-12-31"), 1, 1},
		"recurring:clean_filters_and_heatsink:2:2026-11": {store.TaskCleanFilters, day("2026-11-30").Add(12 * time.Hour), 2, 2},
		// Powered 2026-01-05: due a year on. Unpowered since 2024-05-01:
		// reform, due now.
		"recurring:energise_stored_drive:3:2027-01-05": {store.TaskEnergise, day("2027-01-05"), 3, 3},
		"recurring:reform_capacitors:4:2025-05-01":     {store.TaskReform, at, 4, 3},
	} {
		p, ok := byKey[key]
		if !ok {
			t.Errorf("no proposal %s in %v", key, keys(got))
			continue
		}
		if p.Task != want.task || !p.DueAt.Equal(want.due) || p.DriveID != want.drive || p.AreaID == nil || *p.AreaID != want.area {
			t.Errorf("%s: %s due %s on drive %d in area %v", key, p.Task, p.DueAt, p.DriveID, p.AreaID)
		}
	}
	if len(got) != 5 {
		t.Errorf("%d proposals, want 5: %v", len(got), keys(got))
	}
	enc := byKey["finding:11"]
	if !strings.Contains(enc.Reason, "Also: finding 10, enclosure.water (major); finding 12, environment.board_corrosion (minor).") ||
		enc.RiskScore != 72 || enc.LabourH != 8 || *enc.FindingID != 11 || enc.PositionID == nil || *enc.PositionID != 1 {
		t.Errorf("enclosure line %+v", enc)
	}
	if clean := byKey["recurring:clean_filters_and_heatsink:2:2026-11"]; clean.LabourH != 0.5 || !strings.Contains(clean.Reason, "every 1 months for conductive dust") {
		t.Errorf("cleaning line %+v", clean)
	}

	// In June the hall's yearly cleaning is not yet due; the mill's is.
	june := time.Date(2026, 6, 15, 0, 0, 0, 0, time.UTC)
	for _, p := range BuildProposals(proposalData(june), Forecast{}, Config{}, june) {
		if p.Task == store.TaskCleanFilters && p.DriveID == 1 {
			t.Errorf("hall cleaning proposed in June: %+v", p)
		}
	}
}

func keys(ps []store.ProposedLine) []string {
	var out []string
	for _, p := range ps {
		out = append(out, p.CauseKey)
	}
	return out
}
