package demo

import (
	"io"
	"testing"
)

// BenchmarkGenerate measures building the register and history.
func BenchmarkGenerate(b *testing.B) {
	for b.Loop() {
		Generate(demoSeed, demoNow)
	}
}

// BenchmarkGenerateAndWrite measures the whole demo: generating it and
// writing every file, a year of hourly readings included, as plain CSV.
func BenchmarkGenerateAndWrite(b *testing.B) {
	for b.Loop() {
		s := Generate(demoSeed, demoNow)
		for _, name := range Files() {
			if err := s.WriteCSV(name, io.Discard); err != nil {
				b.Fatal(err)
			}
		}
	}
}
