package csvio

import (
	"context"
	"errors"
	"slices"
	"strings"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
)

func TestImportEveryKind(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		got := importAll(t, s)
		want := map[Kind]Result{
			KindSites:         {Rows: 3, Created: 3},
			KindAreas:         {Rows: 4, Created: 4},
			KindModels:        {Rows: 2, Created: 2},
			KindPositions:     {Rows: 4, Created: 4},
			KindDrives:        {Rows: 7, Created: 7},
			KindInstallations: {Rows: 7, Created: 7},
			KindComponents:    {Rows: 5, Created: 4, Updated: 1},
			KindEvents:        {Rows: 5, Created: 5},
		}
		for k, w := range want {
			g := got[k]
			if g.Rows != w.Rows || g.Created != w.Created || g.Updated != w.Updated || g.Unchanged != 0 || g.Rejected != 0 || len(g.Errors) != 0 {
				t.Errorf("%s: %+v, want %+v", k, g, w)
			}
		}

		// Defaults apply to empty cells; given cells are kept as written.
		hill := get[store.Site](t, s, map[string]string{"name": "Hill Works"})
		if hill.TimeZone != "UTC" || hill.ElevationM != 900 {
			t.Errorf("Hill Works %+v: want time zone UTC by default and 900 m", hill)
		}
		river := get[store.Site](t, s, map[string]string{"name": "River Intake"})
		if river.Notes != `Outdoor intake, full sun; pumps "1" and "2"` {
			t.Errorf("quoted notes read as %q", river.Notes)
		}
		hall := get[store.Area](t, s, map[string]string{"name": "Pump hall"})
		if hall.Environment.Location != health.Indoor || hall.Environment.AmbientMaxC != 40 || hall.SiteID != hill.ID {
			t.Errorf("Pump hall %+v: want the default environment at Hill Works", hall)
		}
		dosing := get[store.Area](t, s, map[string]string{"name": "Dosing room"})
		if !dosing.Environment.Condensation || dosing.Environment.Corrosion != health.CorrosionG3 {
			t.Errorf("Dosing room environment %+v (TRUE must read as true)", dosing.Environment)
		}
		vx45 := get[store.DriveModel](t, s, map[string]string{"name": "VX-45"})
		if !slices.Equal(vx45.CarrierDerate, []store.CarrierPoint{{CarrierKHz: 6, Fraction: 0.9}, {CarrierKHz: 8, Fraction: 0.8}}) ||
			vx45.Fan.Runs != health.FanWhenWarm || vx45.Enclosure != (store.EnclosureSpec{NEMAType: "1", IPCode: "IP21"}) {
			t.Errorf("VX-45 %+v", vx45)
		}
		vx11 := get[store.DriveModel](t, s, map[string]string{"name": "VX-11"})
		if len(vx11.CarrierDerate) != 0 || vx11.Fan.L10H != 40000 || vx11.DriveCost != 2100.5 || !vx11.ConformalCoating {
			t.Errorf("VX-11 %+v: want an empty carrier table (none) and the default fan life", vx11)
		}
		p1 := get[store.Position](t, s, map[string]string{"tag": "RI-P1"})
		if p1.Mounting != health.MountingCabinet || p1.Cabinet.NEMAType != "4X" || p1.Cabinet.HeightM != 2 || p1.SupplyFrequencyHz != 60 {
			t.Errorf("RI-P1 %+v", p1)
		}
		p2 := get[store.Position](t, s, map[string]string{"tag": "RI-P2"})
		if p2.Description != "Raw water pump 2\n(standby)" || p2.Duty != health.DutyHeavy {
			t.Errorf("RI-P2 %+v: want the two-line description", p2)
		}
		h1 := get[store.Position](t, s, map[string]string{"tag": "HW-H1"})
		if h1.Mounting != health.MountingOwn || h1.SupplyPhases != 3 || h1.Criticality != health.CriticalityB {
			t.Errorf("HW-H1 %+v: want position defaults", h1)
		}

		// Installations: a swap, a move with a replacement at the same
		// moment, and removals with a status.
		drive := func(serial string) store.Drive {
			return get[store.Drive](t, s, map[string]string{"serial": serial})
		}
		for serial, want := range map[string]struct {
			status health.DriveStatus
			pos    *int64
		}{
			"SN-1001": {health.StatusInRepair, nil},
			"SN-1002": {health.StatusInstalled, &p1.ID},
			"SN-1003": {health.StatusInstalled, &p2.ID},
			"SN-2001": {health.StatusInstalled, &h1.ID},
			"SN-3001": {health.StatusInStores, nil},
			"SN-3002": {health.StatusRetired, nil},
		} {
			d := drive(serial)
			if d.Status != want.status || (d.PositionID == nil) != (want.pos == nil) || (d.PositionID != nil && *d.PositionID != *want.pos) {
				t.Errorf("%s: %s at %v, want %s at %v", serial, d.Status, d.PositionID, want.status, want.pos)
			}
		}
		swap := time.Date(2021, 7, 1, 6, 0, 0, 0, time.UTC)
		for _, c := range []struct {
			at   time.Time
			want string
		}{{swap.Add(-time.Second), "SN-1001"}, {swap, "SN-1002"}} {
			got, err := s.InstalledAt(context.Background(), p1.ID, c.at)
			if err != nil || got != drive(c.want).ID {
				t.Errorf("RI-P1 at %s: drive %d, %v; want %s", c.at, got, err, c.want)
			}
		}
		spare := drive("SN-3001")
		if spare.StoresAreaID == nil || *spare.StoresAreaID != get[store.Area](t, s, map[string]string{"name": "Spares room"}).ID {
			t.Errorf("SN-3001 stores area %v", spare.StoresAreaID)
		}

		// Components: replacements close the older part, whatever the
		// file's order; a row on the fitted part's key updates it.
		fans, err := store.List[store.Component](context.Background(), s, store.ListQuery{Filters: map[string]string{
			"drive_id": id(drive("SN-2001").ID), "kind": string(health.ComponentFan)}})
		if err != nil {
			t.Fatal(err)
		}
		var spans []string
		for _, c := range fans.Items {
			spans = append(spans, formatCell(c.InstalledAt)+"/"+formatCell(c.RemovedAt))
		}
		wantSpans := []string{"2018-01-15T00:00:00Z/2019-01-01T00:00:00Z", "2019-01-01T00:00:00Z/2021-05-01T00:00:00Z", "2021-05-01T00:00:00Z/"}
		slices.Sort(spans)
		if !slices.Equal(spans, wantSpans) {
			t.Errorf("SN-2001 fans %v, want %v", spans, wantSpans)
		}
		caps := get[store.Component](t, s, map[string]string{"drive_id": id(drive("SN-1001").ID), "kind": string(health.ComponentCapacitors)})
		if caps.InitialCapacitanceUF != 3300 || caps.Notes != "Recorded at delivery" {
			t.Errorf("SN-1001 capacitors %+v", caps)
		}

		// Events named by position go to the drive standing there then.
		failure := get[store.Event](t, s, map[string]string{"type": string(health.EventFailure)})
		if failure.DriveID != drive("SN-1001").ID || failure.PositionID == nil || *failure.PositionID != p1.ID {
			t.Errorf("failure event %+v: want SN-1001 at RI-P1", failure)
		}
		overload := get[store.Event](t, s, map[string]string{"drive_id": id(drive("SN-2001").ID)})
		if !overload.At.Equal(time.Date(2022, 3, 1, 12, 0, 0, 5e8, time.UTC)) || overload.TripCause != health.TripOverload {
			t.Errorf("overload trip %+v", overload)
		}
	})
}

