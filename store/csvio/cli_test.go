package csvio

import (
	"bytes"
	"context"
	"errors"
	"strings"
	"testing"

	"kelvard/store"
	"kelvard/store/storetest"
)

func TestProgressPrinterLines(t *testing.T) {
	t.Parallel()
	var b bytes.Buffer
	p := NewProgressPrinter(&b, "import sites")
	for _, pr := range []Progress{{StageRead, 40, 100}, {StageRead, 100, 100}, {StageWrite, 1, 3}, {StageWrite, 2, 3}, {StageWrite, 3, 3}} {
		p.Report(pr)
	}
	p.Finish()
	want := "import sites: 40 of 100 bytes read (40%)\nimport sites: 100 of 100 bytes read (100%)\n" +
		"import sites: 1 of 3 rows written (33%)\nimport sites: 2 of 3 rows written (66%)\nimport sites: 3 of 3 rows written (100%)\n"
	if b.String() != want {
		t.Errorf("plain progress:\n%s\nwant:\n%s", b.String(), want)
	}
	// Reading standard input: no total, one line when the stage ends.
	b.Reset()
	p = NewProgressPrinter(&b, "import sites")
	p.Report(Progress{StageRead, 10, 0})
	p.Report(Progress{StageRead, 25, 0})
	p.Finish()
	if b.String() != "import sites: 25 bytes read\n" {
		t.Errorf("progress without a total: %q", b.String())
	}
}

func TestProgressPrinterBar(t *testing.T) {
	t.Parallel()
	var b bytes.Buffer
	p := NewProgressPrinter(&b, "import sites")
	p.terminal = true
	p.Report(Progress{StageRead, 100, 100})
	p.Report(Progress{StageWrite, 3, 3})
	p.Finish()
	if out := b.String(); !strings.Contains(out, "import sites: reading") || !strings.Contains(out, "import sites: writing") || !strings.Contains(out, "100%") {
		t.Errorf("progress bar output %q", out)
	}
}

func TestWriteSummary(t *testing.T) {
	t.Parallel()
	s := storetest.Open(t, store.SQLite)
	text := "name,elevation_m\nA,1\nB,high\nC,2\n"
	res, err := Import(context.Background(), s, KindSites, strings.NewReader(text), Options{})
	var b bytes.Buffer
	WriteSummary(&b, res, err)
	want := "sites: nothing written: 1 of 3 rows rejected\n  line 3: elevation_m: must be a number such as 12.5, not \"high\"\n"
	if b.String() != want {
		t.Errorf("summary of a failed import:\n%s\nwant:\n%s", b.String(), want)
	}
	res, err = Import(context.Background(), s, KindSites, strings.NewReader(text), Options{Partial: true})
	b.Reset()
	WriteSummary(&b, res, err)
	want = "sites: 3 rows: 2 created, 0 updated, 0 unchanged, 1 rejected\n  line 3: elevation_m: must be a number such as 12.5, not \"high\"\n"
	if b.String() != want {
		t.Errorf("summary of a partial import:\n%s\nwant:\n%s", b.String(), want)
	}
	res, err = Import(context.Background(), s, KindSites, strings.NewReader("name,colour\n"), Options{Partial: true})
	b.Reset()
	WriteSummary(&b, res, err)
	if !strings.HasPrefix(b.String(), "sites: nothing written: the file cannot be read\n  line 1: colour: is not a column of sites\n") {
		t.Errorf("summary of an unreadable file:\n%s", b.String())
	}
	b.Reset()
	WriteSummary(&b, Result{Kind: KindSites}, errors.New("database gone"))
	if b.Len() != 0 {
		t.Errorf("summary of a failed run: %q", b.String())
	}
}
