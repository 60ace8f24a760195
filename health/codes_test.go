package health

import (
	"slices"
	"strings"
	"testing"
)

// The accepted forms follow NEMA 250 (Type names) and IEC 60529 (IP code
// layout: "IP", solids digit, water digit, optional additional letter A-D,
// optional supplementary letters H, M, S, W; Amd 2 adds the water digit 9).
// The K suffixes follow ISO 20653 (from memory: solids 5K and 6K, water 4K,
// 6K and 9K).

func TestParseNEMAType(t *testing.T) {
	tests := []struct {
		in   string
		want NEMAType
		bad  bool
	}{
		{in: "1", want: "1"},
		{in: "4X", want: "4X"},
		{in: "4x", want: "4X"},
		{in: "Type 4X", want: "4X"},
		{in: "type 4x", want: "4X"},
		{in: "TYPE4X", want: "4X"},
		{in: "  12k  ", want: "12K"},
		{in: "3RX", want: "3RX"},
		{in: "3sx", want: "3SX"},
		{in: "6P", want: "6P"},
		{in: "13", want: "13"},
		{in: "7", want: "7"},
		{in: "10", want: "10"},
		{in: "", bad: true},
		{in: "Type", bad: true},
		{in: "11", bad: true},
		{in: "4XX", bad: true},
		{in: "12X", bad: true},
		{in: "NEMA 4X", bad: true}, // only the "Type" prefix is read
		{in: "IP66", bad: true},
	}
	for _, tc := range tests {
		got, err := ParseNEMAType(tc.in)
		if tc.bad {
			if err == nil {
				t.Errorf("ParseNEMAType(%q) = %q, want an error", tc.in, got)
			}
			continue
		}
		if err != nil || got != tc.want {
			t.Errorf("ParseNEMAType(%q) = %q, %v; want %q", tc.in, got, err, tc.want)
		}
	}
}

func TestNEMATypesParseToThemselves(t *testing.T) {
	types := NEMATypes()
	if len(types) != 20 {
		t.Fatalf("NEMATypes has %d entries, want 20 (1, 2, 3, 3R, 3S, 3X, 3RX, 3SX, 4, 4X, 5, 6, 6P, 7, 8, 9, 10, 12, 12K, 13)", len(types))
	}
	for _, ty := range types {
		got, err := ParseNEMAType("Type " + string(ty))
		if err != nil || got != ty {
			t.Errorf("ParseNEMAType(Type %s) = %q, %v", ty, got, err)
		}
	}
	// The list handed out is a copy.
	types[0] = "99"
	if NEMATypes()[0] != "1" {
		t.Error("NEMATypes returned the package's own slice")
	}
}

func TestNEMATypeHazardous(t *testing.T) {
	for _, ty := range NEMATypes() {
		want := slices.Contains([]NEMAType{"7", "8", "9", "10"}, ty)
		if ty.Hazardous() != want {
			t.Errorf("Type %s Hazardous() = %v, want %v", ty, ty.Hazardous(), want)
		}
	}
}

