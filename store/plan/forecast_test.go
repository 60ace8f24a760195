package plan

import (
	"math"
	"slices"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// expectedCycles lists a component's replacements by the closed form: the
// first at last + (1 − D)/r hours (r = D / hours observed, the trailing
// rate), the band at (1 − D)/r_hot and (1 − D)/r_mild, and each later cycle
// one whole life (1/r, 1/r_hot, 1/r_mild) after the one before, while the
// earliest date lies before end (hours after t0).
type cycleHours struct{ point, early, late float64 }

func expectedCycles(lastH, used, rate, hot, mild, endH float64) []cycleHours {
	c := cycleHours{point: lastH + (1-used)/rate, early: lastH + (1-used)/hot, late: lastH + (1-used)/mild}
	var out []cycleHours
	for c.early < endH {
		out = append(out, c)
		c = cycleHours{c.point + 1/rate, c.early + 1/hot, c.late + 1/mild}
	}
	return out
}

// TestForecastArithmetic builds two drives with known damage rates and
// holds the forecast's dates, cycles, replace-or-refurbish choice and
// budget to the closed form of the 10-degree rule and the fan halving rule
// with Palmgren–Miner accumulation (DESIGN.md section 3).
func TestForecastArithmetic(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		// Drive a: 720 h at 85 °C air then 719 h at 95 °C, rated current.
		r.ingest(r.f.Position.ID, 0, 1440, twoMonths, 77)
		// Drive b at a second site, on a model whose capacitor kit costs
		// more than half a new drive: 90 °C air throughout.
		site, err := store.Create[store.Site](r.ctx, r.st, func(v *store.Site) error { v.Name = "Works b"; return nil })
		r.must(err)
		area, err := store.Create[store.Area](r.ctx, r.st, func(v *store.Area) error {
			v.SiteID, v.Name = site.ID, "Kiosk b"
			return nil
		})
		r.must(err)
		mb, err := store.Create[store.DriveModel](r.ctx, r.st, func(v *store.DriveModel) error {
			v.Name, v.VoltageClassV = "VX-b", 480
			v.NormalDutyCurrentA, v.NormalDutyPowerKW, v.HeavyDutyCurrentA, v.HeavyDutyPowerKW = 77, 45, 65, 37
			v.Enclosure = store.EnclosureSpec{NEMAType: "12", IPCode: "IP54"}
			v.DriveCost, v.CapacitorKitCost, v.FanKitCost, v.LabourCostPerH, v.DriveLabourH, v.FanLabourH = 1000, 600, 100, 80, 5, 1
			return nil
		})
		r.must(err)
		db, pb := r.addDrive("SN-b", mb.ID, area.ID, t0.Add(-24*time.Hour))
		r.refit(db.ID, t0)
		r.ingest(pb.ID, 0, 1440, func(int) float64 { return 90 }, 77)
		r.assess()

		f, err := ForecastFor(r.ctx, r.st, Config{HorizonMonths: 20})
		r.must(err)
		at := t0.Add(1439 * time.Hour)
		if !f.At.Equal(at) {
			t.Fatalf("forecast at %s, want the last reading %s", f.At, at)
		}
		end := time.Date(2027, 11, 1, 0, 0, 0, 0, time.UTC) // 20 months from March 2026
		if !f.HorizonEnd.Equal(end) || len(f.Months) != 20 {
			t.Fatalf("horizon ends %s with %d months, want %s and 20", f.HorizonEnd, len(f.Months), end)
		}
		endH := end.Sub(t0).Hours()

		// Closed-form damage of drive a.
		capMild, capHot := 1/capLifeH(85+5), 1/capLifeH(95+5)
		capUsed := 720*capMild + 719*capHot
		fanMild, fanHot := 1/fanLifeH(85), 1/fanLifeH(95)
		fanUsed := 720*fanMild + 719*fanHot
		wantA := map[health.ComponentKind][]cycleHours{
			health.ComponentCapacitors: expectedCycles(1439, capUsed, capUsed/1439, capHot, capMild, endH),
			health.ComponentFan:        expectedCycles(1439, fanUsed, fanUsed/1439, fanHot, fanMild, endH),
		}
		// Drive b: one temperature, so the band closes on the point.
		capB := 1 / capLifeH(95)
		fanB := 1 / fanLifeH(90)
		capCyclesB := expectedCycles(1439, 1439*capB, capB, capB, capB, endH)
		driveReplacedH := capCyclesB[0].point
		var fanCyclesB []cycleHours
		for _, c := range expectedCycles(1439, 1439*fanB, fanB, fanB, fanB, endH) {
			if c.point >= driveReplacedH {
				break // the new drive brings a new fan
			}
			fanCyclesB = append(fanCyclesB, c)
		}
		if c := driveReplacedH + 1/fanB; c < endH {
			fanCyclesB = append(fanCyclesB, cycleHours{c, c, c})
		}
		wantB := map[health.ComponentKind][]cycleHours{health.ComponentCapacitors: capCyclesB, health.ComponentFan: fanCyclesB}
		if len(wantA[health.ComponentFan]) < 3 || len(wantB[health.ComponentFan]) != 2 || len(capCyclesB) != 1 {
			t.Fatalf("the constructed case should give several fan cycles: %+v %+v", wantA, wantB)
		}

		got := map[string]map[health.ComponentKind][]ForecastItem{}
		for _, it := range f.Items {
			if got[it.Serial] == nil {
				got[it.Serial] = map[health.ComponentKind][]ForecastItem{}
			}
			got[it.Serial][it.Component] = append(got[it.Serial][it.Component], it)
		}
		const tol = time.Minute
		var wantTotal, wantEarliest, wantLatest float64
		for serial, want := range map[string]map[health.ComponentKind][]cycleHours{"SN-a": wantA, "SN-b": wantB} {
			for kind, cycles := range want {
				items := got[serial][kind]
				if len(items) != len(cycles) {
					t.Errorf("%s %s: %d items, want %d", serial, kind, len(items), len(cycles))
					continue
				}
				for i, c := range cycles {
					it := items[i]
					if it.Cycle != i+1 {
						t.Errorf("%s %s item %d is cycle %d", serial, kind, i, it.Cycle)
					}
					timeClose(t, serial+" "+string(kind)+" end of life", it.EndOfLife, hoursAfter(t0, c.point), tol)
					timeClose(t, serial+" "+string(kind)+" earliest", it.EndOfLifeEarliest, hoursAfter(t0, c.early), tol)
					if it.EndOfLifeLatest == nil {
						t.Errorf("%s %s: no latest date", serial, kind)
					} else {
						timeClose(t, serial+" "+string(kind)+" latest", *it.EndOfLifeLatest, hoursAfter(t0, c.late), tol)
					}
					if want := c.point < endH; it.InBudget != want {
						t.Errorf("%s %s cycle %d in budget %v, want %v", serial, kind, it.Cycle, it.InBudget, want)
					}
					if it.Month != it.EndOfLife.Format("2006-01") {
						t.Errorf("%s %s month %s for %s", serial, kind, it.Month, it.EndOfLife)
					}
					// Costs from the models: drive a refurbishes (650 < 0.5 × 6400),
					// drive b is replaced whole (600 ≥ 0.5 × 1000).
					var cost float64
					var action store.WorkTask
					switch {
					case serial == "SN-a" && kind == health.ComponentCapacitors:
						cost, action = 650+2.5*90, store.TaskReplaceCapacitors
					case serial == "SN-a":
						cost, action = 180+0.75*90, store.TaskReplaceFan
					case kind == health.ComponentCapacitors:
						cost, action = 1000+5*80, store.TaskReplaceDrive
					default:
						cost, action = 100+1*80, store.TaskReplaceFan
					}
					if it.Action != action || math.Abs(it.TotalCost-cost) > 1e-9 {
						t.Errorf("%s %s: %s at %.2f, want %s at %.2f", serial, kind, it.Action, it.TotalCost, action, cost)
					}
					if it.InBudget {
						wantTotal += cost
					}
					if c.early < endH {
						wantEarliest += cost
					}
					if c.late < endH {
						wantLatest += cost
					}
				}
			}
		}
		if dec := got["SN-b"][health.ComponentCapacitors][0].Refurbish; dec == nil || dec.Choice != "replace_drive" || dec.ThresholdCost != 500 {
			t.Errorf("drive b decision %+v, want replace_drive against 500", dec)
		}
		relClose(t, "capacitor a life used", got["SN-a"][health.ComponentCapacitors][0].LifeUsedFraction, capUsed, 1e-9)

		// Budget: the expected total, the band cases, and the rows adding up
		// by month and by site.
		relClose(t, "expected total", f.Totals.Expected.TotalCost, wantTotal, 1e-12)
		relClose(t, "earliest-case total", f.Totals.EarliestCase.TotalCost, wantEarliest, 1e-12)
		relClose(t, "latest-case total", f.Totals.LatestCase.TotalCost, wantLatest, 1e-12)
		var byMonth, bySite float64
		sites := map[string]float64{}
		for _, b := range f.Budget {
			bySite += b.TotalCost
			sites[b.Site] += b.TotalCost
			if math.Abs(b.PartsCost+b.LabourCost-b.TotalCost) > 1e-9 {
				t.Errorf("budget row %+v: parts and labour do not add up", b)
			}
		}
		for _, m := range f.Months {
			byMonth += m.TotalCost
		}
		relClose(t, "budget rows", bySite, wantTotal, 1e-12)
		relClose(t, "month rows", byMonth, wantTotal, 1e-12)
		if len(sites) != 2 || sites["Works b"] == 0 || sites["Works a"] == 0 {
			t.Errorf("budget by site %v, want both sites", sites)
		}
		n := f.Totals.Expected
		if n.CapacitorRefurbishments != 1 || n.DriveReplacements != 1 || n.FanReplacements != countInBudget(got, health.ComponentFan) {
			t.Errorf("counts %+v", n)
		}
		if !slices.IsSortedFunc(f.Items, func(a, b ForecastItem) int { return a.EndOfLife.Compare(b.EndOfLife) }) {
			t.Error("items are not in date order")
		}

		// The CSV tables carry one row per item and per budget row.
		var csvItems, csvBudget countingWriter
		r.must(WriteForecastCSV(&csvItems, f))
		r.must(WriteBudgetCSV(&csvBudget, f))
		if csvItems.lines != len(f.Items)+1 || csvBudget.lines != len(f.Budget)+len(f.Months)+2 {
			t.Errorf("CSV lines %d and %d for %d items, %d budget rows", csvItems.lines, csvBudget.lines, len(f.Items), len(f.Budget))
		}
	})
}