func TestReimportChangesNothing(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		first := importAll(t, s)
		audit := auditCount(t, s)
		second := importAll(t, s)
		for _, k := range Kinds() {
			r := second[k]
			if r.Unchanged != first[k].Rows || r.Created+r.Updated+r.Rejected != 0 {
				t.Errorf("re-import of %s: %+v, want all %d rows unchanged", k, r, first[k].Rows)
			}
		}
		if got := auditCount(t, s); got != audit {
			t.Errorf("re-import wrote %d audit rows", got-audit)
		}
	})
}

func TestUpsertChangesOnlyGivenColumns(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		importAll(t, s)
		res := mustImport(t, s, KindSites, "name,notes\nHill Works,Moved the office\nNew Works,\n")
		if res.Updated != 1 || res.Created != 1 {
			t.Errorf("upsert: %+v, want Hill Works updated and New Works created", res)
		}
		hill := get[store.Site](t, s, map[string]string{"name": "Hill Works"})
		if hill.Notes != "Moved the office" || hill.ElevationM != 900 || hill.AmbientMinC != -2 {
			t.Errorf("Hill Works after a notes-only import: %+v", hill)
		}
		// A drive: model changes through PATCH rules; a drive out of
		// service may go to another site's stores (SN-1001 is in repair),
		// an installed one (SN-1002) changes site only by a move.
		res, err := Import(context.Background(), s, KindDrives, strings.NewReader("serial,model,site\nSN-3001,VX-45,Stores Depot\nSN-1001,,Hill Works\nSN-1002,,Hill Works\n"), Options{Partial: true})
		if err != nil {
			t.Fatal(err)
		}
		if res.Updated != 2 || res.Rejected != 1 || !slices.Equal(lines(res.Errors), []string{"4:site"}) {
			t.Errorf("drive upsert: %+v", res)
		}
		if d := get[store.Drive](t, s, map[string]string{"serial": "SN-3001"}); d.ModelID != get[store.DriveModel](t, s, map[string]string{"name": "VX-45"}).ID {
			t.Errorf("SN-3001 model not changed: %+v", d)
		}
		// A position switched to its own enclosure loses its cabinet.
		mustImport(t, s, KindPositions, "site,tag,mounting\nRiver Intake,RI-P1,own_enclosure\n")
		if p := get[store.Position](t, s, map[string]string{"tag": "RI-P1"}); p.Cabinet != (store.Cabinet{}) || p.Mounting != health.MountingOwn {
			t.Errorf("RI-P1 after own_enclosure: %+v", p)
		}
	})
}

