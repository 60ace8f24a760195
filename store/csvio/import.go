package csvio

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"io"
	"slices"
	"strings"

	"kelvard/store"
)

// Options tunes an import.
type Options struct {
	// Partial writes every good row and lists the bad ones; without it a
	// single bad row leaves the store untouched.
	Partial bool
	// Size is the input's length in bytes when known (0 otherwise), so
	// progress can say how far reading has come.
	Size int64
	// Progress, when set, is called as the file is read and as its rows are
	// written.
	Progress func(Progress)
}

// Stage names what an import is doing when it reports progress.
type Stage string

// Import stages: reading the file (Done and Total count bytes), then writing
// its rows (Done and Total count rows).
const (
	StageRead  Stage = "read"
	StageWrite Stage = "write"
)

// Progress is one progress report. Total is 0 when unknown.
type Progress struct {
	Stage Stage
	Done  int64
	Total int64
}

// Result reports an import. When the import fails as a whole (a bad row
// without Partial), nothing was written and only Rows, Rejected and Errors
// are filled.
type Result struct {
	Kind      Kind `json:"kind"`
	Partial   bool `json:"partial"`
	Rows      int  `json:"rows"`
	Created   int  `json:"created"`
	Updated   int  `json:"updated"`
	Unchanged int  `json:"unchanged"`
	Rejected  int  `json:"rejected"`
	// Errors names every problem of every rejected row: line, column and
	// reason.
	Errors []store.FieldError `json:"errors"`
}

// outcome is what happened to one good row.
type outcome int

const (
	created outcome = iota + 1
	updated
	unchanged
)

// Import reads a register CSV file of the given kind and writes it to the
// store in one transaction, as the principal in ctx (its site limit and
// audit name apply). Rows create objects or update the one with the same
// natural key; history kinds (installations, components, events) add what
// is new and leave what is already there. Without opts.Partial any bad row
// fails the whole file with a *store.ValidationError that names every bad
// row's line, column and reason, and nothing is written.
func Import(ctx context.Context, st *store.Store, kind Kind, r io.Reader, opts Options) (Result, error) {
	if kind == KindReadings {
		return importReadings(ctx, st, r, opts)
	}
	sp, err := specOf(kind)
	if err != nil {
		return Result{Kind: kind}, err
	}
	if opts.Progress != nil {
		r = &countingReader{r: r, report: func(n int64) { opts.Progress(Progress{Stage: StageRead, Done: n, Total: opts.Size}) }}
	}
	t, err := parse(sp, r)
	if err != nil {
		return Result{Kind: kind, Partial: opts.Partial}, fmt.Errorf("import %s: %w", kind, err)
	}
	var res Result
	err = st.InTx(ctx, func(tx *store.Tx) error {
		res = Result{Kind: kind, Partial: opts.Partial, Rows: len(t.rows), Errors: []store.FieldError{}}
		im := &importer{ctx: ctx, tx: tx, t: t, opts: opts, res: &res, refs: newRefs()}
		if err := im.run(); err != nil {
			return err
		}
		if res.Rejected > 0 && !opts.Partial {
			return &store.ValidationError{Fields: res.Errors}
		}
		return nil
	})
	sortFields(res.Errors)
	var ve *store.ValidationError
	if errors.As(err, &ve) {
		sortFields(ve.Fields)
		res = Result{Kind: kind, Partial: opts.Partial, Rows: len(t.rows), Rejected: res.Rejected, Errors: ve.Fields}
	}
	if err != nil {
		return res, fmt.Errorf("import %s: %w", kind, err)
	}
	return res, nil
}

// importer applies one parsed file inside one transaction.
type importer struct {
	ctx  context.Context
	tx   *store.Tx
	t    *table
	opts Options
	res  *Result
	refs *refs
	done int64
}

func (im *importer) run() error {
	switch im.t.spec.kind {
	case KindSites:
		return im.eachRow(im.site)
	case KindAreas:
		return im.eachRow(im.area)
	case KindModels:
		return im.eachRow(im.model)
	case KindPositions:
		return im.eachRow(im.position)
	case KindDrives:
		return im.eachRow(im.drive)
	case KindInstallations:
		return im.installations()
	case KindComponents:
		return im.components()
	case KindEvents:
		return im.eachRow(im.event)
	}
	return fmt.Errorf("%w %q", ErrUnknownKind, string(im.t.spec.kind))
}

