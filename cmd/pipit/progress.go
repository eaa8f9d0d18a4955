package main

import (
	"fmt"
	"io"
	"strings"
	"time"
)

// bar draws a one-line progress bar on w (normally stderr), redrawn at
// most every 100 ms and finished with a newline by done.
type bar struct {
	w     io.Writer
	label string
	start time.Time
	last  time.Time
}

func newBar(w io.Writer, label string) *bar {
	return &bar{w: w, label: label, start: time.Now()}
}

// update draws done/total with extra text; the ETA is extrapolated from
// the elapsed time.
func (b *bar) update(done, total int, extra string) {
	now := time.Now()
	if done < total && now.Sub(b.last) < 100*time.Millisecond {
		return
	}
	b.last = now
	const width = 24
	fill := width * done / max(total, 1)
	eta := "--"
	if done > 0 {
		rest := time.Duration(float64(now.Sub(b.start)) * float64(total-done) / float64(done))
		eta = rest.Round(100 * time.Millisecond).String()
	}
	fmt.Fprintf(b.w, "\r%s [%s%s] %d/%d %s ETA %s\x1b[K", b.label, strings.Repeat("=", fill), strings.Repeat(" ", width-fill), done, total, extra, eta)
}

func (b *bar) done(extra string) {
	fmt.Fprintf(b.w, "\r%s %s (%.1f s)\x1b[K\n", b.label, extra, time.Since(b.start).Seconds())
}
