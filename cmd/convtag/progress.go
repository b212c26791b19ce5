package main

import (
	"fmt"
	"os"
	"sync"
	"time"

	"github.com/mattn/go-isatty"
	"github.com/schollz/progressbar/v3"

	"convtag/stream"
)

// tagProgress is tag's progress bar on stderr: input bytes read (as they
// are on disk, compressed or not) out of the inputs' total size, the
// records written and records per second.
type tagProgress struct {
	mu    sync.Mutex
	bar   *progressbar.ProgressBar
	total int64 // -1 when a size is unknown (a pipe)
	start time.Time
	last  time.Time
}

// newProgress returns tag's progress bar, or nil when there should be
// none: --progress off, or auto with stderr not a terminal or the input
// size unknown. With on and an unknown size it counts without a total.
func newProgress(a *app, mode string, inputs []string) *tagProgress {
	if mode == "off" {
		return nil
	}
	total := inputSize(a, inputs)
	if mode == "auto" {
		f, ok := a.stderr.(*os.File)
		if total < 0 || !ok || !isatty.IsTerminal(f.Fd()) {
			return nil
		}
	}
	bar := progressbar.NewOptions64(total,
		progressbar.OptionSetWriter(a.stderr),
		progressbar.OptionShowBytes(true),
		progressbar.OptionSetPredictTime(true),
		progressbar.OptionSetWidth(24),
		progressbar.OptionThrottle(0), // tagProgress throttles; the last frame must not be dropped
		progressbar.OptionOnCompletion(func() { fmt.Fprintln(a.stderr) }),
	)
	return &tagProgress{bar: bar, total: total, start: time.Now()}
}

// inputSize is the summed size of the inputs, or -1 when one of them is
// not a regular file.
func inputSize(a *app, inputs []string) int64 {
	if len(inputs) == 0 {
		inputs = []string{"-"}
	}
	total := int64(0)
	for _, name := range inputs {
		var st os.FileInfo
		var err error
		if name == "-" {
			f, ok := a.stdin.(*os.File)
			if !ok {
				return -1
			}
			st, err = f.Stat()
		} else {
			st, err = os.Stat(name)
		}
		if err != nil || !st.Mode().IsRegular() {
			return -1
		}
		total += st.Size()
	}
	return total
}

// update is stream.Options.Progress: at most five redraws a second.
func (p *tagProgress) update(read, records int64) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if now := time.Now(); now.Sub(p.last) >= 200*time.Millisecond {
		p.last = now
		p.draw(read, records, now, false)
	}
}

// draw redraws the bar. Until the final frame it stays below the total:
// the bar library ends its line when the total is reached and would draw
// any later frame over the line that follows.
func (p *tagProgress) draw(read, records int64, now time.Time, final bool) {
	rate := float64(records) / max(now.Sub(p.start).Seconds(), 1e-3)
	if p.total >= 0 {
		read = min(read, p.total)
		if !final && p.total > 0 {
			read = min(read, p.total-1)
		}
	}
	p.bar.Describe(fmt.Sprintf("%s records · %s records/s", groupDigits(records), siCount(rate)))
	p.bar.Set64(read)
}

// end draws the last frame. A run that read all its input shows 100% and
// keeps the bar on its own line above what follows (the --stats summary);
// a run that stopped early leaves the bar where it stopped.
func (p *tagProgress) end(st stream.Stats, complete bool) {
	p.mu.Lock()
	defer p.mu.Unlock()
	read := int64(-1)
	if complete && p.total >= 0 {
		read = p.total
	}
	if read >= 0 {
		p.draw(read, st.Written, time.Now(), true) // at 100%: the bar ends its line
		p.bar.Finish()
		return
	}
	p.draw(max(read, 0), st.Written, time.Now(), false)
	p.bar.Exit() // ends the line (OptionOnCompletion)
}

// groupDigits writes n with a comma every three digits: 1,234,567.
func groupDigits(n int64) string {
	s := fmt.Sprint(n)
	if n < 0 {
		return s
	}
	for i := len(s) - 3; i > 0; i -= 3 {
		s = s[:i] + "," + s[i:]
	}
	return s
}
