package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"kelvard/store"
	"kelvard/store/storetest"
)

// TestImportCommand imports register files the way an operator would: from
// a file, from standard input, with a bad row, and with --partial after the
// arguments.
func TestImportCommand(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			url := storetest.URL(t, d)
			env := func(k string) string {
				return map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_LOG_LEVEL": "warn"}[k]
			}
			dir := t.TempDir()
			sites := filepath.Join(dir, "sites.csv")
			if err := os.WriteFile(sites, []byte("name,ambient_min_c,ambient_max_c\nHill Works,-2,38\nRiver Intake,4,41\n"), 0o644); err != nil {
				t.Fatal(err)
			}
			imp := func(stdin string, args ...string) (int, string, string) {
				t.Helper()
				var out, errOut bytes.Buffer
				err := cmdImport(context.Background(), args, env, strings.NewReader(stdin), &out, &errOut)
				code := 0
				if err != nil {
					code = 1
					errOut.WriteString(err.Error())
				}
				return code, out.String(), errOut.String()
			}
			code, out, errOut := imp("", "sites", sites)
			if code != 0 || !strings.Contains(out, "sites: 2 rows: 2 created, 0 updated, 0 unchanged, 0 rejected") {
				t.Fatalf("import sites: %d\n%s\n%s", code, out, errOut)
			}
			if !strings.Contains(errOut, "import sites: 2 of 2 rows written (100%)") {
				t.Errorf("no progress lines on a non-terminal:\n%s", errOut)
			}
			areas := "site,name,environment.water\nHill Works,Dosing room,dripping\nHill Works,Pump hall,firehose\n"
			code, out, errOut = imp(areas, "areas", "-")
			if code == 0 || !strings.Contains(out, "areas: nothing written: 1 of 2 rows rejected") ||
				!strings.Contains(out, "line 3: environment.water: must be one of") || !strings.Contains(errOut, "nothing was written") {
				t.Errorf("bad row from stdin: %d\n%s\n%s", code, out, errOut)
			}
			code, out, errOut = imp(areas, "areas", "-", "--partial")
			if code != 0 || !strings.Contains(out, "areas: 2 rows: 1 created, 0 updated, 0 unchanged, 1 rejected") ||
				!strings.Contains(out, "line 3: environment.water") {
				t.Errorf("partial import: %d\n%s\n%s", code, out, errOut)
			}
			code, out, _ = imp("", "sites", sites)
			if code != 0 || !strings.Contains(out, "2 unchanged") {
				t.Errorf("re-import: %d\n%s", code, out)
			}
			st, err := store.Open(context.Background(), url, store.Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer st.Close()
			page, err := store.List[store.Area](context.Background(), st, store.ListQuery{})
			if err != nil || len(page.Items) != 1 || page.Items[0].Name != "Dosing room" {
				t.Errorf("areas after the imports: %+v, %v", page.Items, err)
			}
			for _, bad := range [][]string{{}, {"sites"}, {"pumps", sites}, {"sites", sites, "extra"}, {"sites", sites, "--frobnicate"}} {
				var o, e bytes.Buffer
				if code := run(context.Background(), append([]string{"import"}, bad...), env, &o, &e); code != 2 {
					t.Errorf("kelvard import %v: exit %d, want 2 (usage): %s", bad, code, e.String())
				}
			}
			var o, e bytes.Buffer
			if code := run(context.Background(), []string{"import", "readings", sites}, env, &o, &e); code != 1 || !strings.Contains(e.String(), "not available yet") {
				t.Errorf("import readings: exit %d: %s", code, e.String())
			}
			if code := run(context.Background(), []string{"import", "sites", filepath.Join(dir, "missing.csv")}, env, &o, &e); code != 1 {
				t.Errorf("import of a missing file: exit %d", code)
			}
		})
	}
}

func TestByteLimit(t *testing.T) {
	t.Parallel()
	for in, want := range map[string]int64{"": 0, "1048576": 1 << 20} {
		if got, err := byteLimit("--x", in); err != nil || got != want {
			t.Errorf("byteLimit(%q) = %d, %v", in, got, err)
		}
	}
	for _, in := range []string{"0", "-5", "32MiB"} {
		if _, err := byteLimit("--x", in); err == nil {
			t.Errorf("byteLimit(%q) accepted", in)
		}
	}
}
