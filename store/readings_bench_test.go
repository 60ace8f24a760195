package store_test

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"testing"
	"time"

	gojson "github.com/goccy/go-json"

	"kelvard/store"
	"kelvard/store/storetest"
)

// benchRows is the batch size the benchmarks use: the default batch of
// `kelvard bench ingest`.
const benchRows = 10000

func reportRows(b *testing.B, rows int) {
	b.ReportMetric(float64(rows)*float64(b.N)/b.Elapsed().Seconds(), "rows/s")
}

func BenchmarkParseReadingsCSV(b *testing.B) {
	var body bytes.Buffer
	if err := store.WriteReadingsCSV(&body, sampleRows(benchRows), store.ReadingInputColumns()); err != nil {
		b.Fatal(err)
	}
	for _, c := range []struct {
		name  string
		parse func([]byte, store.ParseOptions) (store.ReadingBatch, error)
	}{{"hand_split", store.ParseReadingsCSV}, {"encoding_csv", store.ParseCSVQuoted}} {
		b.Run(c.name, func(b *testing.B) {
			b.SetBytes(int64(body.Len()))
			b.ReportAllocs()
			for b.Loop() {
				batch, err := c.parse(body.Bytes(), store.ParseOptions{})
				if err != nil || len(batch.Rows) != benchRows {
					b.Fatal(err)
				}
			}
			reportRows(b, benchRows)
		})
	}
}

// BenchmarkParseReadingsJSON compares the scanner kelvard uses with the two
// general decoders it was measured against, each reading the same body
// into rows with optional measurements.
func BenchmarkParseReadingsJSON(b *testing.B) {
	body := readingsJSON(sampleRows(benchRows))
	b.Run("scanner", func(b *testing.B) {
		b.SetBytes(int64(len(body)))
		b.ReportAllocs()
		for b.Loop() {
			batch, err := store.ParseReadingsJSON(body, store.ParseOptions{})
			if err != nil || len(batch.Rows) != benchRows {
				b.Fatal(err)
			}
		}
		reportRows(b, benchRows)
	})
	b.Run("encoding_json", func(b *testing.B) {
		b.SetBytes(int64(len(body)))
		b.ReportAllocs()
		for b.Loop() {
			var rows []jsonRow
			dec := json.NewDecoder(bytes.NewReader(body))
			dec.DisallowUnknownFields()
			if err := dec.Decode(&rows); err != nil || len(rows) != benchRows {
				b.Fatal(err)
			}
		}
		reportRows(b, benchRows)
	})
	b.Run("goccy_go_json", func(b *testing.B) {
		b.SetBytes(int64(len(body)))
		b.ReportAllocs()
		for b.Loop() {
			var rows []jsonRow
			dec := gojson.NewDecoder(bytes.NewReader(body))
			dec.DisallowUnknownFields()
			if err := dec.Decode(&rows); err != nil || len(rows) != benchRows {
				b.Fatal(err)
			}
		}
		reportRows(b, benchRows)
	})
}

// BenchmarkIngest measures the store's write path alone: a batch of
// benchRows readings over 50 positions, each iteration a new hour range.
func BenchmarkIngest(b *testing.B) {
	for _, d := range storetest.Dialects {
		b.Run(string(d), func(b *testing.B) {
			s := storetest.Open(b, d)
			ctx := context.Background()
			const positions = 50
			tags := make([]string, positions)
			for i := range tags {
				fx := storetest.Build(b, s, fmt.Sprintf("%03d", i))
				tags[i] = fx.Position.Tag
			}
			start := time.Date(2023, 1, 1, 0, 0, 0, 0, time.UTC)
			batch := make([]store.Reading, benchRows)
			template := sampleRows(benchRows)
			iter := 0
			b.ReportAllocs()
			for b.Loop() {
				for i := range batch {
					batch[i] = template[i]
					batch[i].Site, batch[i].Position = "", tags[i%positions]
					batch[i].At = start.Add(time.Duration(iter*benchRows/positions+i/positions) * time.Hour)
				}
				iter++
				res, err := s.Ingest(ctx, batch, store.IngestOptions{})
				if err != nil || res.Inserted != benchRows {
					b.Fatalf("%+v %v", res, err)
				}
			}
			reportRows(b, benchRows)
		})
	}
}