func TestParseIPRating(t *testing.T) {
	tests := []struct {
		in   string
		want IPRating
		str  string // canonical String(); empty means the input upper-cased
		bad  string // part of the expected error text; empty means no error
	}{
		{in: "IP20", want: IPRating{{Solids: 2, Water: 0}}},
		{in: "ip54", want: IPRating{{Solids: 5, Water: 4}}, str: "IP54"},
		{in: " IP66 ", want: IPRating{{Solids: 6, Water: 6}}, str: "IP66"},
		{in: "IPX4", want: IPRating{{Solids: -1, Water: 4}}},
		{in: "IP5X", want: IPRating{{Solids: 5, Water: -1}}},
		{in: "IPX9", want: IPRating{{Solids: -1, Water: 9}}},
		{in: "IPX9K", want: IPRating{{Solids: -1, Water: 9, K: true}}},
		{in: "IP69K", want: IPRating{{Solids: 6, Water: 9, K: true}}},
		// ISO 20653 writes the solids K too; kelvard keeps the digit only.
		{in: "IP6K9K", want: IPRating{{Solids: 6, Water: 9, K: true}}, str: "IP69K"},
		{in: "IP5K4K", want: IPRating{{Solids: 5, Water: 4, K: true}}, str: "IP54K"},
		{in: "IPX6K", want: IPRating{{Solids: -1, Water: 6, K: true}}},
		{in: "IP20B", want: IPRating{{Solids: 2, Water: 0, Letters: "B"}}},
		{in: "IP21D", want: IPRating{{Solids: 2, Water: 1, Letters: "D"}}},
		{in: "IP23S", want: IPRating{{Solids: 2, Water: 3, Letters: "S"}}},
		{in: "IP20CHM", want: IPRating{{Solids: 2, Water: 0, Letters: "CHM"}}},
		{in: "IP66/IP67", want: IPRating{{Solids: 6, Water: 6}, {Solids: 6, Water: 7}}},
		{in: "IP66/67", want: IPRating{{Solids: 6, Water: 6}, {Solids: 6, Water: 7}}, str: "IP66/IP67"},
		{in: "ip66 / ip67", want: IPRating{{Solids: 6, Water: 6}, {Solids: 6, Water: 7}}, str: "IP66/IP67"},
		{in: "IP66/IP68/IP69K", want: IPRating{{Solids: 6, Water: 6}, {Solids: 6, Water: 8}, {Solids: 6, Water: 9, K: true}}},
		{in: "", want: nil},
		{in: "   ", want: nil},

		{in: "66", bad: "does not start with IP"},
		{in: "IP", bad: "too short"},
		{in: "IP6", bad: "too short"},
		{in: "IP76", bad: "bad digit"},
		{in: "IP6A", bad: "bad digit"},
		{in: "IPXX", bad: "neither digit"},
		{in: "IP55K", bad: "water digit 4, 6 or 9"},
		{in: "IP67K", bad: "water digit 4, 6 or 9"},
		{in: "IPX5K", bad: "water digit 4, 6 or 9"},
		{in: "IP2K4", bad: "solids digit 5 or 6"},
		{in: "IPXK9K", bad: "solids digit 5 or 6"},
		{in: "IP20E", bad: "unknown letter"},
		{in: "IP20BB", bad: "must come first"},
		{in: "IP20HB", bad: "must come first"},
		{in: "IP66/", bad: `IP rating "IP66/"`},
		{in: "IP66/IP6", bad: "too short"},
		{in: "IP 66", bad: "bad digit"},
	}
	for _, tc := range tests {
		got, err := ParseIPRating(tc.in)
		if tc.bad != "" {
			if err == nil {
				t.Errorf("ParseIPRating(%q) = %v, want an error containing %q", tc.in, got, tc.bad)
			} else if !strings.Contains(err.Error(), tc.bad) {
				t.Errorf("ParseIPRating(%q) error %q does not contain %q", tc.in, err, tc.bad)
			}
			continue
		}
		if err != nil {
			t.Errorf("ParseIPRating(%q): %v", tc.in, err)
			continue
		}
		if !slices.Equal(got, tc.want) {
			t.Errorf("ParseIPRating(%q) = %#v, want %#v", tc.in, got, tc.want)
		}
		str := tc.str
		if str == "" {
			str = strings.ToUpper(strings.TrimSpace(tc.in))
		}
		if got.String() != str {
			t.Errorf("ParseIPRating(%q).String() = %q, want %q", tc.in, got.String(), str)
		}
		// The canonical form parses back to the same rating.
		again, err := ParseIPRating(got.String())
		if err != nil || !slices.Equal(again, got) {
			t.Errorf("round trip of %q gave %#v, %v", got.String(), again, err)
		}
	}
}

func TestParseEnclosure(t *testing.T) {
	tests := []struct {
		nema, ip string
		str      string
		bad      bool
	}{
		{nema: "4X", ip: "IP66", str: "Type 4X / IP66"},
		{nema: "type 12", str: "Type 12"},
		{ip: "IP20", str: "IP20"},
		{ip: "IP66/67", str: "IP66/IP67"},
		{bad: true},
		{nema: "  ", ip: " ", bad: true},
		{nema: "4Y", ip: "IP66", bad: true},
		{nema: "4X", ip: "IP6", bad: true},
	}
	for _, tc := range tests {
		e, err := ParseEnclosure(tc.nema, tc.ip)
		if tc.bad {
			if err == nil {
				t.Errorf("ParseEnclosure(%q, %q) = %v, want an error", tc.nema, tc.ip, e)
			}
			continue
		}
		if err != nil || e.String() != tc.str {
			t.Errorf("ParseEnclosure(%q, %q) = %q, %v; want %q", tc.nema, tc.ip, e.String(), err, tc.str)
		}
	}
}
