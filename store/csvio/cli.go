package csvio

import (
	"errors"
	"fmt"
	"io"
	"os"
	"time"

	"github.com/mattn/go-isatty"
	"github.com/schollz/progressbar/v3"

	"kelvard/store"
)

// ProgressPrinter shows an import's progress for the command line: a
// progress bar when the writer is a terminal, otherwise a plain line at
// each tenth of the way (and when a stage ends), which suits logs.
type ProgressPrinter struct {
	w        io.Writer
	label    string
	terminal bool
	bar      *progressbar.ProgressBar
	stage    Stage
	last     Progress
	tenth    int64
}

// NewProgressPrinter makes a printer that writes to w, each line or bar
// starting with label.
func NewProgressPrinter(w io.Writer, label string) *ProgressPrinter {
	f, ok := w.(*os.File)
	return &ProgressPrinter{w: w, label: label, terminal: ok && isatty.IsTerminal(f.Fd())}
}

// Report takes one progress report; use it as Options.Progress.
func (p *ProgressPrinter) Report(pr Progress) {
	if pr.Stage != p.stage {
		p.endStage()
		p.stage, p.tenth = pr.Stage, 0
		if p.terminal {
			p.bar = p.newBar(pr)
		}
	}
	p.last = pr
	if p.bar != nil {
		_ = p.bar.Set64(pr.Done)
		return
	}
	if pr.Total > 0 {
		if t := pr.Done * 10 / pr.Total; t > p.tenth {
			p.tenth = t
			p.line()
		}
	}
}

// Finish ends the last stage.
func (p *ProgressPrinter) Finish() { p.endStage() }

func (p *ProgressPrinter) newBar(pr Progress) *progressbar.ProgressBar {
	total := pr.Total
	if total <= 0 {
		total = -1
	}
	opts := []progressbar.Option{progressbar.OptionSetWriter(p.w), progressbar.OptionSetWidth(30),
		progressbar.OptionThrottle(100 * time.Millisecond), progressbar.OptionShowCount(), progressbar.OptionSetPredictTime(true)}
	if pr.Stage == StageRead {
		opts = append(opts, progressbar.OptionShowBytes(true), progressbar.OptionSetDescription(p.label+": reading"))
	} else {
		opts = append(opts, progressbar.OptionSetItsString("rows"), progressbar.OptionSetDescription(p.label+": writing"))
	}
	return progressbar.NewOptions64(total, opts...)
}

// endStage closes the bar, or prints the stage's last line when the plain
// lines have not reached it.
func (p *ProgressPrinter) endStage() {
	if p.stage == "" {
		return
	}
	if p.bar != nil {
		_ = p.bar.Finish()
		fmt.Fprintln(p.w)
		p.bar = nil
		return
	}
	if p.last.Total <= 0 || p.tenth < 10 {
		p.line()
	}
}

func (p *ProgressPrinter) line() {
	pr := p.last
	unit := "rows written"
	if pr.Stage == StageRead {
		unit = "bytes read"
	}
	if pr.Total > 0 {
		fmt.Fprintf(p.w, "%s: %d of %d %s (%d%%)\n", p.label, pr.Done, pr.Total, unit, pr.Done*100/pr.Total)
		return
	}
	fmt.Fprintf(p.w, "%s: %d %s\n", p.label, pr.Done, unit)
}

// WriteSummary writes what an import did: a line of counts, then every
// problem of every rejected row with its line and column. err is Import's
// error; when it lists bad rows, the summary says that nothing was written.
func WriteSummary(w io.Writer, res Result, err error) {
	var ve *store.ValidationError
	fields := res.Errors
	switch {
	case errors.As(err, &ve) && res.Rejected > 0:
		fields = ve.Fields
		fmt.Fprintf(w, "%s: nothing written: %d of %d rows rejected\n", res.Kind, res.Rejected, res.Rows)
	case errors.As(err, &ve):
		fields = ve.Fields
		fmt.Fprintf(w, "%s: nothing written: the file cannot be read\n", res.Kind)
	case err != nil:
		return
	default:
		fmt.Fprintf(w, "%s: %d rows: %d created, %d updated, %d unchanged, %d rejected\n",
			res.Kind, res.Rows, res.Created, res.Updated, res.Unchanged, res.Rejected)
	}
	for _, f := range fields {
		fmt.Fprintf(w, "  %s\n", f)
	}
}
