package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strconv"

	"kelvard/store"
	"kelvard/store/csvio"
)

const importUsage = "usage: kelvard import KIND FILE [--partial]   (FILE - reads standard input; KIND is one of sites, areas, models, positions, drives, installations, components, events, readings)"

// cmdImport imports a register CSV file: kelvard import KIND FILE
// [--partial]. Flags may come before or after the two arguments.
func cmdImport(ctx context.Context, args []string, getenv func(string) string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs, c := newFlags("import", getenv, stderr)
	partial := fs.Bool("partial", false, "write the good rows and list the bad ones (default: one bad row writes nothing)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, importUsage)
		fs.PrintDefaults()
	}
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return err
			}
			return usageError{err}
		}
		if fs.NArg() == 0 {
			break
		}
		pos, args = append(pos, fs.Arg(0)), fs.Args()[1:]
	}
	if len(pos) != 2 {
		return usageError{errors.New(importUsage)}
	}
	kind, err := csvio.ParseKind(pos[0])
	if err != nil {
		return usageError{err}
	}
	in, size := stdin, int64(0)
	if pos[1] != "-" {
		f, err := os.Open(pos[1])
		if err != nil {
			return err
		}
		defer f.Close()
		if fi, err := f.Stat(); err == nil {
			size = fi.Size()
		}
		in = f
	}
	log, err := c.logger(stderr)
	if err != nil {
		return err
	}
	st, err := c.open(ctx, log)
	if err != nil {
		return err
	}
	defer st.Close()
	progress := csvio.NewProgressPrinter(stderr, "import "+string(kind))
	res, err := csvio.Import(ctx, st, kind, in, csvio.Options{Partial: *partial, Size: size, Progress: progress.Report})
	progress.Finish()
	csvio.WriteSummary(stdout, res, err)
	var ve *store.ValidationError
	if errors.As(err, &ve) {
		return fmt.Errorf("import %s: nothing was written; fix the rows above or use --partial", kind)
	}
	return err
}

// byteLimit reads a size in bytes given by a flag or its environment
// variable; empty means the default (0).
func byteLimit(name, s string) (int64, error) {
	if s == "" {
		return 0, nil
	}
	n, err := strconv.ParseInt(s, 10, 64)
	if err != nil || n <= 0 {
		return 0, usageError{fmt.Errorf("%s %q: want a positive number of bytes", name, s)}
	}
	return n, nil
}
