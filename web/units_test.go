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