func TestBadRowsWriteNothing(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		mustImport(t, s, KindSites, fixture(t, KindSites))
		before := auditCount(t, s)
		text := "\uFEFFsite,name,environment.water,environment.ambient_max_c,notes\r\n" +
			"River Intake,Deck two,none,40,ok\r\n" + // line 2: good
			"Nowhere,Deck three,none,40,\r\n" + // line 3: unknown site
			"River Intake,Deck four,firehose,forty,\r\n" + // line 4: bad number (parse) only
			"River Intake,\"Deck\nfive\",firehose,40,\r\n" + // lines 5-6: bad enum from the store
			"Hill Works,,none,40,\r\n" + // line 7: name missing
			"\r\n\r\n"
		res, err := Import(ctx, s, KindAreas, strings.NewReader(text), Options{})
		var ve *store.ValidationError
		if !errors.As(err, &ve) {
			t.Fatalf("import with bad rows: %v, want a validation error", err)
		}
		want := []string{"3:site", "4:environment.ambient_max_c", "5:environment.water", "7:name"}
		if got := lines(ve.Fields); !slices.Equal(got, want) {
			t.Errorf("errors name %v, want %v (%v)", got, want, err)
		}
		if res.Rejected != 4 || res.Created != 0 || res.Rows != 5 {
			t.Errorf("result %+v", res)
		}
		for _, f := range ve.Fields {
			if f.Reason == "" || f.Row == 0 {
				t.Errorf("field error %+v lacks a reason or row", f)
			}
		}
		page, err := store.List[store.Area](ctx, s, store.ListQuery{})
		if err != nil || len(page.Items) != 0 {
			t.Errorf("%d areas written by a failed import, %v", len(page.Items), err)
		}
		if got := auditCount(t, s); got != before {
			t.Errorf("a failed import left %d audit rows", got-before)
		}

		// With partial, the good row is written and the bad ones listed.
		res, err = Import(ctx, s, KindAreas, strings.NewReader(text), Options{Partial: true})
		if err != nil {
			t.Fatal(err)
		}
		if res.Created != 1 || res.Rejected != 4 || !slices.Equal(lines(res.Errors), want) {
			t.Errorf("partial import: %+v", res)
		}
		if a := get[store.Area](t, s, map[string]string{"name": "Deck two"}); a.Notes != "ok" {
			t.Errorf("Deck two %+v", a)
		}
	})
}

func TestHeaderProblemsStopEarly(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		_, err := Import(ctx, s, KindSites, strings.NewReader("name,height,colour,name\nA,1,red,A\n"), Options{Partial: true})
		var ve *store.ValidationError
		if !errors.As(err, &ve) {
			t.Fatalf("unknown columns: %v", err)
		}
		got := lines(ve.Fields)
		for _, w := range []string{"1:height", "1:colour", "1:name", "1:header"} {
			if !slices.Contains(got, w) {
				t.Errorf("header errors %v lack %s", got, w)
			}
		}
		if !strings.Contains(err.Error(), "unknown columns height, colour") {
			t.Errorf("error %q does not name the unknown columns", err)
		}
		if _, err := Import(ctx, s, Kind("pumps"), strings.NewReader("a\n"), Options{}); !errors.Is(err, ErrUnknownKind) {
			t.Errorf("unknown kind: %v", err)
		}
	})
}

