package store

import (
	"bytes"
	"encoding/json"
	"fmt"

	"kelvard/health"
)

// Parameters overrides model parameters for a site, an area or a drive
// model: a JSON object shaped like health.DriveParams holding only the
// fields to change, for example {"data_quality": {"silent_after_s": 7200}}.
// Layers apply in the order defaults, site, area, drive model.
type Parameters map[string]any

// ResolveParams applies override layers to base, each a partial
// DriveParams object, and checks the result.
func ResolveParams(base health.DriveParams, layers ...Parameters) (health.DriveParams, error) {
	out := base
	for _, l := range layers {
		if len(l) == 0 {
			continue
		}
		b, err := json.Marshal(l)
		if err != nil {
			return base, fmt.Errorf("parameters: %w", err)
		}
		dec := json.NewDecoder(bytes.NewReader(b))
		dec.DisallowUnknownFields()
		// Decoding onto a copy changes only the fields the layer names.
		if err := dec.Decode(&out); err != nil {
			return base, fmt.Errorf("parameters: %w", err)
		}
	}
	if err := out.Validate(); err != nil {
		return base, fmt.Errorf("parameters: %w", err)
	}
	return out, nil
}

// checkParameters adds a field error when a layer does not apply cleanly
// over the defaults.
func (fe *fieldErrors) parameters(p Parameters) {
	if _, err := ResolveParams(health.DefaultDriveParams(), p); err != nil {
		fe.add("parameters", "%v", err)
	}
}
