package web

import (
	"math"
	"testing"
)

func TestUnitConversions(t *testing.T) {
	// Exact values by the definitions in NIST SP 811 (2008), Appendix B:
	// 0 °C = 32 °F, 100 °C = 212 °F, -40 °C = -40 °F; 1 hp (550 ft·lbf/s)
	// = 745.699 871 582 270 22 W; 1 Btu_IT/h = 0.293 071 070 172 222 W.
	for _, tc := range []struct{ c, f float64 }{{0, 32}, {100, 212}, {-40, -40}, {40, 104}} {
		if got := CToF(tc.c); got != tc.f {
			t.Errorf("CToF(%v) = %v, want %v", tc.c, got, tc.f)
		}
	}
	if math.Abs(wattsPerHP-745.69987158227022) > 1e-9 || math.Abs(wattsPerBTUPerH-0.29307107017222) > 1e-12 {
		t.Error("conversion factors differ from NIST SP 811")
	}
	si, imp := Units{}, Units{Imperial: true}
	for _, tc := range []struct {
		u    Units
		got  string
		want string
	}{
		{si, si.Temp(40), "40 °C"},
		{imp, imp.Temp(40), "104 °F"},
		{imp, imp.Rise(10), "18 °F"},
		{si, si.Rise(5), "5 K"},
		// 45 kW / 0.745 699 872 kW per hp = 60.35 hp.
		{imp, imp.Power(45), "60.3 hp"},
		{si, si.Power(18.5), "18.5 kW"},
		// 900 W / 0.293 071 W per Btu/h = 3070.9 Btu/h.
		{imp, imp.Heat(900), "3071 Btu/h"},
		{si, si.Heat(900), "900 W"},
		{imp, imp.Value(55.0, "°C"), "131 °F"},
		{imp, imp.Value(12.0, "K"), "21.6 °F"},
		{imp, imp.Value(2.0, "K/week"), "3.6 °F/week"},
		{imp, imp.Value(480.0, "V"), "480 V"},
		{si, si.Value(0.42, "fraction"), "42\u00a0%"},
		{si, si.Value("hose_down", ""), "hose down"},
		{si, si.Value(true, ""), "yes"},
		{si, si.Value(math.NaN(), "A"), "–"},
		{si, si.Value(nil, "A"), "–"},
	} {
		if tc.got != tc.want {
			t.Errorf("%s: %q, want %q", tc.u.Name(), tc.got, tc.want)
		}
	}
}

func TestTextInReaderUnits(t *testing.T) {
	// Conversions by NIST SP 811 (2008), Appendix B, as above: 40 °C =
	// 104 °F, 134.7 °C = 274.46 °F, a 94.7 K rise = 170.46 °F, 1200 W =
	// 4094.6 Btu/h, 3 K/week = 5.4 °F/week.
	imp := Units{Imperial: true}
	for _, tc := range []struct{ in, want string }{
		{"At the design maximum of 40.0 °C the air inside the cabinet is predicted at 134.7 °C (94.7 K rise), above the drive's maximum ambient of 55.0 °C.",
			"At the design maximum of 104 °F the air inside the cabinet is predicted at 274.5 °F (170.5 °F rise), above the drive's maximum ambient of 131 °F."},
		{"the cabinet's heat load of 1200 W exceeds its cooler's rated 900 W", "the cabinet's heat load of 4095 Btu/h exceeds its cooler's rated 3071 Btu/h"},
		{"heatsink rise grows 3 K/week at comparable load", "heatsink rise grows 5.4 °F/week at comparable load"},
		{"a 45 kW drive at -10 °C", "a 60.3 hp drive at 14 °F"},
		// Ranges convert both ends: 50 °C = 122 °F, 55 °C = 131 °F, 0 °C =
		// 32 °F (NIST SP 811, as above).
		{"kept at 50-55 °C", "kept at 122-131 °F"},
		{"between 0 and 40 °C", "between 32 and 104 °F"},
		{"from -10 to 40 °C", "from 14 to 104 °F"},
		// The rule that suspects a sensor logs in °F speaks of the logged
		// numbers: left alone.
		{"the median ambient of 95.0 °C is above 70 °C, air no drive is rated for; read as °F it would be 35.0 °C",
			"the median ambient of 95.0 °C is above 70 °C, air no drive is rated for; read as °F it would be 35.0 °C"},
		// Left alone: a unit per area, bare numbers, words that only
		// start like a unit, and running text without quantities.
		{"design irradiance 1000 W/m²", "design irradiance 1000 W/m²"},
		{"row 3 of 12, KW-7, Kelvin", "row 3 of 12, KW-7, Kelvin"},
		{"Replace the fan.", "Replace the fan."},
	} {
		if got := imp.Text(tc.in); got != tc.want {
			t.Errorf("Text(%q)\n got %q\nwant %q", tc.in, got, tc.want)
		}
	}
	msg := "predicted at 134.7 °C (94.7 K rise)"
	if got := (Units{}).Text(msg); got != msg {
		t.Errorf("SI text changed: %q", got)
	}
}

func TestFormatting(t *testing.T) {
	for _, tc := range []struct{ got, want string }{
		{percent(0.5), "50\u00a0%"},
		{percent(0.018), "1.8\u00a0%"},
		{percent(1.25), "125\u00a0%"},
		{hours(1131150), "1\u202f131\u202f150 h (129 years)"},
		{hours(950), "950 h"},
		{grouped(-1234), "-1\u202f234"},
		{trimNum(-0.04, 1), "0"},
		{words("dc_bus"), "dc bus"},
	} {
		if tc.got != tc.want {
			t.Errorf("%q, want %q", tc.got, tc.want)
		}
	}
}

func TestLocalPath(t *testing.T) {
	for _, tc := range []struct{ in, want string }{
		{"/drives/3?range=7d", "/drives/3?range=7d"},
		{"/findings#finding-2", "/findings#finding-2"},
		{"//elsewhere.example/", "/def"},
		{"/\\elsewhere.example", "/def"},
		{"https://elsewhere.example/", "/def"},
		{"drives/3", "/def"},
		{"/a\r\nSet-Cookie: x=y", "/def"},
		{"", "/def"},
	} {
		if got := localPath(tc.in, "/def"); got != tc.want {
			t.Errorf("localPath(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
	if got := withQuery("/findings?done=units&kind=fan#f-3", "done", "acknowledged"); got != "/findings?done=acknowledged&kind=fan#f-3" {
		t.Errorf("withQuery = %q", got)
	}
}