// rowFunc writes one row inside its own savepoint.
type rowFunc func(tx *store.Tx, r *row) (outcome, error)

// eachRow applies fn to every row in file order.
func (im *importer) eachRow(fn rowFunc) error {
	for _, r := range im.t.rows {
		if err := im.apply(r, fn); err != nil {
			return err
		}
	}
	return nil
}

// apply writes one row in a savepoint, so a bad row leaves no trace and the
// transaction goes on to find the next bad row. A row error is recorded; any
// other error (the database gone, say) ends the import.
func (im *importer) apply(r *row, fn rowFunc) error {
	defer im.step()
	if len(r.errs) > 0 {
		im.reject(r.errs)
		return nil
	}
	var out outcome
	err := im.tx.Savepoint(func(tx *store.Tx) error {
		var err error
		out, err = fn(tx, r)
		return err
	})
	if err != nil {
		fe, ok := im.rowErrors(r, err)
		if !ok {
			return fmt.Errorf("line %d: %w", r.line, err)
		}
		im.reject(fe)
		return nil
	}
	im.count(out)
	return nil
}

// step reports one more row written.
func (im *importer) step() {
	im.done++
	if im.opts.Progress != nil {
		im.opts.Progress(Progress{Stage: StageWrite, Done: im.done, Total: int64(len(im.t.rows))})
	}
}

func (im *importer) count(out outcome) {
	switch out {
	case created:
		im.res.Created++
	case updated:
		im.res.Updated++
	case unchanged:
		im.res.Unchanged++
	}
}

func (im *importer) reject(fe []store.FieldError) {
	im.res.Rejected++
	im.res.Errors = append(im.res.Errors, fe...)
}

// rowErrors turns a store error about one row into field errors naming the
// row's line and CSV columns. ok is false for errors that are not about the
// row.
func (im *importer) rowErrors(r *row, err error) (fe []store.FieldError, ok bool) {
	sp := im.t.spec
	at := func(col, reason string) store.FieldError {
		return store.FieldError{Field: col, Row: r.n, Line: r.line, Reason: reason}
	}
	var ve *store.ValidationError
	switch {
	case errors.As(err, &ve):
		for _, f := range ve.Fields {
			fe = append(fe, at(columnOf(sp.kind, f.Field, f.Reason), f.Reason))
		}
		return fe, true
	case errors.Is(err, store.ErrDuplicate):
		return []store.FieldError{at(sp.key[len(sp.key)-1], "already exists (perhaps at a site outside your token's limit)")}, true
	case errors.Is(err, store.ErrNotFound):
		return []store.FieldError{at(sp.key[0], "refers to an object that does not exist or lies outside your sites")}, true
	}
	return nil, false
}

// columnOf maps a store field name (a JSON name, an id) to the CSV column
// that carries it.
func columnOf(k Kind, field, reason string) string {
	switch {
	case field == "site_id":
		return "site"
	case field == "area_id":
		return "area"
	case field == "model_id":
		return "model"
	case field == "stores_area_id":
		return "stores_area"
	case field == "drive_id":
		return "serial"
	case field == "position_id":
		return "position"
	case strings.HasPrefix(field, "carrier_derate"):
		return "carrier_derate"
	case field == "enclosure":
		if strings.Contains(reason, "NEMA") {
			return "enclosure.nema_type"
		}
		return "enclosure.ip_code"
	}
	return field
}

// sortFields orders field errors by line, keeping each row's own order.
func sortFields(fe []store.FieldError) {
	slices.SortStableFunc(fe, func(a, b store.FieldError) int { return cmp.Compare(a.Line, b.Line) })
}

// countingReader reports how many bytes have been read.
type countingReader struct {
	r      io.Reader
	n      int64
	report func(int64)
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	if n > 0 {
		c.report(c.n)
	}
	return n, err
}
