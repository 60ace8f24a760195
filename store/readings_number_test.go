package store

import (
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// TestParseNumberMatchesStrconv holds the decimal fast path to
// strconv.ParseFloat, bit for bit, on edge cases and on random decimals of
// the shapes readings come in.
func TestParseNumberMatchesStrconv(t *testing.T) {
	t.Parallel()
	cases := []string{"0", "-0", "+0", "0.0", "-0.0", "5.", ".5", "007", "677.25", "-12.375", "4700.5",
		"9007199254740992", "9007199254740993", "900719925474099.3", "0.1", "0.7", "1.0000000000000002",
		"123456789012345678", "0.0000000000000000000001", "0.00000000000000000000001", "1e3", "1E-3",
		"2.5e+2", "1.7976931348623157e308", "4.9e-324"}
	rng := rand.New(rand.NewPCG(3, 5))
	for range 200000 {
		v := (rng.Float64() - 0.5) * math.Pow(10, float64(rng.IntN(12)))
		cases = append(cases, strconv.FormatFloat(v, 'f', rng.IntN(18), 64), strconv.FormatFloat(v, 'g', -1, 64))
	}
	for _, c := range cases {
		want, err := strconv.ParseFloat(c, 64)
		if err != nil {
			t.Fatalf("strconv.ParseFloat(%q): %v", c, err)
		}
		got, why := parseNumber(c)
		if why != "" || math.Float64bits(got) != math.Float64bits(want) {
			t.Fatalf("parseNumber(%q) = %v (%q), strconv.ParseFloat gives %v", c, got, why, want)
		}
	}
	for _, bad := range []string{"", ".", "-", "+", "1.2.3", "1e", "0x10", "1_000", "abc", "1,5"} {
		if _, why := parseNumber(bad); why != reasonNotNumber {
			t.Errorf("parseNumber(%q) reason %q, want %q", bad, why, reasonNotNumber)
		}
	}
	for _, bad := range []string{"NaN", "nan", "Inf", "-Infinity", "1e400", "-1e999"} {
		if _, why := parseNumber(bad); why != reasonNotFinite {
			t.Errorf("parseNumber(%q) reason %q, want %q", bad, why, reasonNotFinite)
		}
	}
}
