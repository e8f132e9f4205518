package kernel

import (
	"fmt"
	"html/template"
	"io"
	"os"
	"strings"
	"sync"
	"time"

	"github.com/counterpartlab/counterpart/widgets"
	"github.com/janpfeifer/gonb/gonbui"
)

// progressEvery is the least time between two redraws of a progress bar;
// the last step (done == total) is always drawn.
const progressEvery = 150 * time.Millisecond

// progressOut is where the terminal bar goes (a variable for tests), and
// progressIsTerminal says whether it is a terminal.
var (
	progressOut        io.Writer = os.Stderr
	progressIsTerminal           = func() bool {
		fi, err := os.Stderr.Stat()
		return err == nil && fi.Mode()&os.ModeCharDevice != 0
	}
	now = time.Now
)

// Progress starts a progress report for a long computation (a bootstrap, a
// simulation). Call update(done, total) as work advances (it is safe from
// several goroutines and cheap to call often) and finish() once at the end.
// A total of zero or less means the total is unknown.
//
// In a notebook it draws a live bar with the count and the estimated time
// left, updated in place and removed by finish. Outside a notebook it redraws
// one line on standard error when that is a terminal, and prints nothing
// otherwise.
//
//	update, finish := kernel.Progress("bootstrap")
//	defer finish()
//	for i := range n { ...; update(i+1, n) }
func Progress(title string) (update func(done, total int), finish func()) {
	p := &progress{title: title, start: now(), notebook: IsNotebook()}
	if p.notebook {
		p.displayID = "cp-progress-" + gonbui.UniqueId()
	} else {
		p.terminal = progressIsTerminal()
	}
	return p.update, p.finish
}

type progress struct {
	mu          sync.Mutex
	title       string
	start       time.Time
	lastDraw    time.Time
	drawn       bool
	finished    bool
	notebook    bool
	terminal    bool
	displayID   string
	done, total int
	lastWidth   int
}

func (p *progress) update(done, total int) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.finished {
		return
	}
	if done < 0 {
		done = 0
	}
	p.done, p.total = done, total
	t := now()
	last := total > 0 && done >= total
	if p.drawn && !last && t.Sub(p.lastDraw) < progressEvery {
		return
	}
	p.lastDraw, p.drawn = t, true
	p.draw(t)
}

func (p *progress) finish() {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.finished {
		return
	}
	p.finished = true
	switch {
	case p.notebook:
		if p.drawn {
			gonbui.UpdateHTML(p.displayID, "")
			syncWithKernel()
		}
	case p.terminal && p.drawn:
		line := fmt.Sprintf("%s: %s in %s", p.title, countText(p.done, p.total), roundDuration(now().Sub(p.start)))
		fmt.Fprintf(progressOut, "\r%-*s\n", p.lastWidth, line)
	}
}

func (p *progress) draw(t time.Time) {
	elapsed := t.Sub(p.start)
	eta := ""
	if p.total > 0 && p.done > 0 && p.done < p.total {
		left := time.Duration(float64(elapsed) / float64(p.done) * float64(p.total-p.done))
		eta = "about " + roundDuration(left) + " left"
	}
	switch {
	case p.notebook:
		gonbui.UpdateHTML(p.displayID, progressHTML(p.title, p.done, p.total, eta))
	case p.terminal:
		line := p.title + " " + textBar(p.done, p.total, 24) + " " + countText(p.done, p.total)
		if eta != "" {
			line += "  " + eta
		}
		fmt.Fprintf(progressOut, "\r%-*s", p.lastWidth, line)
		if len(line) > p.lastWidth {
			p.lastWidth = len(line)
		}
	}
}

func countText(done, total int) string {
	if total > 0 {
		return fmt.Sprintf("%d/%d", done, total)
	}
	return fmt.Sprintf("%d", done)
}

func fraction(done, total int) float64 {
	if total <= 0 {
		return 0
	}
	f := float64(done) / float64(total)
	if f > 1 {
		f = 1
	}
	return f
}

func textBar(done, total, width int) string {
	if total <= 0 {
		return "[" + strings.Repeat("·", width) + "]"
	}
	n := int(fraction(done, total)*float64(width) + 0.5)
	return "[" + strings.Repeat("#", n) + strings.Repeat(" ", width-n) + "]"
}

func progressHTML(title string, done, total int, eta string) string {
	pct := fraction(done, total) * 100
	var b strings.Builder
	fmt.Fprintf(&b, `<div class="cp-progress" role="progressbar" style="font-family:system-ui,sans-serif;font-size:0.85em;color:%s;margin:0.3em 0;"`, widgets.ColorInk)
	if total > 0 {
		fmt.Fprintf(&b, ` aria-valuemin="0" aria-valuemax="%d" aria-valuenow="%d"`, total, done)
	}
	b.WriteString(`><span class="cp-progress-title">`)
	b.WriteString(template.HTMLEscapeString(title))
	// Inline styles: an updated display carries no stylesheet of its own.
	fmt.Fprintf(&b, `</span><span class="cp-progress-track" style="display:inline-block;vertical-align:middle;width:16em;height:0.7em;background:%s;border-radius:999px;overflow:hidden;margin:0 0.6em;">`, widgets.ColorRule)
	fmt.Fprintf(&b, `<span class="cp-progress-fill" style="display:block;height:100%%;width:%.1f%%;background:%s;"></span></span>`, pct, widgets.ColorTreated)
	b.WriteString(`<span class="cp-progress-count">`)
	b.WriteString(countText(done, total))
	if eta != "" {
		b.WriteString(" · " + template.HTMLEscapeString(eta))
	}
	b.WriteString(`</span></div>`)
	return b.String()
}

// roundDuration prints a duration to a sensible precision for a person.
func roundDuration(d time.Duration) string {
	switch {
	case d < 10*time.Second:
		return d.Round(100 * time.Millisecond).String()
	case d < 10*time.Minute:
		return d.Round(time.Second).String()
	default:
		return d.Round(time.Minute).String()
	}
}
