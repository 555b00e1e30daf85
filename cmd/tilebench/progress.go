package main

import (
	"io"
	"os"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"
)

// progress is a progress bar drawn on stderr when stderr is a terminal,
// and nothing at all otherwise (piped, redirected, in CI).
type progress struct {
	bar *progressbar.ProgressBar
}

// newProgress starts a bar of total units described by what. It draws only
// when w is a terminal.
func newProgress(w io.Writer, total int, what string) *progress {
	f, ok := w.(*os.File)
	if !ok || !term.IsTerminal(int(f.Fd())) || total <= 0 {
		return &progress{}
	}
	bar := progressbar.NewOptions(total,
		progressbar.OptionSetWriter(f),
		progressbar.OptionSetDescription(what),
		progressbar.OptionShowCount(),
		progressbar.OptionSetPredictTime(true),
		progressbar.OptionClearOnFinish(),
		progressbar.OptionThrottle(100_000_000),
	)
	return &progress{bar: bar}
}

// Set moves the bar to n units done.
func (p *progress) Set(n int) {
	if p.bar != nil {
		p.bar.Set(n)
	}
}

// Describe changes the text beside the bar (best and mean score, ...).
func (p *progress) Describe(s string) {
	if p.bar != nil {
		p.bar.Describe(s)
	}
}

// Done finishes and clears the bar.
func (p *progress) Done() {
	if p.bar != nil {
		p.bar.Finish()
	}
}
