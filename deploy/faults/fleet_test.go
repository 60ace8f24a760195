package faults

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"kelvard/store"
	"kelvard/store/csvio"
)

// openStore opens and migrates the store at url for the test's own reads
// and writes beside the server; it is closed when the test ends.
func openStore(t *testing.T, url string) *store.Store {
	t.Helper()
	ctx := context.Background()
	st, err := store.Open(ctx, url, store.Options{})
	if err != nil {
		t.Fatalf("open store: %v", err)
	}
	t.Cleanup(func() { st.Close() })
	if _, err := st.Migrate(ctx); err != nil {
		t.Fatalf("migrate: %v", err)
	}
	return st
}

// fleet is an invented register: one site, one area, one drive model and
// n positions, each with a drive installed since installedAt. Tags are
// P-0001 … and serials SN-0001 ….
type fleet struct {
	tags []string
	// driveIDs holds the id of the drive at tags[i].
	driveIDs []int64
}

// installedAt is when every fleet drive was installed; readings start
// after it.
var installedAt = time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC)

// buildFleet writes the register through the register CSV importer (one
// transaction per kind, so a few hundred drives take a moment).
func buildFleet(t *testing.T, st *store.Store, n int) fleet {
	t.Helper()
	ctx := context.Background()
	var f fleet
	var positions, drives, installations strings.Builder
	positions.WriteString("site,area,tag,supply_voltage_v,duty,criticality\n")
	drives.WriteString("serial,model,site,manufactured_at\n")
	installations.WriteString("serial,site,position,installed_at\n")
	for i := 1; i <= n; i++ {
		tag, serial := fmt.Sprintf("P-%04d", i), fmt.Sprintf("SN-%04d", i)
		f.tags = append(f.tags, tag)
		crit := []string{"A", "B", "C"}[i%3]
		fmt.Fprintf(&positions, "Fault Works,Pump hall,%s,400,normal,%s\n", tag, crit)
		fmt.Fprintf(&drives, "%s,KD-45,Fault Works,2024-06-01T00:00:00Z\n", serial)
		fmt.Fprintf(&installations, "%s,Fault Works,%s,%s\n", serial, tag, installedAt.Format(time.RFC3339))
	}
	files := []struct {
		kind csvio.Kind
		body string
	}{
		{"sites", "name,elevation_m,ambient_min_c,ambient_max_c\nFault Works,150,-10,36\n"},
		{"areas", "site,name,environment.location,environment.ambient_min_c,environment.ambient_max_c,environment.water,environment.dust\n" +
			"Fault Works,Pump hall,indoor,5,38,none,settling\n"},
		{"models", "name,voltage_class_v,normal_duty_current_a,normal_duty_power_kw,heavy_duty_current_a,heavy_duty_power_kw,enclosure.nema_type,enclosure.ip_code\n" +
			"KD-45,480,77,45,65,37,1,IP21\n"},
		{"positions", positions.String()},
		{"drives", drives.String()},
		{"installations", installations.String()},
	}
	for _, file := range files {
		if _, err := csvio.Import(ctx, st, file.kind, strings.NewReader(file.body), csvio.Options{}); err != nil {
			t.Fatalf("import %s: %v", file.kind, err)
		}
	}
	bySerial := map[string]int64{}
	for cursor := "first"; cursor != ""; {
		if cursor == "first" {
			cursor = ""
		}
		page, err := store.List[store.Drive](ctx, st, store.ListQuery{Limit: store.MaxLimit, Cursor: cursor})
		if err != nil {
			t.Fatalf("list drives: %v", err)
		}
		for _, d := range page.Items {
			bySerial[d.Serial] = d.ID
		}
		cursor = page.Next
	}
	for i := 1; i <= n; i++ {
		id, ok := bySerial[fmt.Sprintf("SN-%04d", i)]
		if !ok {
			t.Fatalf("drive SN-%04d was not imported", i)
		}
		f.driveIDs = append(f.driveIDs, id)
	}
	return f
}

// readingAt is the time of a position's k-th reading: every step from
// readingsStart.
func readingAt(k int, step time.Duration) time.Time {
	return readingsStart.Add(time.Duration(k) * step)
}

// readingsStart is the time of every position's reading 0.
var readingsStart = installedAt.Add(24 * time.Hour)

// reading makes a plausible reading of the position at index k: a daily
// temperature swing, a weekly load cycle, counters that advance with time.
// The same (tag, k, step) always gives the same values.
func reading(tag string, p, k int, step time.Duration) store.Reading {
	at := readingAt(k, step)
	hours := at.Sub(installedAt).Hours()
	day := math.Sin(2 * math.Pi * hours / 24)
	week := math.Sin(2*math.Pi*hours/168 + float64(p))
	v := func(x float64) *float64 { return &x }
	current := 38 + 12*week + float64(p%7)
	air := 31 + 5*day + float64(p%5)
	return store.Reading{
		Position:      tag,
		At:            at,
		InternalAirC:  v(air),
		AmbientC:      v(air - 6),
		HeatsinkC:     v(air + 12 + current/6),
		CurrentA:      v(current),
		PeakCurrentA:  v(current * 1.25),
		FrequencyHz:   v(42 + 6*week),
		BusV:          v(648 + 3*day),
		BusRippleV:    v(3 + current/25),
		RunHoursH:     v(hours),
		PowerOnHoursH: v(hours),
	}
}

// batch makes readings k0 … k0+n-1 of one position.
func batch(tag string, p, k0, n int, step time.Duration) []store.Reading {
	out := make([]store.Reading, n)
	for i := range out {
		out[i] = reading(tag, p, k0+i, step)
	}
	return out
}