func TestHistoryConflicts(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		importAll(t, s)
		// A stay recorded with one end cannot be given another.
		_, err := Import(ctx, s, KindInstallations, strings.NewReader(
			"serial,site,position,installed_at,removed_at,status_after\nSN-3002,Hill Works,HW-H1,2015-06-01T00:00:00Z,2020-03-01T00:00:00Z,\n"+
				"SN-3001,Hill Works,HW-H1,2010-01-01T00:00:00Z,,\n"+
				"SN-1003,River Intake,RI-P2,2017-06-01T00:00:00Z,2017-05-01T00:00:00Z,\n"+
				"SN-3001,River Intake,RI-P2,2024-01-01T00:00:00Z,,in_repair\n"), Options{})
		var ve *store.ValidationError
		if !errors.As(err, &ve) {
			t.Fatalf("conflicting history: %v", err)
		}
		// Line 3 is before the drive was made and before the position's
		// latest move: two reasons, one column.
		want := []string{"2:removed_at", "3:installed_at", "3:installed_at", "4:removed_at", "5:status_after"}
		if got := lines(ve.Fields); !slices.Equal(got, want) {
			t.Errorf("history errors %v, want %v: %v", got, want, err)
		}
		// A component older than the fitted one needs its removal date, and
		// parts of one kind must not overlap.
		_, err = Import(ctx, s, KindComponents, strings.NewReader(
			"serial,kind,installed_at,removed_at\nSN-2001,cooling_fan,2020-01-01T00:00:00Z,\n"+
				"SN-2001,cooling_fan,2020-06-01T00:00:00Z,2022-01-01T00:00:00Z\n"+
				"SN-2001,fan,2020-06-01T00:00:00Z,\n"), Options{})
		if !errors.As(err, &ve) {
			t.Fatalf("conflicting components: %v", err)
		}
		want = []string{"2:removed_at", "3:installed_at", "4:kind"}
		if got := lines(ve.Fields); !slices.Equal(got, want) {
			t.Errorf("component errors %v, want %v: %v", got, want, err)
		}
		// An event at a position where no drive stood.
		_, err = Import(ctx, s, KindEvents, strings.NewReader(
			"site,position,at,type,trip_cause\nHill Works,HW-H1,2021-01-01T00:00:00Z,trip,overload\n"), Options{})
		if !errors.As(err, &ve) || !slices.Equal(lines(ve.Fields), []string{"2:position"}) {
			t.Errorf("event at an empty position: %v", err)
		}
	})
}

func TestEventUpsert(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		importAll(t, s)
		res := mustImport(t, s, KindEvents, "serial,at,type,trip_cause,notes\nSN-1001,2021-06-30T22:10:00Z,trip,over_voltage,Ramp too short\n")
		if res.Updated != 1 {
			t.Errorf("event notes update: %+v", res)
		}
		e := get[store.Event](t, s, map[string]string{"type": "trip", "to": "2021-07-01T00:00:00Z"})
		if e.Notes != "Ramp too short" || e.State != health.StateDecelerating {
			t.Errorf("trip after update %+v: notes changed, state kept", e)
		}
	})
}

