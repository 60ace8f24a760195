package demo

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"flag"
	"io"
	"os"
	"path/filepath"
	"testing"
)

// updateDemo rewrites the checked-in demo files from the generator. The name
// is the package's own so it cannot clash with other packages' -update
// flags.
var updateDemo = flag.Bool("updateDemo", false, "rewrite testdata/demo from the demo generator")

// goldenDir is testdata/demo at the repository root.
const goldenDir = "../../testdata/demo"

const goldenExpected = "expected_findings.golden"

// TestGoldenFiles regenerates the demo files for seed 1 and 2026-11-30 and
// compares them byte for byte with testdata/demo. readings.csv is kept
// gzip-compressed (about 80 MB as text, 12 MB compressed); it is compared
// after decompression, so a change in the compressor's output between Go
// versions does not fail the test while any change in the data does.
func TestGoldenFiles(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	ex := expected(t)
	golden := ex.Golden(demoSeed, demoNow)
	if *updateDemo {
		if err := s.WriteDir(goldenDir, WriteOptions{GzipReadings: true}); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(goldenDir, goldenExpected), []byte(golden), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	for _, name := range Files() {
		if name == FileReadings {
			continue
		}
		var got bytes.Buffer
		if err := s.WriteCSV(name, &got); err != nil {
			t.Fatal(err)
		}
		want, err := os.ReadFile(filepath.Join(goldenDir, name))
		if err != nil {
			t.Fatalf("%v (run go test ./store/demo -run TestGoldenFiles -updateDemo)", err)
		}
		compareStreams(t, name, bytes.NewReader(want), &got)
	}

	f, err := os.Open(filepath.Join(goldenDir, FileReadings+".gz"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	pr, pw := io.Pipe()
	go func() { pw.CloseWithError(s.WriteCSV(FileReadings, pw)) }()
	compareStreams(t, FileReadings, zr, pr)
	pr.Close()

	want, err := os.ReadFile(filepath.Join(goldenDir, goldenExpected))
	if err != nil {
		t.Fatal(err)
	}
	compareStreams(t, goldenExpected, bytes.NewReader(want), bytes.NewReader([]byte(golden)))
}

// compareStreams reports the first line where got differs from want.
func compareStreams(t *testing.T, name string, want, got io.Reader) {
	t.Helper()
	ws, gs := bufio.NewScanner(want), bufio.NewScanner(got)
	ws.Buffer(make([]byte, 1<<16), 1<<20)
	gs.Buffer(make([]byte, 1<<16), 1<<20)
	for line := 1; ; line++ {
		wok, gok := ws.Scan(), gs.Scan()
		if !wok || !gok {
			if wok != gok {
				t.Errorf("%s: lengths differ at line %d (golden has more: %v); rerun with -updateDemo if the change is meant", name, line, wok)
			}
			break
		}
		if ws.Text() != gs.Text() {
			t.Errorf("%s line %d differs:\n golden: %s\n    got: %s\nrerun with -updateDemo if the change is meant", name, line, ws.Text(), gs.Text())
			break
		}
	}
	if err := ws.Err(); err != nil {
		t.Errorf("%s: reading golden: %v", name, err)
	}
	if err := gs.Err(); err != nil {
		t.Errorf("%s: reading generated: %v", name, err)
	}
}
