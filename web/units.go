package web

import (
	"fmt"
	"math"
	"regexp"
	"strconv"
	"strings"
)

// Units is the reader's choice of display units for temperature and power.
// The store and the API stay SI (DESIGN.md section 5); only pages convert.
type Units struct {
	Imperial bool
}

// Conversion factors, exact by definition (NIST SP 811, Appendix B):
// t/°F = 1.8 t/°C + 32; a temperature difference of 1 K is 1.8 °F; one
// mechanical horsepower is 745.699 871 582 270 22 W (550 ft·lbf/s); one
// International Table Btu per hour is 0.293 071 070 172 222 W.
const (
	wattsPerHP      = 745.69987158227022
	wattsPerBTUPerH = 0.29307107017222
)

// CToF converts a temperature from °C to °F.
func CToF(c float64) float64 { return c*1.8 + 32 }

// unitsFromCookie reads the units cookie value.
func unitsFromCookie(v string) Units { return Units{Imperial: v == "imperial"} }

// Name says the choice in words.
func (u Units) Name() string {
	if u.Imperial {
		return "imperial"
	}
	return "si"
}

// TempUnit is the temperature unit shown.
func (u Units) TempUnit() string {
	if u.Imperial {
		return "°F"
	}
	return "°C"
}

// TempValue converts a temperature in °C for display, without a unit.
func (u Units) TempValue(c float64) float64 {
	if u.Imperial {
		return CToF(c)
	}
	return c
}

// Temp writes a temperature given in °C.
func (u Units) Temp(c float64) string {
	if math.IsNaN(c) {
		return "–"
	}
	return trimNum(u.TempValue(c), 1) + " " + u.TempUnit()
}

// TempP writes an optional temperature.
func (u Units) TempP(c *float64) string {
	if c == nil {
		return "–"
	}
	return u.Temp(*c)
}

// Rise writes a temperature difference given in K.
func (u Units) Rise(k float64) string {
	if u.Imperial {
		return trimNum(k*1.8, 1) + " °F"
	}
	return trimNum(k, 1) + " K"
}

// Power writes a drive power rating given in kW.
func (u Units) Power(kw float64) string {
	if u.Imperial {
		return trimNum(kw*1000/wattsPerHP, 1) + " hp"
	}
	return trimNum(kw, 1) + " kW"
}

// Heat writes a heat flow given in W (cabinet losses, cooling capacity):
// Btu/h in imperial units, the trade's usual unit for cooling.
func (u Units) Heat(w float64) string {
	if u.Imperial {
		return trimNum(w/wattsPerBTUPerH, 0) + " Btu/h"
	}
	return trimNum(w, 0) + " W"
}

// siQuantity finds a number with an SI unit in running text: °C for
// temperatures, K for temperature differences, kW and W; or a range of two
// numbers sharing the unit ("50-55 °C", "between 0 and 40 °C"), whose
// first number is group 1 and second group 3.
var siQuantity = regexp.MustCompile(`(-?\d+(?:\.\d+)?)(?:( ?(?:–|-|to|and) ?)(-?\d+(?:\.\d+)?))? ?(°C|kW|K|W)\b`)

// Text rewrites the SI quantities in a sentence written by the models
// (findings' messages and remedies, which state temperatures in °C,
// differences in K and heat in W) into the reader's units, both ends of a
// range included. With SI units, for a quantity per area or per time
// other than K per time (W/m²), and in a sentence that already speaks of
// °F (the data-quality rule that suspects a sensor logs in °F, whose
// numbers are about what was logged), the text is left as it is.
func (u Units) Text(s string) string {
	if !u.Imperial || strings.Contains(s, "°F") {
		return s
	}
	convert := func(v float64, unit string) string {
		switch unit {
		case "°C":
			return u.Temp(v)
		case "K":
			return u.Rise(v)
		case "kW":
			return u.Power(v)
		}
		return u.Heat(v)
	}
	var b strings.Builder
	last := 0
	for _, m := range siQuantity.FindAllStringSubmatchIndex(s, -1) {
		unit := s[m[8]:m[9]]
		if m[1] < len(s) && s[m[1]] == '/' && unit != "K" {
			continue // W/m² and the like are not converted
		}
		v, err := strconv.ParseFloat(s[m[2]:m[3]], 64)
		if err != nil {
			continue
		}
		b.WriteString(s[last:m[0]])
		if m[6] >= 0 { // a range: the first number without its unit
			hi, err := strconv.ParseFloat(s[m[6]:m[7]], 64)
			if err != nil {
				continue
			}
			lo, _, _ := strings.Cut(convert(v, unit), " ")
			b.WriteString(lo + s[m[4]:m[5]])
			v = hi
		}
		b.WriteString(convert(v, unit))
		last = m[1]
	}
	b.WriteString(s[last:])
	return b.String()
}

// Value writes a value with its SI unit as findings' evidence carries it,
// converting temperatures, temperature differences and power when the
// reader chose imperial units. Values that are not numbers are written as
// they are, with underscores turned into spaces.
func (u Units) Value(v any, unit string) string {
	var f float64
	switch x := v.(type) {
	case nil:
		return "–"
	case float64:
		f = x
	case int:
		f = float64(x)
	case int64:
		f = float64(x)
	case bool:
		if x {
			return "yes"
		}
		return "no"
	case string:
		return strings.TrimSpace(words(x) + " " + unit)
	default:
		return strings.TrimSpace(fmt.Sprint(x) + " " + unit)
	}
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return "–"
	}
	if u.Imperial {
		switch unit {
		case "°C":
			return u.Temp(f)
		case "K":
			return u.Rise(f)
		case "K/min", "K/week":
			return trimNum(f*1.8, 2) + " °F/" + strings.TrimPrefix(unit, "K/")
		case "W":
			return u.Heat(f)
		case "kW":
			return u.Power(f)
		}
	}
	if unit == "fraction" {
		return percent(f)
	}
	return strings.TrimSpace(trimNum(f, 3) + " " + unit)
}

// trimNum writes v with at most dec decimals and no trailing zeros.
func trimNum(v float64, dec int) string {
	s := strconv.FormatFloat(v, 'f', dec, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if s == "-0" {
		s = "0"
	}
	return s
}
