package main

import (
	"io"
	"sync"

	"github.com/schollz/progressbar/v3"
)

// progress is a thread-safe progress display on stderr; it is silent when
// quiet or when stderr is not a terminal.
type progress struct {
	mu  sync.Mutex
	bar *progressbar.ProgressBar
}

func (g *Globals) newProgress(total int, what string) *progress {
	p := &progress{}
	if g.Quiet || !isTerminal(g.stderr) || total <= 0 {
		return p
	}
	p.bar = progressbar.NewOptions(total,
		progressbar.OptionSetWriter(g.stderr),
		progressbar.OptionSetDescription(what),
		progressbar.OptionShowCount(),
		progressbar.OptionSetPredictTime(true),
		progressbar.OptionClearOnFinish(),
		progressbar.OptionThrottle(100_000_000),
	)
	return p
}

// set records that done of total units are finished.
func (p *progress) set(done, total int) {
	if p == nil || p.bar == nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	if total > 0 && p.bar.GetMax() != total {
		p.bar.ChangeMax(total)
	}
	p.bar.Set(done)
}

// finish clears the bar.
func (p *progress) finish() {
	if p == nil || p.bar == nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	p.bar.Finish()
}

var _ io.Writer = (*progressbar.ProgressBar)(nil)
