package csvio

import (
	"bytes"
	"context"
	"flag"
	"os"
	"path/filepath"
	"testing"

	"kelvard/store"
	"kelvard/store/storetest"
)

var update = flag.Bool("update", false, "rewrite the golden exports under testdata/golden")

// TestRoundTrip imports the fixture register, checks every kind's export
// against its golden file, imports the exports into an empty store and
// checks that exporting that store gives the same bytes.
func TestRoundTrip(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			ctx := context.Background()
			a := storetest.Open(t, d)
			importAll(t, a)
			files := map[Kind][]byte{}
			for _, k := range Kinds() {
				files[k] = export(t, ctx, a, k)
				golden := filepath.Join("testdata", "golden", string(k)+".csv")
				if *update && d == store.SQLite {
					if err := os.WriteFile(golden, files[k], 0o644); err != nil {
						t.Fatal(err)
					}
				}
				want, err := os.ReadFile(golden)
				if err != nil {
					t.Fatalf("%v (run with -update to write it)", err)
				}
				if !bytes.Equal(files[k], want) {
					t.Errorf("export of %s differs from %s:\n%s", k, golden, files[k])
				}
			}
			b := storetest.Open(t, d)
			for _, k := range Kinds() {
				res := mustImport(t, b, k, string(files[k]))
				if res.Rejected != 0 {
					t.Fatalf("import of exported %s: %+v", k, res)
				}
			}
			for _, k := range Kinds() {
				if got := export(t, ctx, b, k); !bytes.Equal(got, files[k]) {
					t.Errorf("%s: export → import → export differs:\nfirst:\n%s\nsecond:\n%s", k, files[k], got)
				}
			}
			// Exporting twice from the same store is stable too.
			for _, k := range Kinds() {
				if got := export(t, ctx, a, k); !bytes.Equal(got, files[k]) {
					t.Errorf("%s: a second export differs", k)
				}
			}
		})
	}
}

func TestExportUnknownKinds(t *testing.T) {
	t.Parallel()
	s := storetest.Open(t, store.SQLite)
	var b bytes.Buffer
	if err := Export(context.Background(), s, Kind("pumps"), &b); err == nil || b.Len() != 0 {
		t.Errorf("export of an unknown kind: %v, wrote %q", err, b.String())
	}
	if err := Export(context.Background(), s, KindReadings, &b); err == nil || b.Len() != 0 {
		t.Errorf("export of readings: %v, wrote %q", err, b.String())
	}
}
