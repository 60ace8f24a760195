// Package progress shows how far a long command (kelvard assess, say) has
// got: a bar on a terminal, a few plain lines when the output goes to a
// file or a pipe. A Reporter's Update method is the progress func a
// jobs.Job takes.
package progress

import (
	"fmt"
	"io"
	"os"
	"sync"
	"time"

	"github.com/mattn/go-isatty"
	"github.com/schollz/progressbar/v3"
)

// Mode picks how a Reporter renders.
type Mode int

// Modes.
const (
	// Auto draws a bar when the writer is a terminal, else plain lines.
	Auto Mode = iota
	// Terminal always draws a bar.
	Terminal
	// Plain always prints plain lines: the start, each quarter, the end.
	Plain
)

// Reporter renders progress reports. It is safe for concurrent use.
type Reporter struct {
	mu    sync.Mutex
	w     io.Writer
	label string
	term  bool
	bar   *progressbar.ProgressBar
	// done and total are the last report.
	done, total int
	// quarter is the last quarter printed in plain mode (-1: none yet).
	quarter  int
	finished bool
}

// New makes a Reporter writing to w, each line or the bar headed by label.
func New(w io.Writer, label string, mode Mode) *Reporter {
	term := mode == Terminal
	if mode == Auto {
		if f, ok := w.(*os.File); ok {
			term = isatty.IsTerminal(f.Fd()) || isatty.IsCygwinTerminal(f.Fd())
		}
	}
	return &Reporter{w: w, label: label, term: term, quarter: -1}
}

// Update reports done units out of total; total may grow between reports
// and is 0 while unknown. Its signature is the progress func of jobs.Job.
func (r *Reporter) Update(done, total int) {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.finished {
		return
	}
	r.done, r.total = done, total
	if r.term {
		r.drawBar()
		return
	}
	if total <= 0 {
		if r.quarter < 0 {
			fmt.Fprintf(r.w, "%s: started\n", r.label)
			r.quarter = 0
		}
		return
	}
	q := min(4, 4*done/total)
	if q > r.quarter {
		fmt.Fprintf(r.w, "%s: %d/%d (%d%%)\n", r.label, done, total, percent(done, total))
		r.quarter = q
	}
}

// drawBar renders the bar, making it on the first report with a known
// total. Called with mu held.
func (r *Reporter) drawBar() {
	if r.total <= 0 {
		return
	}
	if r.bar == nil {
		r.bar = progressbar.NewOptions(r.total,
			progressbar.OptionSetWriter(r.w),
			progressbar.OptionSetDescription(r.label),
			progressbar.OptionShowCount(),
			progressbar.OptionSetWidth(30),
			progressbar.OptionSetPredictTime(true),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionOnCompletion(func() { fmt.Fprintln(r.w) }),
		)
	}
	if r.bar.GetMax() != r.total {
		r.bar.ChangeMax(r.total)
	}
	_ = r.bar.Set(r.done) // writing to the terminal is best effort
}

// Finish ends the report: the bar is closed where it stands (not filled
// to the end, so a run that failed part way shows where), and in plain
// mode a last line is printed unless the end was already reported.
func (r *Reporter) Finish() {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.finished {
		return
	}
	r.finished = true
	if r.term {
		if r.bar != nil && !r.bar.IsFinished() {
			_ = r.bar.Exit()
		}
		return
	}
	switch {
	case r.total <= 0:
		fmt.Fprintf(r.w, "%s: ended after %d\n", r.label, r.done)
	case r.quarter < 4:
		fmt.Fprintf(r.w, "%s: ended at %d/%d (%d%%)\n", r.label, r.done, r.total, percent(r.done, r.total))
	}
}

func percent(done, total int) int {
	if total <= 0 {
		return 0
	}
	return 100 * done / total
}
