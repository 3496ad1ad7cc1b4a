package status

import (
	"context"
	"os"
	"os/exec"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/guidance"
)

// chromium is Debian's browser (package chromium, installed by
// scripts/setup.sh).
const chromium = "/usr/bin/chromium"

// dumpDOM loads url in headless Chromium, lets the page's scripts run for
// budget of virtual time (several polls of state.json) and returns the DOM
// as the scripts left it. Every run gets a fresh profile, and Chromium's
// own network traffic (updates, sync, QUIC) is switched off, so the only
// requests are the page's.
func dumpDOM(t *testing.T, url string, budget time.Duration) string {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, chromium,
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir="+t.TempDir(),
		"--virtual-time-budget="+strconv.Itoa(int(budget.Milliseconds())),
		"--dump-dom", url)
	var errOut strings.Builder
	cmd.Stderr = &errOut
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("chromium --dump-dom %s: %v\n%s", url, err, errOut.String())
	}
	return string(out)
}

// page is what the test reads back from a dumped DOM.
type page struct {
	points      int    // samples plotted (svg data-points)
	offsetN     int    // points on the offset line
	offsetPath  string // the offset line's d
	alarmHidden bool
	alarmText   string
	state       string
	stateClass  string
	frames      string
	health      string
}

var (
	rePoints   = regexp.MustCompile(`<svg id="plot"[^>]*data-points="(\d+)"`)
	reOffset   = regexp.MustCompile(`<path id="offset-line" d="([^"]*)"[^>]*data-n="(\d+)"`)
	reAlarm    = regexp.MustCompile(`<div id="alarm" class="banner"( hidden="")?>([^<]*)</div>`)
	reState    = regexp.MustCompile(`<span id="state" class="state (\w+)">([^<]*)</span>`)
	reFrames   = regexp.MustCompile(`<td id="frames">([^<]*)</td>`)
	reHealthTB = regexp.MustCompile(`(?s)<tbody id="health">(.*?)</tbody>`)
)

func parsePage(t *testing.T, dom string) page {
	t.Helper()
	var p page
	m := rePoints.FindStringSubmatch(dom)
	o := reOffset.FindStringSubmatch(dom)
	a := reAlarm.FindStringSubmatch(dom)
	s := reState.FindStringSubmatch(dom)
	f := reFrames.FindStringSubmatch(dom)
	h := reHealthTB.FindStringSubmatch(dom)
	if m == nil || o == nil || a == nil || s == nil || f == nil || h == nil {
		t.Fatalf("the dumped page lacks the plot, alarm, state, counters or health table:\n%s", dom)
	}
	p.points, _ = strconv.Atoi(m[1])
	p.offsetPath = o[1]
	p.offsetN, _ = strconv.Atoi(o[2])
	p.alarmHidden, p.alarmText = a[1] != "", a[2]
	p.stateClass, p.state = s[1], s[2]
	p.frames = f[1]
	p.health = h[1]
	return p
}

// TestPageInHeadlessChromium loads the status page in a real browser
// twice: after 30 frames of holding the line, and after 30 more and a
// loss. The page must load and run its script (state and counters
// filled in from state.json), the plot must grow and change between the
// two loads, and the second must show the alarm banner with the reason
// and the state in the alarm colour.
func TestPageInHeadlessChromium(t *testing.T) {
	if _, err := os.Stat(chromium); err != nil {
		t.Skipf("no %s (Debian package chromium, installed by scripts/setup.sh): %v", chromium, err)
	}
	clk := newFakeClock()
	s := newServer(t, Options{Addr: "127.0.0.1:0", Now: clk.Now, History: time.Minute, Samples: 600})
	base := start(t, s)
	s.SetHealth("camera", true, "fake0: opened")
	s.SetHealth("recording", false, "STOPPED: disk full")
	img := gocv.NewMatWithSize(48, 64, gocv.MatTypeCV8UC3)
	defer img.Close()
	last := 0
	feed := func(from, to int, st guidance.State) {
		for i := from; i < to; i++ {
			clk.Add(100 * time.Millisecond)
			s.Frame(result(i, st, 20*float64(i%10)-90, clk.Now(), 5*time.Millisecond), img)
		}
		last = to - 1
	}
	// The page's view is an MJPEG stream, and JPEGs are made only while
	// someone watches it: once Chromium connects, keep sending the last
	// frame's state every 20 ms (100 ms of the server's clock), as a camera
	// would. Headless Chromium finishes the load (and --dump-dom returns)
	// only while stream parts keep coming.
	load := func(st guidance.State) page {
		stop := make(chan struct{})
		done := make(chan struct{})
		go func() {
			defer close(done)
			for {
				s.mu.Lock()
				watched := s.streamClients > 0
				s.mu.Unlock()
				if watched {
					s.Frame(result(last, st, 20*float64(last%10)-90, clk.Now(), 5*time.Millisecond), img)
					clk.Add(100 * time.Millisecond)
				}
				select {
				case <-stop:
					return
				case <-time.After(10 * time.Millisecond):
				}
			}
		}()
		dom := dumpDOM(t, base+"/", 2*time.Second)
		close(stop)
		<-done
		return parsePage(t, dom)
	}
	feed(0, 30, guidance.Holding)
	first := load(guidance.Holding)
	if n, _ := strconv.Atoi(first.frames); first.state != "holding" || first.stateClass != "ok" || n < 30 {
		t.Errorf("first load: state %q (%s), frames %q; want holding (ok), at least 30: the script did not run", first.state, first.stateClass, first.frames)
	}
	if first.points < 30 || first.offsetN != first.points || !first.alarmHidden {
		t.Errorf("first load: %d points, %d on the offset line, alarm hidden %v; want at least 30, all on the line, hidden", first.points, first.offsetN, first.alarmHidden)
	}
	if !strings.Contains(first.health, "camera") || !strings.Contains(first.health, "FAULT") || !strings.Contains(first.health, "disk full") {
		t.Errorf("health table does not show the parts and the fault:\n%s", first.health)
	}

	feed(last+1, last+31, guidance.Holding)
	feed(last+1, last+3, guidance.Lost)
	second := load(guidance.Lost)
	if second.points <= first.points || second.offsetN <= first.offsetN || second.offsetPath == first.offsetPath {
		t.Errorf("the plot did not update: %d then %d points, %d then %d on the offset line", first.points, second.points, first.offsetN, second.offsetN)
	}
	if second.alarmHidden || !strings.HasPrefix(second.alarmText, "ALARM: ") || !strings.Contains(second.alarmText, "no trusted measurement") {
		t.Errorf("after the loss the alarm banner is hidden=%v with %q; want it shown with the reason", second.alarmHidden, second.alarmText)
	}
	if second.state != "lost" || second.stateClass != "bad" {
		t.Errorf("after the loss the state shows %q (%s), want lost (bad)", second.state, second.stateClass)
	}
}
