package csvio

import (
	"context"
	"fmt"
	"io"

	"kelvard/store"
)

// importReadings takes a readings CSV file. Readings are the readings
// ingest's to take (store/ingest*.go), with its own columns, batching and
// replay rules; until it is wired in here the kind answers ErrNotAvailable,
// which the API turns into 501 and the command line into a plain message.
//
// TODO(readings): fill importReadings from the readings ingest, keeping this
// signature, so `kelvard import readings FILE` and
// `POST /api/v1/import/readings` take readings CSV.
func importReadings(_ context.Context, _ *store.Store, _ io.Reader, opts Options) (Result, error) {
	return Result{Kind: KindReadings, Partial: opts.Partial},
		fmt.Errorf("import %s: %w: post readings to /api/v1/readings for now", KindReadings, ErrNotAvailable)
}
