package storetest

import (
	"context"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// Fixture is a small register: one site with one area, one drive model,
// one position and one drive installed there.
type Fixture struct {
	Site     store.Site
	Area     store.Area
	Model    store.DriveModel
	Position store.Position
	Drive    store.Drive
}

// Build creates a fixture whose names end in suffix, so one test can build
// several.
func Build(t testing.TB, s *store.Store, suffix string) Fixture {
	t.Helper()
	ctx := context.Background()
	var f Fixture
	var err error
	f.Site, err = store.Create(ctx, s, func(v *store.Site) error {
		v.Name, v.ElevationM, v.AmbientMinC, v.AmbientMaxC = "Works "+suffix, 120, -5, 38
		return nil
	})
	must(t, err)
	f.Area, err = store.Create(ctx, s, func(v *store.Area) error {
		v.SiteID, v.Name = f.Site.ID, "Pump hall "+suffix
		v.Environment.AmbientMaxC = 35
		return nil
	})
	must(t, err)
	f.Model, err = store.Create(ctx, s, func(v *store.DriveModel) error {
		v.Name, v.VoltageClassV = "VX-"+suffix, 480
		v.NormalDutyCurrentA, v.NormalDutyPowerKW, v.HeavyDutyCurrentA, v.HeavyDutyPowerKW = 77, 45, 65, 37
		v.Enclosure = store.EnclosureSpec{NEMAType: "1", IPCode: "IP21"}
		v.DriveCost, v.CapacitorKitCost, v.FanKitCost = 6400, 650, 180
		return nil
	})
	must(t, err)
	f.Position, err = store.Create(ctx, s, func(v *store.Position) error {
		v.AreaID, v.Tag, v.SupplyVoltageV = f.Area.ID, "P-101-"+suffix, 480
		return nil
	})
	must(t, err)
	f.Drive, err = store.Create(ctx, s, func(v *store.Drive) error {
		v.Serial, v.ModelID, v.SiteID = "SN-"+suffix, f.Model.ID, f.Site.ID
		v.ManufacturedAt = time.Date(2020, 3, 1, 0, 0, 0, 0, time.UTC)
		return nil
	})
	must(t, err)
	_, err = s.MoveDrive(ctx, f.Drive.ID, store.Move{PositionID: &f.Position.ID, At: time.Date(2020, 6, 1, 0, 0, 0, 0, time.UTC)})
	must(t, err)
	f.Drive, err = store.Get[store.Drive](ctx, s, f.Drive.ID)
	must(t, err)
	if f.Drive.Status != health.StatusInstalled {
		t.Fatalf("fixture drive status %s, want installed", f.Drive.Status)
	}
	return f
}

func must(t testing.TB, err error) {
	t.Helper()
	if err != nil {
		t.Fatalf("build fixture: %v", err)
	}
}
