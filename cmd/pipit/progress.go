package main

import (
	"fmt"
	"io"
	"os"
	"sync"
	"time"
)

// How often a task reports: on a terminal its status line is redrawn at
// most every liveEvery; elsewhere (a log file, a pipe, CI) it prints a
// plain line at most every plainEvery, so a long run leaves a readable
// log instead of thousands of redraws.
const (
	liveEvery  = 100 * time.Millisecond
	plainEvery = 10 * time.Second
)

// console is stderr as the commands see it. It knows whether it is a
// terminal and whether a status line is on screen without its newline;
// any other write (a warning, an error) first ends that line, so nothing
// is printed on the same line as a live status.
type console struct {
	mu   sync.Mutex
	w    io.Writer
	tty  bool
	live bool // a status line is showing and has no newline yet
}

// newConsole wraps w; a *console is returned as it is. w is a terminal
// when it is an *os.File on a character device.
func newConsole(w io.Writer) *console {
	if c, ok := w.(*console); ok {
		return c
	}
	c := &console{w: w}
	if f, ok := w.(*os.File); ok {
		if st, err := f.Stat(); err == nil && st.Mode()&os.ModeCharDevice != 0 {
			c.tty = true
		}
	}
	return c
}

// Write ends a live status line, then writes p.
func (c *console) Write(p []byte) (int, error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.endLive()
	return c.w.Write(p)
}

func (c *console) endLive() {
	if c.live {
		io.WriteString(c.w, "\n")
		c.live = false
	}
}

// status shows line as the live status (terminal) or prints it as a
// line of its own (elsewhere).
func (c *console) status(line string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.tty {
		fmt.Fprintf(c.w, "\r%s\x1b[K", line)
		c.live = true
		return
	}
	fmt.Fprintln(c.w, line)
}

// task reports the progress of one step of a command ("load train",
// "epoch 3/40") on a console.
type task struct {
	con   *console
	label string
	start time.Time
	last  time.Time // last report
}

// newTask starts a task on w (normally the command's stderr).
func newTask(w io.Writer, label string) *task {
	t := &task{con: newConsole(w), label: label, start: time.Now()}
	if !t.con.tty {
		t.last = t.start // the first plain line comes after plainEvery
	}
	return t
}

// step reports that done of total units are finished, with a note; the
// time to go is extrapolated from the time so far. Reports closer than
// liveEvery (terminal) or plainEvery (elsewhere) to the previous one are
// skipped.
func (t *task) step(done, total int, unit, note string) {
	now := time.Now()
	if t.con.tty {
		if done < total && now.Sub(t.last) < liveEvery {
			return
		}
	} else if now.Sub(t.last) < plainEvery {
		return
	}
	t.last = now
	line := fmt.Sprintf("%s: %d of %d %s (%d %%)", t.label, done, total, unit, 100*done/max(total, 1))
	if note != "" {
		line += ", " + note
	}
	if done > 0 && done < total {
		rest := time.Duration(float64(now.Sub(t.start)) * float64(total-done) / float64(done))
		line += ", " + span(rest) + " to go"
	}
	t.con.status(line)
}

// finish ends the task with a closing line: the label, the note and the
// time taken.
func (t *task) finish(note string) {
	t.con.mu.Lock()
	if t.con.tty && t.con.live {
		io.WriteString(t.con.w, "\r\x1b[K") // the closing line replaces the status
		t.con.live = false
	}
	t.con.mu.Unlock()
	fmt.Fprintf(t.con, "%s: %s (%s)\n", t.label, note, span(time.Since(t.start)))
}

// span writes a duration as "0.4 s", "12 s" or "3 min 05 s".
func span(d time.Duration) string {
	s := d.Seconds()
	switch {
	case s < 10:
		return fmt.Sprintf("%.1f s", s)
	case s < 60:
		return fmt.Sprintf("%.0f s", s)
	}
	m := int(s) / 60
	return fmt.Sprintf("%d min %02d s", m, int(s)-60*m)
}

// reporter shows a library call's progress (pipit.Reporter) on a
// console: each stage is a task.
type reporter struct {
	w io.Writer
	t *task
}

func newReporter(w io.Writer) *reporter { return &reporter{w: newConsole(w)} }

func (r *reporter) Stage(label string) { r.t = newTask(r.w, label) }

func (r *reporter) Step(done, total int, unit, note string) {
	if r.t != nil {
		r.t.step(done, total, unit, note)
	}
}

func (r *reporter) Done(note string) {
	if r.t != nil {
		r.t.finish(note)
		r.t = nil
	}
}

func (r *reporter) Note(line string) { fmt.Fprintln(r.w, line) }

func (r *reporter) Warn(err error) { fmt.Fprintf(r.w, "warning: %v\n", err) }
