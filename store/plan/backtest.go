package plan

import (
	"fmt"
	"slices"
	"time"

	"kelvard/store"
)

// Backtest compares the capacitor life model with the capacitor failures:
// the life used the model had reckoned when each bank failed.
type Backtest struct {
	Failures []BacktestRow `json:"failures"`
	// Covered counts failures an assessment covers; MedianLifeUsed is their
	// median life used (null when none is covered).
	Covered        int      `json:"covered"`
	Uncovered      int      `json:"uncovered"`
	MedianLifeUsed *float64 `json:"median_life_used_fraction"`
	// Reading says in plain words whether the model runs early or late.
	Reading string `json:"reading"`
}

// BacktestRow is one capacitor failure.
type BacktestRow struct {
	DriveID     int64     `json:"drive_id"`
	Serial      string    `json:"serial"`
	Model       string    `json:"model"`
	ComponentID int64     `json:"component_id"`
	FailedAt    time.Time `json:"failed_at"`
	AgeH        float64   `json:"age_h"`
	Covered     bool      `json:"covered"`
	// AssessedOn is the day of the daily assessment used, at most
	// Config.BacktestDays before the failure and after the bank was fitted.
	AssessedOn       string   `json:"assessed_on,omitempty"`
	LifeUsedFraction *float64 `json:"life_used_fraction"`
	Note             string   `json:"note,omitempty"`
}

// backtest reads each failed capacitor bank's life used from the daily
// assessment history on or just before the failure date.
func (ix *index) backtest(capLives []life, days []store.AssessmentDay, cfg Config) Backtest {
	byDrive := map[int64][]store.AssessmentDay{}
	for _, d := range days {
		byDrive[d.DriveID] = append(byDrive[d.DriveID], d)
	}
	bt := Backtest{Failures: []BacktestRow{}}
	var used []float64
	for _, l := range capLives {
		if !l.history.Failed {
			continue
		}
		dr, _ := ix.drive(l.driveID)
		row := BacktestRow{DriveID: l.driveID, Serial: dr.Serial, Model: ix.d.Models[dr.ModelID].Name, ComponentID: l.componentID,
			FailedAt: l.end, AgeH: l.history.AgeH}
		fitted := l.end.Add(-time.Duration(l.history.AgeH * float64(time.Hour)))
		last := l.end.Format(time.DateOnly)
		first := l.end.AddDate(0, 0, -cfg.BacktestDays).Format(time.DateOnly)
		if f := fitted.Format(time.DateOnly); f > first {
			first = f
		}
		var best *store.AssessmentDay
		for i := range byDrive[l.driveID] {
			d := &byDrive[l.driveID][i]
			day := dayOf(d.Day)
			if day >= first && day <= last && (best == nil || day > dayOf(best.Day)) {
				best = d
			}
		}
		if best == nil {
			row.Note = fmt.Sprintf("no daily assessment between %s and the failure date covers it", first)
			bt.Uncovered++
		} else {
			v := best.CapacitorLifeUsedFraction
			row.Covered, row.AssessedOn, row.LifeUsedFraction = true, dayOf(best.Day), &v
			used = append(used, v)
			bt.Covered++
		}
		bt.Failures = append(bt.Failures, row)
	}
	slices.SortStableFunc(bt.Failures, func(a, b BacktestRow) int { return a.FailedAt.Compare(b.FailedAt) })
	switch {
	case len(bt.Failures) == 0:
		bt.Reading = "No capacitor failures are recorded: nothing to check the life model against."
	case len(used) == 0:
		bt.Reading = fmt.Sprintf("No daily assessment covers any of the %d capacitor failures, so the life model cannot be checked against them yet.", len(bt.Failures))
	default:
		m := median(used)
		bt.MedianLifeUsed = &m
		switch {
		case m < 0.9:
			bt.Reading = fmt.Sprintf("The life model runs late: capacitors failed at a median %.0f %% of their calculated life (%d covered failures).", m*100, len(used))
		case m > 1.1:
			bt.Reading = fmt.Sprintf("The life model runs early (conservative): capacitors failed at a median %.0f %% of their calculated life (%d covered failures).", m*100, len(used))
		default:
			bt.Reading = fmt.Sprintf("The life model is about right: capacitors failed at a median %.0f %% of their calculated life (%d covered failures).", m*100, len(used))
		}
	}
	return bt
}

// dayOf cuts a stored day to YYYY-MM-DD (PostgreSQL hands a date back as a
// timestamp).
func dayOf(s string) string {
	if len(s) > 10 {
		return s[:10]
	}
	return s
}

func median(vs []float64) float64 {
	s := slices.Clone(vs)
	slices.Sort(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

// drive finds a drive by id.
func (ix *index) drive(id int64) (store.Drive, bool) {
	i, ok := slices.BinarySearchFunc(ix.d.Drives, id, func(d store.Drive, id int64) int {
		switch {
		case d.ID < id:
			return -1
		case d.ID > id:
			return 1
		}
		return 0
	})
	if !ok {
		return store.Drive{}, false
	}
	return ix.d.Drives[i], true
}
