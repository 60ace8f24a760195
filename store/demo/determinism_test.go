package demo

import (
	"crypto/sha256"
	"fmt"
	"testing"
	"time"
)

// digests returns the SHA-256 of every file the scenario writes.
func digests(t *testing.T, s *Scenario) map[string]string {
	t.Helper()
	out := map[string]string{}
	for _, name := range Files() {
		h := sha256.New()
		if err := s.WriteCSV(name, h); err != nil {
			t.Fatal(err)
		}
		out[name] = fmt.Sprintf("%x", h.Sum(nil))
	}
	return out
}

func TestSameSeedAndNowGiveTheSameBytes(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("generates four scenarios")
	}
	// A reference time that is not midnight, to exercise the clock
	// arithmetic the checked-in files (midnight) do not.
	now := time.Date(2027, 3, 15, 13, 0, 0, 0, time.UTC)
	a := digests(t, Generate(7, now))
	b := digests(t, Generate(7, now))
	for _, name := range Files() {
		if a[name] != b[name] {
			t.Errorf("%s differs between two runs with the same seed and now", name)
		}
	}
	// now is truncated to the hour and read in UTC.
	c := digests(t, Generate(7, now.Add(37*time.Minute+12*time.Second).In(time.FixedZone("x", 5*3600))))
	for _, name := range Files() {
		if a[name] != c[name] {
			t.Errorf("%s differs when now is given off the hour or in another zone", name)
		}
	}
	d := digests(t, Generate(8, now))
	if a[FileReadings] == d[FileReadings] {
		t.Error("a different seed gave the same readings")
	}
	if a[FileEvents] == d[FileEvents] {
		t.Error("a different seed gave the same events")
	}
	// The fleet layout is fixed; only the random parts change.
	for _, name := range []string{FileSites, FileAreas, FilePositions} {
		if a[name] != d[name] {
			t.Errorf("%s changed with the seed; the layout should not", name)
		}
	}
}

func TestGenerateStampsItsInputs(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	if s.Seed != demoSeed || !s.Now.Equal(demoNow) {
		t.Fatalf("seed %d now %v, want %d %v", s.Seed, s.Now, demoSeed, demoNow)
	}
	if got := s.Now.Sub(s.ReadingsStart); got != 8760*time.Hour {
		t.Errorf("reading year is %v, want 8760 h", got)
	}
	if want := demoNow.AddDate(-8, 0, 0); !s.HistoryStart.Equal(want) {
		t.Errorf("history starts %v, want %v", s.HistoryStart, want)
	}
}