func TestSiteLimit(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		importAll(t, s)
		hill := get[store.Site](t, s, map[string]string{"name": "Hill Works"})
		limited := store.WithPrincipal(ctx, store.Principal{Actor: "planner-hill", Sites: []int64{hill.ID}})
		got := string(export(t, limited, s, KindPositions))
		if strings.Contains(got, "RI-P") || !strings.Contains(got, "HW-H1") || !strings.Contains(got, "HW-D1") {
			t.Errorf("site-limited export of positions:\n%s", got)
		}
		got = string(export(t, limited, s, KindDrives))
		if strings.Contains(got, "SN-1001") || !strings.Contains(got, "SN-2001") {
			t.Errorf("site-limited export of drives:\n%s", got)
		}
		_, err := Import(limited, s, KindAreas, strings.NewReader("site,name\nRiver Intake,Sneaky\n"), Options{})
		var ve *store.ValidationError
		if !errors.As(err, &ve) || !slices.Equal(lines(ve.Fields), []string{"2:site"}) {
			t.Errorf("import into another site: %v", err)
		}
		// A site the token cannot see is not found, so the row tries to
		// create it and the database refuses the name: a row error, after
		// which (on PostgreSQL, thanks to the row's savepoint) the
		// transaction goes on.
		res, err := Import(limited, s, KindSites, strings.NewReader("name,ambient_min_c,ambient_max_c\nRiver Intake,0,30\nBrook Works,0,30\n"), Options{Partial: true})
		if err != nil || res.Created != 1 || res.Rejected != 1 || !slices.Equal(lines(res.Errors), []string{"2:name"}) {
			t.Errorf("limited import of a hidden site's name: %+v, %v", res, err)
		}
		res, err = Import(limited, s, KindAreas, strings.NewReader("site,name\nHill Works,Valve room\n"), Options{})
		if err != nil || res.Created != 1 {
			t.Fatalf("import into the token's site: %+v, %v", res, err)
		}
		a := get[store.Area](t, s, map[string]string{"name": "Valve room"})
		audit, err := s.Audit(ctx, store.AuditQuery{Resource: "areas", ResourceID: a.ID})
		if err != nil || len(audit.Items) != 1 || audit.Items[0].Actor != "planner-hill" {
			t.Errorf("import audit %+v, %v", audit.Items, err)
		}
	})
}

func TestProgressAndReadings(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		text := fixture(t, KindSites)
		var reports []Progress
		_, err := Import(ctx, s, KindSites, strings.NewReader(text), Options{Size: int64(len(text)), Progress: func(p Progress) { reports = append(reports, p) }})
		if err != nil {
			t.Fatal(err)
		}
		var read, write Progress
		for _, p := range reports {
			switch p.Stage {
			case StageRead:
				read = p
			case StageWrite:
				write = p
			}
		}
		if read.Done != int64(len(text)) || read.Total != int64(len(text)) || write.Done != 3 || write.Total != 3 {
			t.Errorf("last progress reports: read %+v, write %+v", read, write)
		}
		// Readings go through the readings ingest: stored once, then
		// unchanged on a second import.
		importAll(t, s)
		readings := "site,position,at,ambient_c\nRiver Intake,RI-P1,2024-01-01T00:00:00Z,21.5\nRiver Intake,RI-P1,2024-01-01T01:00:00Z,21.0\n"
		for i, want := range []Result{{Kind: KindReadings, Rows: 2, Created: 2}, {Kind: KindReadings, Rows: 2, Unchanged: 2}} {
			res, err := Import(ctx, s, KindReadings, strings.NewReader(readings), Options{})
			if err != nil || res.Rows != want.Rows || res.Created != want.Created || res.Unchanged != want.Unchanged {
				t.Errorf("readings import %d: %+v, %v; want %+v", i+1, res, err, want)
			}
		}
		var ve *store.ValidationError
		if _, err := Import(ctx, s, KindReadings, strings.NewReader("position,colour\n"), Options{}); !errors.As(err, &ve) {
			t.Errorf("readings with an unknown column: %v, want a validation error", err)
		}
	})
}

// TestSameMomentMoves: a drive moving between positions at the moment
// another drive takes its old place is moved, not sent to stores on the
// way, whatever the order of the rows.
func TestSameMomentMoves(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		for _, k := range []Kind{KindSites, KindAreas, KindModels, KindPositions, KindDrives} {
			mustImport(t, s, k, fixture(t, k))
		}
		res := mustImport(t, s, KindInstallations, "serial,site,position,installed_at,removed_at\n"+
			"SN-2002,Hill Works,HW-D1,2022-01-10T00:00:00Z,\n"+
			"SN-2001,Hill Works,HW-H1,2022-01-10T00:00:00Z,\n"+
			"SN-2001,Hill Works,HW-D1,2018-03-01T00:00:00Z,2022-01-10T00:00:00Z\n")
		if res.Created != 3 {
			t.Errorf("result %+v", res)
		}
		mover := get[store.Drive](t, s, map[string]string{"serial": "SN-2001"})
		if mover.Status != health.StatusInstalled || mover.LastEnergisedAt != nil {
			t.Errorf("SN-2001 %+v: want installed at HW-H1, never powered down in stores", mover)
		}
		audit, err := s.Audit(context.Background(), store.AuditQuery{Resource: "drives", ResourceID: mover.ID})
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range audit.Items {
			if e.Action == "remove" {
				t.Errorf("SN-2001 was taken out to stores: %+v", e)
			}
		}
	})
}
