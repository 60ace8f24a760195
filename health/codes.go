package health

import (
	"fmt"
	"slices"
	"strings"
)

// NEMAType is an enclosure Type of NEMA 250 ("1", "3R", "4X", "12K" ...).
type NEMAType string

// nemaTypes lists the Types defined by NEMA 250, including the corrosion
// suffix variants of Types 3, 3R and 3S. Types 7 to 10 are for hazardous
// (classified) locations.
var nemaTypes = []NEMAType{"1", "2", "3", "3R", "3S", "3X", "3RX", "3SX", "4", "4X", "5", "6", "6P", "7", "8", "9", "10", "12", "12K", "13"}

// NEMATypes returns every NEMA 250 Type kelvard knows.
func NEMATypes() []NEMAType { return slices.Clone(nemaTypes) }

// ParseNEMAType accepts "4X", "Type 4X" or "type 4x" and returns the
// canonical Type.
func ParseNEMAType(s string) (NEMAType, error) {
	t := strings.ToUpper(strings.TrimSpace(s))
	t = strings.TrimSpace(strings.TrimPrefix(t, "TYPE"))
	if slices.Contains(nemaTypes, NEMAType(t)) {
		return NEMAType(t), nil
	}
	return "", fmt.Errorf("%q is not a NEMA 250 Type (one of %v)", s, nemaTypes)
}

// Hazardous reports whether the Type is one of the hazardous-location Types
// 7 to 10, which kelvard does not judge.
func (t NEMAType) Hazardous() bool { return t == "7" || t == "8" || t == "9" || t == "10" }

// IPCode is one IEC 60529 IP code. A digit of -1 stands for "X" (not
// specified). K marks the ISO 20653 road-vehicle variant of the water digit:
// 4K (splashing at raised pressure), 6K (powerful jets at raised pressure)
// and 9K (high-pressure hot-water washdown), as in IPX9K or IP6K9K (ISO 20653
// digits from memory). The solids K of ISO 20653 (5K, 6K) is accepted on
// input and not kept: kelvard reads IP6K as IP6. Letters keeps the optional
// additional letter (one of A-D) followed by any supplementary letters (H, M,
// S, W), as IEC 60529 orders them.
type IPCode struct {
	Solids  int
	Water   int
	K       bool
	Letters string
}

// String formats the code as IEC 60529 writes it, for example "IP66" or
// "IPX9K".
func (c IPCode) String() string {
	d := func(n int) string {
		if n < 0 {
			return "X"
		}
		return fmt.Sprint(n)
	}
	k := ""
	if c.K {
		k = "K"
	}
	return "IP" + d(c.Solids) + d(c.Water) + k + c.Letters
}

// parseIPCode parses one code such as "IP54", "IPX9K", "IP6K9K" or "IP20B".
func parseIPCode(s string) (IPCode, error) {
	u := strings.ToUpper(strings.TrimSpace(s))
	if !strings.HasPrefix(u, "IP") {
		return IPCode{}, fmt.Errorf("%q does not start with IP", s)
	}
	rest := u[2:]
	c := IPCode{}
	digit := func(max int) (int, error) {
		if rest == "" {
			return 0, fmt.Errorf("%q is too short", s)
		}
		ch := rest[0]
		rest = rest[1:]
		if ch == 'X' {
			return -1, nil
		}
		if ch < '0' || int(ch-'0') > max {
			return 0, fmt.Errorf("%q has a bad digit %q", s, ch)
		}
		return int(ch - '0'), nil
	}
	var err error
	if c.Solids, err = digit(6); err != nil {
		return IPCode{}, err
	}
	if strings.HasPrefix(rest, "K") { // ISO 20653 writes IP5K and IP6K
		if c.Solids != 5 && c.Solids != 6 {
			return IPCode{}, fmt.Errorf("%q: K follows only the solids digit 5 or 6", s)
		}
		rest = rest[1:]
	}
	if c.Water, err = digit(9); err != nil {
		return IPCode{}, err
	}
	if strings.HasPrefix(rest, "K") {
		if c.Water != 4 && c.Water != 6 && c.Water != 9 {
			return IPCode{}, fmt.Errorf("%q: K follows only the water digit 4, 6 or 9", s)
		}
		c.K = true
		rest = rest[1:]
	}
	for i, r := range rest {
		switch {
		case strings.ContainsRune("ABCD", r):
			if i != 0 {
				return IPCode{}, fmt.Errorf("%q: the additional letter %q must come first and only once", s, r)
			}
		case strings.ContainsRune("HMSW", r):
		default:
			return IPCode{}, fmt.Errorf("%q has an unknown letter %q", s, r)
		}
	}
	c.Letters = rest
	if c.Solids < 0 && c.Water < 0 {
		return IPCode{}, fmt.Errorf("%q names neither digit", s)
	}
	return c, nil
}

// IPRating is one or more IP codes that an enclosure meets at once, written
// "IP66/IP67" or "IP66/67" for dual coding. IEC 60529 lets second digits up
// to 6 imply the lower ones; 7, 8 and 9 do not imply 5 or 6, which is why
// enclosures are dual-coded.
type IPRating []IPCode

// ParseIPRating parses a single or dual-coded IP rating. An empty string
// gives an empty rating and no error.
func ParseIPRating(s string) (IPRating, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return nil, nil
	}
	var out IPRating
	for i, part := range strings.Split(s, "/") {
		part = strings.TrimSpace(part)
		if i > 0 && !strings.HasPrefix(strings.ToUpper(part), "IP") {
			part = "IP" + part
		}
		c, err := parseIPCode(part)
		if err != nil {
			return nil, fmt.Errorf("IP rating %q: %w", s, err)
		}
		out = append(out, c)
	}
	return out, nil
}

// String formats the rating as "IP66/IP67".
func (r IPRating) String() string {
	parts := make([]string, len(r))
	for i, c := range r {
		parts[i] = c.String()
	}
	return strings.Join(parts, "/")
}

// Enclosure is what an enclosure is rated for: a NEMA 250 Type, an IEC 60529
// IP rating, or both. At least one must be given.
type Enclosure struct {
	NEMA NEMAType
	IP   IPRating
}

// ParseEnclosure builds an Enclosure from a NEMA Type and an IP rating,
// either of which may be empty but not both.
func ParseEnclosure(nema, ip string) (Enclosure, error) {
	var e Enclosure
	if strings.TrimSpace(nema) != "" {
		t, err := ParseNEMAType(nema)
		if err != nil {
			return Enclosure{}, err
		}
		e.NEMA = t
	}
	r, err := ParseIPRating(ip)
	if err != nil {
		return Enclosure{}, err
	}
	e.IP = r
	if e.NEMA == "" && len(e.IP) == 0 {
		return Enclosure{}, fmt.Errorf("an enclosure needs a NEMA 250 Type, an IP code or both")
	}
	return e, nil
}

// String formats the enclosure as "Type 4X / IP66" or either part alone.
func (e Enclosure) String() string {
	var parts []string
	if e.NEMA != "" {
		parts = append(parts, "Type "+string(e.NEMA))
	}
	if len(e.IP) > 0 {
		parts = append(parts, e.IP.String())
	}
	return strings.Join(parts, " / ")
}