func countInBudget(got map[string]map[health.ComponentKind][]ForecastItem, kind health.ComponentKind) int {
	n := 0
	for _, byKind := range got {
		for _, it := range byKind[kind] {
			if it.InBudget {
				n++
			}
		}
	}
	return n
}

// countingWriter counts newlines.
type countingWriter struct{ lines int }

func (w *countingWriter) Write(p []byte) (int, error) {
	for _, b := range p {
		if b == '\n' {
			w.lines++
		}
	}
	return len(p), nil
}

// TestComponentItemsOverdueAndOpenBand checks the edge cases of one
// component's projection: an end of life already reached falls due at the
// forecast time, and a band whose mildest month did no damage has no
// latest date and no further cycle by it.
func TestComponentItemsOverdueAndOpenBand(t *testing.T) {
	at := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	end := at.AddDate(1, 6, 0)
	reached := health.LifeReport{EndReached: true, EndReachedAt: at.AddDate(0, -2, 0).Unix(), DamageRatePerH: 1.0 / 8766}
	items := componentItems(ForecastItem{Serial: "x"}, health.ComponentCapacitors, 7, reached, at, end, nil)
	if len(items) != 2 || !items[0].Overdue || !items[0].EndOfLife.Equal(at) || items[0].Month != "2026-06" {
		t.Fatalf("overdue: %+v", items)
	}
	// The next cycle is one whole life (1 / rate = 8766 h) later.
	timeClose(t, "second cycle", items[1].EndOfLife, at.Add(8766*time.Hour), time.Second)
	if items[1].Overdue || items[1].ComponentID != 7 {
		t.Errorf("second cycle %+v", items[1])
	}

	eol := at.AddDate(0, 3, 0)
	open := health.LifeReport{Projected: true, EndOfLifeAt: eol.Unix(), EndOfLifeEarliestAt: at.AddDate(0, 2, 0).Unix(),
		DamageRatePerH: 1e-5, BlockRatesPerH: []float64{0, 2e-5}}
	items = componentItems(ForecastItem{}, health.ComponentFan, 1, open, at, end, nil)
	if len(items) != 1 || items[0].EndOfLifeLatest != nil || !items[0].EndOfLife.Equal(eol) {
		t.Fatalf("open band: %+v", items)
	}
	if none := componentItems(ForecastItem{}, health.ComponentFan, 1, health.LifeReport{}, at, end, nil); len(none) != 0 {
		t.Errorf("a report without projection gave %+v", none)
	}
}
