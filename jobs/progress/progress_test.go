package progress

import (
	"bytes"
	"os"
	"strings"
	"sync"
	"testing"
)

func TestPlainLines(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name    string
		reports [][2]int
		want    string
	}{
		{"to the end", [][2]int{{0, 8}, {1, 8}, {2, 8}, {3, 8}, {4, 8}, {5, 8}, {6, 8}, {7, 8}, {8, 8}},
			"assess: 0/8 (0%)\nassess: 2/8 (25%)\nassess: 4/8 (50%)\nassess: 6/8 (75%)\nassess: 8/8 (100%)\n"},
		{"stopped part way", [][2]int{{0, 200}, {30, 200}, {120, 200}},
			"assess: 0/200 (0%)\nassess: 120/200 (60%)\nassess: ended at 120/200 (60%)\n"},
		{"total grows", [][2]int{{5, 10}, {5, 40}, {40, 40}},
			"assess: 5/10 (50%)\nassess: 40/40 (100%)\n"},
		{"total unknown", [][2]int{{0, 0}, {3, 0}, {9, 0}},
			"assess: started\nassess: ended after 9\n"},
		{"nothing reported", nil, "assess: ended after 0\n"},
	}
	for _, c := range cases {
		var b bytes.Buffer
		r := New(&b, "assess", Plain)
		for _, rep := range c.reports {
			r.Update(rep[0], rep[1])
		}
		r.Finish()
		r.Finish()
		r.Update(1, 1) // after Finish: ignored
		if b.String() != c.want {
			t.Errorf("%s: wrote\n%q\nwant\n%q", c.name, b.String(), c.want)
		}
	}
}

func TestTerminalBar(t *testing.T) {
	t.Parallel()
	var b bytes.Buffer
	r := New(&b, "assess", Terminal)
	r.Update(0, 0) // total unknown: nothing drawn yet
	if b.Len() != 0 {
		t.Fatalf("drew %q before the total was known", b.String())
	}
	var wg sync.WaitGroup
	for i := 1; i <= 10; i++ {
		wg.Add(1)
		go func() { defer wg.Done(); r.Update(i, 10) }()
	}
	wg.Wait()
	r.Update(10, 10)
	r.Finish()
	out := b.String()
	if !strings.Contains(out, "assess") || !strings.Contains(out, "(10/10") || !strings.Contains(out, "100%") || !strings.HasSuffix(out, "\n") {
		t.Errorf("terminal output %q", out)
	}
	if strings.Count(out, "\n") != 1 {
		t.Errorf("the bar should end with one newline: %q", out)
	}
}

func TestAutoOnAFileIsPlain(t *testing.T) {
	t.Parallel()
	f, err := os.CreateTemp(t.TempDir(), "out")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r := New(f, "plan", Auto)
	r.Update(1, 1)
	r.Finish()
	data, err := os.ReadFile(f.Name())
	if err != nil {
		t.Fatal(err)
	}
	if string(data) != "plan: 1/1 (100%)\n" {
		t.Errorf("file got %q", data)
	}
}
