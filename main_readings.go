package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"strconv"

	"kelvard/api"
	"kelvard/jobs/bench"
)

// ingestLimits are the serve command's readings limits.
type ingestLimits struct {
	bytes int64
	rows  int
}

// ingestLimitFlags adds --max-ingest-bytes and --max-ingest-rows to fs,
// their defaults taken from KELVARD_MAX_INGEST_BYTES and
// KELVARD_MAX_INGEST_ROWS. The values are read when fs is parsed.
func ingestLimitFlags(fs *flag.FlagSet, getenv func(string) string) (*ingestLimits, error) {
	l := &ingestLimits{bytes: api.DefaultMaxIngestBytes, rows: api.DefaultMaxIngestRows}
	if v := getenv("KELVARD_MAX_INGEST_BYTES"); v != "" {
		n, err := strconv.ParseInt(v, 10, 64)
		if err != nil || n <= 0 {
			return nil, usageError{fmt.Errorf("KELVARD_MAX_INGEST_BYTES %q: want a positive number of bytes", v)}
		}
		l.bytes = n
	}
	if v := getenv("KELVARD_MAX_INGEST_ROWS"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n <= 0 {
			return nil, usageError{fmt.Errorf("KELVARD_MAX_INGEST_ROWS %q: want a positive number of readings", v)}
		}
		l.rows = n
	}
	fs.Int64Var(&l.bytes, "max-ingest-bytes", l.bytes, "largest readings body accepted, in bytes; larger is answered 413 (KELVARD_MAX_INGEST_BYTES)")
	fs.IntVar(&l.rows, "max-ingest-rows", l.rows, "most readings accepted in one request; more is answered 413 (KELVARD_MAX_INGEST_ROWS)")
	return l, nil
}

const benchUsage = "usage: kelvard bench ingest --database-url postgres://… [-n 1000000] [--positions 500] [--batch 10000] [--senders 3] [--rounds 1]"

// cmdBench runs a benchmark; see package kelvard/jobs/bench.
func cmdBench(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	if len(args) == 0 || args[0] != "ingest" {
		return usageError{errors.New(benchUsage)}
	}
	fs, c := newFlags("bench ingest", getenv, stderr)
	var cfg bench.IngestConfig
	fs.IntVar(&cfg.Readings, "n", 1000000, "readings to send in each phase")
	fs.IntVar(&cfg.Positions, "positions", 500, "positions (each with a drive) the readings are spread over")
	fs.IntVar(&cfg.BatchRows, "batch", 10000, "readings per request or COPY")
	fs.IntVar(&cfg.Senders, "senders", 3, "concurrent senders")
	fs.IntVar(&cfg.Rounds, "rounds", 1, "split the run into rounds in which CSV, JSON and COPY take turns, forward then backward (1: one phase after the other)")
	if err := parse(fs, args[1:]); err != nil {
		return err
	}
	if cfg.Readings <= 0 || cfg.Positions <= 0 || cfg.BatchRows <= 0 || cfg.Senders <= 0 || cfg.Rounds <= 0 {
		return usageError{errors.New("-n, --positions, --batch, --senders and --rounds must be positive")}
	}
	cfg.DatabaseURL, cfg.Progress = c.databaseURL, stderr
	rep, err := bench.Ingest(ctx, cfg)
	if err != nil {
		return err
	}
	rep.Print(stdout)
	return nil
}
