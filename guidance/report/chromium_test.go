package report_test

import (
	"context"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/hewline/hewline/guidance/report"
)

// chromium finds Debian's chromium (installed by scripts/setup.sh). Outside
// the setup it skips loudly; under CI (CI set) its absence fails.
func chromium(t *testing.T) string {
	t.Helper()
	for _, name := range []string{"chromium", "chromium-browser"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	if os.Getenv("CI") != "" {
		t.Fatal("chromium is not installed: scripts/setup.sh must install Debian's chromium")
	}
	t.Skip("SKIPPING the browser check of the report: chromium is not installed (apt-get install chromium, or run scripts/setup.sh)")
	return ""
}

// headless runs chromium with everything that could reach the network
// switched off and returns its stdout.
func headless(t *testing.T, bin string, args ...string) string {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	base := []string{"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir=" + t.TempDir()}
	cmd := exec.CommandContext(ctx, bin, append(base, args...)...)
	cmd.Env = append(os.Environ(), "HOME="+t.TempDir())
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("chromium %v: %v", args, err)
	}
	return string(out)
}

// TestChromiumRendersThePlots loads the report in headless Chromium and
// checks, in the DOM the browser built (not in our own text), that each
// plot is there with its data: the series paths with their points, one
// shaded rectangle per alarm period, one bar per histogram bin and per
// state, and every loss row with its thumbnail decoded. Chromium is the
// outside reference for "the report opens in a browser".
func TestChromiumRendersThePlots(t *testing.T) {
	bin := chromium(t)
	dir := t.TempDir()
	writeClip(t, filepath.Join(dir, "aisle.avi"), 117)
	p := writeLog(t, dir, "shift.track.ndjson", "aisle.avi")
	r, err := report.Build([]report.Input{{Path: p, Log: readLog(t, p)}}, report.Options{})
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "report.html")
	if _, err := r.WriteFile(out); err != nil {
		t.Fatal(err)
	}
	dom := headless(t, bin, "--dump-dom", "file://"+out)

	svg := func(id string) string {
		m := regexp.MustCompile(`(?s)<svg id="` + id + `".*?</svg>`).FindString(dom)
		if m == "" {
			t.Fatalf("plot %s is not in the rendered DOM", id)
		}
		return m
	}
	for _, id := range []string{"plot-offset-1", "plot-confidence-1"} {
		s := svg(id)
		d := regexp.MustCompile(`class="series"[^>]* d="([^"]*)"`).FindStringSubmatch(s)
		if d == nil {
			t.Fatalf("%s has no data path", id)
		}
		// Confidence has a point for every frame; offset only while tracking.
		pts := strings.Count(d[1], "M") + strings.Count(d[1], "L")
		want := r.Logs[0].Frames
		if id == "plot-offset-1" {
			want = r.Logs[0].TrackingFrames
		}
		if pts != want {
			t.Errorf("%s: %d points in the rendered path, want %d", id, pts, want)
		}
		if n := strings.Count(s, `class="alarm"`); n != len(r.Logs[0].Alarms) {
			t.Errorf("%s: %d shaded alarm periods, want %d", id, n, len(r.Logs[0].Alarms))
		}
	}
	if n := strings.Count(svg("plot-histogram"), `class="bar"`); n != report.Bins {
		t.Errorf("histogram has %d bars, want %d", n, report.Bins)
	}
	if n := strings.Count(svg("plot-states"), `class="bar"`); n != len(r.Logs[0].StateFrames) {
		t.Errorf("state plot has %d bars, want %d", n, len(r.Logs[0].StateFrames))
	}
	if n := strings.Count(dom, `class="thumb"`); n != len(r.Logs[0].Losses) {
		t.Errorf("%d thumbnails in the DOM, want %d", n, len(r.Logs[0].Losses))
	}

	// A screenshot: the page paints (a PNG of the full width comes back).
	shot := filepath.Join(dir, "shot.png")
	headless(t, bin, "--window-size=1050,1600", "--screenshot="+shot, "file://"+out)
	if st, err := os.Stat(shot); err != nil || st.Size() < 10000 {
		t.Fatalf("screenshot: %v", err)
	}
	// The browser painted the alarm shading (#f4b4b4) over a real area.
	f, err := os.Open(shot)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(f)
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	pink := 0
	for y := img.Bounds().Min.Y; y < img.Bounds().Max.Y; y++ {
		for x := img.Bounds().Min.X; x < img.Bounds().Max.X; x++ {
			r, g, b, _ := img.At(x, y).RGBA()
			if near(r>>8, 0xf4) && near(g>>8, 0xb4) && near(b>>8, 0xb4) {
				pink++
			}
		}
	}
	if pink < 5000 {
		t.Errorf("only %d pixels of alarm shading painted in the screenshot", pink)
	}
	if keep := os.Getenv("HEWLINE_KEEP_SCREENSHOT"); keep != "" {
		b, _ := os.ReadFile(shot)
		os.WriteFile(keep, b, 0o644)
	}
}

func near(a uint32, b uint32) bool { return a+6 >= b && a <= b+6 }
