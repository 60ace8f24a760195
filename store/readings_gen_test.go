package store_test

import (
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"time"

	"kelvard/store"
)

// sampleRows makes n deterministic readings over ten positions, hourly,
// with some values missing, as a gateway would post them.
func sampleRows(n int) []store.Reading {
	rng := rand.New(rand.NewPCG(7, 11))
	start := time.Date(2024, 3, 1, 0, 0, 0, 0, time.UTC)
	out := make([]store.Reading, n)
	for i := range out {
		r := &out[i]
		r.Position = fmt.Sprintf("BP-%04d", i%10)
		if i%3 == 0 {
			r.Site = "North works"
		}
		r.At = start.Add(time.Duration(i/10) * time.Hour).Add(time.Duration(rng.IntN(1000)) * time.Microsecond)
		amb := 12 + 18*rng.Float64()
		cur := 30 * rng.Float64()
		r.AmbientC, r.InternalAirC, r.HeatsinkC = f(amb), f(amb+9.5), f(amb+24.25)
		r.CurrentA, r.PeakCurrentA, r.FrequencyHz = f(cur), f(cur*1.1), f(50*rng.Float64())
		r.BusV, r.BusRippleV = f(650+40*rng.Float64()), f(4+6*rng.Float64())
		r.RunHoursH, r.PowerOnHoursH = f(float64(10000+i)), f(float64(20000+i))
		if i%24 == 0 {
			r.DriveCapacitorLifeUsedFraction, r.DriveFanLifeUsedFraction = f(0.31), f(0.42)
			r.CapacitanceUF, r.ESRMilliohm = f(4700-rng.Float64()*100), f(30+rng.Float64())
		}
		if i%7 == 0 {
			r.BusRippleV = nil
		}
	}
	return out
}

// jsonRow is a reading as posted in JSON: the input columns only.
type jsonRow struct {
	Site                           string    `json:"site,omitempty"`
	Position                       string    `json:"position"`
	At                             time.Time `json:"at"`
	InternalAirC                   *float64  `json:"internal_air_c"`
	AmbientC                       *float64  `json:"ambient_c"`
	HeatsinkC                      *float64  `json:"heatsink_c"`
	CurrentA                       *float64  `json:"current_a"`
	PeakCurrentA                   *float64  `json:"peak_current_a"`
	FrequencyHz                    *float64  `json:"frequency_hz"`
	BusV                           *float64  `json:"bus_v"`
	BusRippleV                     *float64  `json:"bus_ripple_v"`
	RunHoursH                      *float64  `json:"run_hours_h"`
	PowerOnHoursH                  *float64  `json:"power_on_hours_h"`
	DriveCapacitorLifeUsedFraction *float64  `json:"drive_capacitor_life_used_fraction"`
	DriveFanLifeUsedFraction       *float64  `json:"drive_fan_life_used_fraction"`
	CapacitanceUF                  *float64  `json:"capacitance_uf"`
	ESRMilliohm                    *float64  `json:"esr_milliohm"`
}

func toJSONRow(r store.Reading) jsonRow {
	return jsonRow{r.Site, r.Position, r.At, r.InternalAirC, r.AmbientC, r.HeatsinkC, r.CurrentA, r.PeakCurrentA,
		r.FrequencyHz, r.BusV, r.BusRippleV, r.RunHoursH, r.PowerOnHoursH, r.DriveCapacitorLifeUsedFraction,
		r.DriveFanLifeUsedFraction, r.CapacitanceUF, r.ESRMilliohm}
}

// readingsJSON encodes rows as a posted JSON body, one object a line.
func readingsJSON(rows []store.Reading) []byte {
	out := []byte("[\n")
	for i, r := range rows {
		b, err := json.Marshal(toJSONRow(r))
		if err != nil {
			panic(err)
		}
		out = append(out, b...)
		if i < len(rows)-1 {
			out = append(out, ',')
		}
		out = append(out, '\n')
	}
	return append(out, "]\n"...)
}
