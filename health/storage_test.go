package health

import (
	"testing"
)

func TestAdviseStoredDrive(t *testing.T) {
	// Source: common practice for aluminium electrolytic DC-bus capacitors
	// (DESIGN.md section 3) — energise at least yearly; after one to two
	// years unpowered run at no load for 30-60 min; after more than two
	// years reform in steps of about 25/50/75/100 % of bus voltage.
	const day = 86400
	last := testT0
	def := DefaultStorageParams()
	short := DefaultStorageParams()
	short.EnergiseEveryDays, short.NoticeDays, short.ReformAfterDays = 180, 14, 365
	cases := []struct {
		name     string
		days     int64
		p        StorageParams
		action   StorageAction
		rule     string
		severity Severity
	}{
		{"fresh", 100, def, StorageNone, "", ""},
		{"due within the notice period", 340, def, StorageEnergiseSoon, "storage.energise_due", SeverityAdvice},
		{"exactly a year", 365, def, StorageNoLoadRun, "storage.energise_due", SeverityMinor},
		{"eighteen months", 548, def, StorageNoLoadRun, "storage.energise_due", SeverityMinor},
		{"exactly two years", 730, def, StorageNoLoadRun, "storage.energise_due", SeverityMinor},
		{"more than two years", 731, def, StorageSteppedReform, "storage.reform_required", SeverityMajor},
		{"configured: 200 days on a 180-day interval", 200, short, StorageNoLoadRun, "storage.energise_due", SeverityMinor},
		{"configured: 400 days past a 365-day reform threshold", 400, short, StorageSteppedReform, "storage.reform_required", SeverityMajor},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			a, err := AdviseStoredDrive(last, last+c.days*day, c.p)
			if err != nil {
				t.Fatal(err)
			}
			if a.Action != c.action || a.DaysUnpowered != float64(c.days) {
				t.Fatalf("advice %+v, want action %s", a, c.action)
			}
			if a.DueAt != last+int64(c.p.EnergiseEveryDays)*day {
				t.Fatalf("due %d, want %d", a.DueAt, last+int64(c.p.EnergiseEveryDays)*day)
			}
			fs := StorageFindings(a, c.p)
			if c.rule == "" {
				if len(fs) != 0 {
					t.Fatalf("findings %+v", fs)
				}
				return
			}
			if len(fs) != 1 || fs[0].Rule != c.rule || fs[0].Severity != c.severity {
				t.Fatalf("findings %+v, want %s %s", fs, c.rule, c.severity)
			}
			checkFinding(t, fs[0], storageRules)
			if fs[0].Evidence[0].Name != "days_unpowered" || fs[0].Evidence[0].Limit != a.ThresholdDays {
				t.Fatalf("evidence %+v", fs[0].Evidence)
			}
		})
	}
	if _, err := AdviseStoredDrive(last, last-1, def); err == nil {
		t.Error("an assessment before the last energising was accepted")
	}
	bad := def
	bad.ReformSteps = []float64{0.5, 0.25, 1}
	if _, err := AdviseStoredDrive(last, last, bad); err == nil {
		t.Error("unordered reform steps accepted")
	}
}
