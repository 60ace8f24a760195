package csvio

import (
	"errors"
	"fmt"
	"slices"
)

// Kind names what a CSV file holds: one register collection.
type Kind string

// The kinds, in the order a whole register is imported (each refers only
// to kinds before it). Readings are taken by the readings ingest.
const (
	KindSites         Kind = "sites"
	KindAreas         Kind = "areas"
	KindModels        Kind = "models"
	KindPositions     Kind = "positions"
	KindDrives        Kind = "drives"
	KindInstallations Kind = "installations"
	KindComponents    Kind = "components"
	KindEvents        Kind = "events"
	KindReadings      Kind = "readings"
)

// Kinds returns the register kinds in import order (readings excluded).
func Kinds() []Kind {
	return []Kind{KindSites, KindAreas, KindModels, KindPositions, KindDrives, KindInstallations, KindComponents, KindEvents}
}

// ErrUnknownKind is returned for a kind that is not one of Kinds or
// readings.
var ErrUnknownKind = errors.New("unknown kind")

// ErrNotAvailable is returned for a kind whose import or export is not
// available yet.
var ErrNotAvailable = errors.New("not available yet")

// ParseKind checks a kind named on the command line or in a URL.
func ParseKind(s string) (Kind, error) {
	k := Kind(s)
	if k == KindReadings || slices.Contains(Kinds(), k) {
		return k, nil
	}
	return "", fmt.Errorf("%w %q: want one of %v or %s", ErrUnknownKind, s, Kinds(), KindReadings)
}

// Columns returns the CSV columns of a register kind in the order Export
// writes them.
func Columns(k Kind) ([]string, error) {
	sp, err := specOf(k)
	if err != nil {
		return nil, err
	}
	out := make([]string, len(sp.columns))
	for i, c := range sp.columns {
		out[i] = c.name
	}
	return out, nil
}
