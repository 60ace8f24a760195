package csvio

import (
	"context"
	"fmt"
	"io"

	"kelvard/store"
)

// importReadings takes a readings CSV file through the readings ingest:
// the same columns, checks, idempotency and conflict rules as POST
// /api/v1/readings, in one transaction (all rows or, with Partial, the
// good ones). A reading already stored with the same values counts as
// unchanged; one stored with other values is kept and listed as an error
// of its line. A file the parser cannot read at all (an unknown column,
// broken CSV) is a *store.ValidationError naming it.
func importReadings(ctx context.Context, st *store.Store, r io.Reader, opts Options) (Result, error) {
	res := Result{Kind: KindReadings, Partial: opts.Partial, Errors: []store.FieldError{}}
	body, err := io.ReadAll(r)
	if err != nil {
		return res, fmt.Errorf("import %s: read: %w", KindReadings, err)
	}
	if opts.Progress != nil {
		opts.Progress(Progress{Stage: StageRead, Done: int64(len(body)), Total: int64(len(body))})
	}
	batch, err := store.ParseReadingsCSV(body, store.ParseOptions{})
	if err != nil {
		if me, ok := err.(*store.MalformedError); ok {
			return res, &store.ValidationError{Fields: me.Fields}
		}
		return res, fmt.Errorf("import %s: %w", KindReadings, err)
	}
	res.Rows = len(batch.Rows) + countRows(batch.Refused)
	ing, err := st.Ingest(ctx, batch.Rows, store.IngestOptions{Partial: opts.Partial, Refused: batch.Refused})
	if err != nil {
		return res, fmt.Errorf("import %s: %w", KindReadings, err)
	}
	res.Created, res.Unchanged = ing.Inserted, ing.AlreadyPresent
	res.Errors = append(res.Errors, ing.Rejected...)
	res.Rejected = countRows(ing.Rejected)
	for _, c := range ing.Conflicts {
		res.Errors = append(res.Errors, store.FieldError{Field: "at", Row: c.Row, Line: c.Line,
			Reason: fmt.Sprintf("already stored with other values (%v); the stored reading is kept", c.Fields)})
		res.Rejected++
	}
	if opts.Progress != nil {
		opts.Progress(Progress{Stage: StageWrite, Done: int64(res.Rows), Total: int64(res.Rows)})
	}
	return res, nil
}

// countRows counts the distinct rows a list of field errors names.
func countRows(errs []store.FieldError) int {
	seen := map[int]bool{}
	for _, e := range errs {
		seen[e.Row] = true
	}
	return len(seen)
}
