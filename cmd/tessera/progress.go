package main

import (
	"fmt"
	"io"
	"strings"
	"sync"
	"time"
	"unicode/utf8"

	"tessera/restore"
)

// console owns stderr during a batch: message lines, and a one-line
// progress bar redrawn in place when stderr is a terminal. Lines always
// clear the bar first so the two never mix.
type console struct {
	mu    sync.Mutex
	w     io.Writer
	bar   bool
	width func() int // terminal columns; nil or <= 0 means 80

	total, done int
	running     map[int]*activity // by worker slot
	latest      int               // slot updated last
	shown       string
	dirty       bool
	stop        chan struct{}
	stopped     chan struct{}
	stopOnce    sync.Once
}

// activity is what one worker is doing now.
type activity struct {
	name  string
	stage string
}

func newConsole(w io.Writer, bar bool, width func() int) *console {
	return &console{w: w, bar: bar, width: width, running: map[int]*activity{}, latest: -1}
}

// start begins redrawing the bar at most ten times a second.
func (c *console) start(total int) {
	c.mu.Lock()
	c.total = total
	c.dirty = true
	c.mu.Unlock()
	if !c.bar {
		return
	}
	c.stop, c.stopped = make(chan struct{}), make(chan struct{})
	go func() {
		defer close(c.stopped)
		t := time.NewTicker(100 * time.Millisecond)
		defer t.Stop()
		for {
			select {
			case <-c.stop:
				return
			case <-t.C:
				c.mu.Lock()
				c.redraw()
				c.mu.Unlock()
			}
		}
	}()
}

// line prints one message line above the bar.
func (c *console) line(s string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.clear()
	fmt.Fprintln(c.w, s)
	c.dirty = true
}

// finish stops the bar, erases it and prints the last line (if any).
func (c *console) finish(s string) {
	c.stopOnce.Do(func() {
		if c.stop != nil {
			close(c.stop)
			<-c.stopped
		}
	})
	c.mu.Lock()
	defer c.mu.Unlock()
	c.clear()
	c.bar = false
	if s != "" {
		fmt.Fprintln(c.w, s)
	}
}

// begin marks slot as working on name.
func (c *console) begin(slot int, name string) {
	c.mu.Lock()
	c.running[slot] = &activity{name: name, stage: "reading"}
	c.latest = slot
	c.dirty = true
	c.mu.Unlock()
}

// set records the stage text of slot.
func (c *console) set(slot int, stage string) {
	c.mu.Lock()
	if a := c.running[slot]; a != nil && a.stage != stage {
		a.stage = stage
		c.latest = slot
		c.dirty = true
	}
	c.mu.Unlock()
}

// end marks slot idle and counts one more image handled.
func (c *console) end(slot int) {
	c.mu.Lock()
	delete(c.running, slot)
	c.done++
	c.dirty = true
	c.mu.Unlock()
}

// stageText describes a restoration stage. Training rounds are reported
// when they end, so round k done means round k+1 is under way.
func stageText(s restore.Stage) string {
	switch s.Name {
	case "train":
		if s.Round >= s.Rounds {
			return "coding 0%"
		}
		return fmt.Sprintf("training round %d of %d", s.Round+1, s.Rounds)
	case "code":
		if s.Total <= 0 {
			return "coding"
		}
		return fmt.Sprintf("coding %d%%", 100*s.Done/s.Total)
	}
	return s.Name
}

// render is the bar's text for the current state, cut to width columns.
func (c *console) render(width int) string {
	s := fmt.Sprintf("tessera: %d/%d images", c.done, c.total)
	if a := c.running[c.latest]; a != nil {
		s += " | " + a.name + ": " + a.stage
	}
	if n := len(c.running); n > 1 {
		s += fmt.Sprintf(" (+%d more running)", n-1)
	}
	if width <= 1 {
		width = 80
	}
	return truncate(s, width-1)
}

func truncate(s string, n int) string {
	if utf8.RuneCountInString(s) <= n {
		return s
	}
	r := []rune(s)
	if n < 2 {
		return string(r[:max(n, 0)])
	}
	return string(r[:n-1]) + "…"
}

// redraw repaints the bar if anything changed; c.mu is held.
func (c *console) redraw() {
	if !c.bar || !c.dirty {
		return
	}
	w := 0
	if c.width != nil {
		w = c.width()
	}
	s := c.render(w)
	c.dirty = false
	if s == c.shown {
		return
	}
	fmt.Fprint(c.w, "\r\x1b[K"+s)
	c.shown = s
}

// clear erases the bar; c.mu is held.
func (c *console) clear() {
	if c.bar && c.shown != "" {
		fmt.Fprint(c.w, "\r\x1b[K")
		c.shown = ""
	}
}

// summary is the closing line, e.g. "tessera: 12 done, 3 skipped, 1 failed in 42.1 s".
func summary(done, skipped, failed, ignored int, elapsed time.Duration, sh shard, listed int) string {
	var b strings.Builder
	fmt.Fprintf(&b, "tessera: %d done, %d skipped, %d failed in %.1f s", done, skipped, failed, elapsed.Seconds())
	var notes []string
	if listed == 0 {
		notes = append(notes, "no images found")
	}
	if sh.N > 0 {
		notes = append(notes, fmt.Sprintf("share %s of %d listed images", sh, listed))
	}
	if ignored > 0 {
		noun := "files"
		if ignored == 1 {
			noun = "file"
		}
		notes = append(notes, fmt.Sprintf("%d hidden or non-image %s ignored", ignored, noun))
	}
	if len(notes) > 0 {
		b.WriteString(" (" + strings.Join(notes, "; ") + ")")
	}
	return b.String()
}
