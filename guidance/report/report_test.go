package report_test

import (
	"bytes"
	"compress/gzip"
	"image"
	"image/color"
	"image/jpeg"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture/matcheck"
	"github.com/hewline/hewline/guidance/report"
	"github.com/hewline/hewline/guidance/tracklog"
)

func TestMain(m *testing.M) { matcheck.Main(m) }

// step is a stretch of frames with the same output.
type step struct {
	n        int
	tracking bool
	alarm    bool
	state    string
	reason   string
}

// script is a shift with three losses of known causes, written the way
// the tracker writes them: seek, hold, coast, lose with the alarm,
// regain.
var script = []step{
	{6, false, false, "seeking", "acquiring: line seen for 0.10 s of 0.20 s"},
	{30, true, false, "holding", ""},
	{4, true, false, "coasting", "coasting: no line in frame"},
	{12, false, true, "lost", "no trusted measurement for 0.30 s (no line in frame)"},
	{6, false, true, "regaining", "regaining: line seen for 0.10 s of 0.20 s after no trusted measurement"},
	{20, true, false, "holding", ""},
	{5, false, false, "coasting", "measurement rejected by gate (chi-square 14.2 > 9.21)"},
	{15, true, false, "holding", ""},
	{9, false, true, "lost", "camera stalled: no frame for 0.30 s"},
	{3, true, false, "holding", ""},
	{7, false, true, "lost", "no trusted measurement for 0.30 s (confidence 0.32 below 0.50)"},
}

// writeLog writes the script at 30 fps to dir/name and returns the path.
// Every third frame has a decision latency of 10, 20 or 40 ms.
func writeLog(t *testing.T, dir, name, source string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	f, err := os.Create(p)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	w, err := tracklog.NewWriter(f, tracklog.Header{Tool: "test", Source: source, Kind: "video", Width: 640, Height: 480, FPS: 30,
		Settings: map[string]any{"fail_safe_after_s": 0.3, "note": "<script>alert(1)</script>"}})
	if err != nil {
		t.Fatal(err)
	}
	i := 0
	for _, s := range script {
		for k := 0; k < s.n; k++ {
			r := tracklog.Record{Frame: i, T: float64(i) / 30, Tracking: s.tracking, Alarm: s.alarm, State: s.state,
				Reason: s.reason, Method: "classical", OffsetPx: 40 * float64(k%5-2)}
			if s.tracking {
				r.Confidence = 0.5 + 0.4*float64(k%2)
			}
			ms := []float64{10, 20, 40}[i%3]
			r.DecisionMS = &ms
			if err := w.Write(&r); err != nil {
				t.Fatal(err)
			}
			i++
		}
	}
	if err := w.Close("eof", map[string]float64{"drops": 3}); err != nil {
		t.Fatal(err)
	}
	return p
}

func readLog(t *testing.T, p string) *tracklog.Log {
	t.Helper()
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	l, err := tracklog.Read(f)
	if err != nil {
		t.Fatal(err)
	}
	return l
}

// TestStatsMatchTheLog counts the log independently: frames per state
// from the script, losses as the script's non-tracking-or-alarm stretches
// after the first lock, each with its known cause.
func TestStatsMatchTheLog(t *testing.T) {
	l := readLog(t, writeLog(t, t.TempDir(), "shift.track.ndjson", ""))
	s := report.Compute("shift", l)

	wantStates := map[string]int{}
	total, tracking, alarm := 0, 0, 0
	for _, st := range script {
		wantStates[st.state] += st.n
		total += st.n
		if st.tracking {
			tracking += st.n
		}
		if st.alarm {
			alarm += st.n
		}
	}
	if s.Frames != total || s.TrackingFrames != tracking || s.AlarmFrames != alarm {
		t.Errorf("frames %d tracking %d alarm %d, want %d %d %d", s.Frames, s.TrackingFrames, s.AlarmFrames, total, tracking, alarm)
	}
	// The writer's own summary counts the same states.
	for k, v := range wantStates {
		if s.StateFrames[k] != v || l.Summary.StateFrames[k] != v {
			t.Errorf("state %s: %d frames (summary %d), want %d", k, s.StateFrames[k], l.Summary.StateFrames[k], v)
		}
		if got, want := s.StateSeconds[k], float64(v)/30; got < want-1e-6 || got > want+1e-6 {
			t.Errorf("state %s: %.4f s, want %.4f", k, got, want)
		}
	}
	// Losses by hand from the script: frames 40–57 (no line, alarm),
	// 78–82 (gated), 98–106 (camera stall), 110–116 (low confidence).
	want := []struct {
		start, end int
		cause      report.Cause
		alarm      bool
	}{
		{40, 57, report.CauseNoCandidate, true},
		{78, 82, report.CauseGated, false},
		{98, 106, report.CauseCameraStall, true},
		{110, 116, report.CauseLowConfidence, true},
	}
	if len(s.Losses) != len(want) {
		t.Fatalf("%d losses, want %d: %+v", len(s.Losses), len(want), s.Losses)
	}
	for i, w := range want {
		g := s.Losses[i]
		dur := float64(w.end-w.start+1) / 30
		if g.StartFrame != w.start || g.EndFrame != w.end || g.Cause != w.cause || g.Alarm != w.alarm ||
			g.Duration < dur-1e-6 || g.Duration > dur+1e-6 {
			t.Errorf("loss %d: %+v, want frames %d–%d (%.3f s) %s alarm %v", i, g.Period, w.start, w.end, dur, w.cause, w.alarm)
		}
	}
	if len(s.Alarms) != 3 || s.Drops != 3 || l.Summary.Alarms != 3 {
		t.Errorf("alarms %d (summary %d), drops %d", len(s.Alarms), l.Summary.Alarms, s.Drops)
	}
	// Nearest-rank percentiles of 39 × {10, 20, 40} ms (117 frames): p50 is
	// the 59th smallest = 20, p95 the 112th = 40 (worked by hand).
	if lt := s.Latency; lt == nil || lt.N != total || lt.P50 != 20 || lt.P95 != 40 || lt.P99 != 40 || lt.Max != 40 {
		t.Errorf("latency %+v", s.Latency)
	}
}

func TestClassify(t *testing.T) {
	for reason, want := range map[string]report.Cause{
		"no trusted measurement for 0.31 s (no line in frame)":    report.CauseNoCandidate,
		"camera stalled: no frame for 0.30 s":                     report.CauseCameraStall,
		"no trusted measurement for 0.30 s (no frame for 0.30 s)": report.CauseCameraStall,
		"confidence 0.32 below 0.50":                              report.CauseLowConfidence,
		"measurement rejected by gate (chi-square 14.2 > 9.21)":   report.CauseGated,
		"frame size changed from 640x480 to 320x240":              report.CauseSizeChange,
		"time went backwards by 0.20 s":                           report.CauseFault,
		"classical and cnn disagree by 40 px":                     report.CauseOther,
		"":                                                        report.CauseOther,
	} {
		if got := report.Classify(reason); got != want {
			t.Errorf("Classify(%q) = %q, want %q", reason, got, want)
		}
	}
}

// writeClip writes an MJPEG AVI whose frame i is a flat grey of level
// 2·i, so that a thumbnail shows which frame was read.
func writeClip(t *testing.T, p string, n int) {
	t.Helper()
	vw, err := gocv.VideoWriterFile(p, "MJPG", 30, 320, 240, true)
	if err != nil {
		t.Fatal(err)
	}
	defer vw.Close()
	m := gocv.NewMatWithSize(240, 320, gocv.MatTypeCV8UC3)
	defer m.Close()
	for i := 0; i < n; i++ {
		m.SetTo(gocv.NewScalar(float64(2*i), float64(2*i), float64(2*i), 0))
		if err := vw.Write(m); err != nil {
			t.Fatal(err)
		}
	}
}

func TestReportHTMLAndThumbs(t *testing.T) {
	dir := t.TempDir()
	clip := filepath.Join(dir, "aisle.avi")
	writeClip(t, clip, 117)
	p := writeLog(t, dir, "shift.track.ndjson", "/nowhere/aisle.avi") // found beside the log
	r, err := report.Build([]report.Input{{Path: p, Log: readLog(t, p)}}, report.Options{Generated: time.Date(2026, 3, 1, 6, 0, 0, 0, time.UTC)})
	if err != nil {
		t.Fatal(err)
	}
	for i, l := range r.Logs[0].Losses {
		if l.Thumb == nil {
			t.Fatalf("loss %d has no thumbnail", i)
		}
		img, err := jpeg.Decode(bytes.NewReader(l.Thumb))
		if err != nil {
			t.Fatal(err)
		}
		g := color.GrayModel.Convert(img.At(10, 10)).(color.Gray).Y
		if want := 2 * l.StartFrame; int(g) < want-6 || int(g) > want+6 || img.Bounds().Dx() != report.ThumbWidth {
			t.Errorf("loss %d thumbnail grey %d size %v, want frame %d (grey %d)", i, g, img.Bounds(), l.StartFrame, want)
		}
	}
	out := filepath.Join(dir, "report.html")
	pngs, err := r.WriteFile(out)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range pngs {
		f, err := os.Open(q)
		if err != nil {
			t.Fatal(err)
		}
		cfg, format, err := image.DecodeConfig(f)
		f.Close()
		if err != nil || format != "png" || cfg.Width < 100 {
			t.Errorf("%s: %v %s %v", q, err, format, cfg)
		}
	}
	b, _ := os.ReadFile(out)
	h := string(b)
	bare := regexp.MustCompile(`data:image/jpeg;base64,([A-Za-z0-9+/=]|&#43;)*`).ReplaceAllString(h, "")
	if m := regexp.MustCompile(`(?i)https?:|//[a-z]|(src|href)\s*=\s*"[^"]|url\(|<script|<link`).FindString(bare); m != "" {
		t.Errorf("the HTML refers to something outside itself or runs a script: %q", m)
	}
	if strings.Contains(h, "<script>alert") || !strings.Contains(h, "&lt;script&gt;alert") {
		t.Error("a setting from the log was not HTML-escaped")
	}
	if n := strings.Count(h, `<tr class="loss">`); n != 4 {
		t.Errorf("%d loss rows, want 4", n)
	}
	if n := strings.Count(h, `class="alarm"`); n != 2*3 {
		t.Errorf("%d shaded alarm periods, want 3 in each of 2 plots", n)
	}
	if n := strings.Count(h, `src="data:image/jpeg;base64,`); n != 4 {
		t.Errorf("%d embedded thumbnails, want 4", n)
	}
	if !strings.Contains(h, "p50 20.0 ms, p95 40.0 ms") {
		t.Error("latency percentiles missing")
	}
}

func TestBrokenLogIsFlagged(t *testing.T) {
	dir := t.TempDir()
	p := writeLog(t, dir, "a.ndjson", "")
	b, _ := os.ReadFile(p)
	torn := b[:len(b)/2]
	f := bytes.NewReader(torn)
	l, err := tracklog.Read(f)
	if err == nil {
		t.Fatal("torn log read without error")
	}
	r, err := report.Build([]report.Input{{Path: p, Log: l, Broken: err}}, report.Options{NoThumbs: true})
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	if err := r.WriteHTML(&out); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out.String(), `id="broken"`) || !strings.Contains(out.String(), "torn last line") {
		t.Error("the report does not say loudly that the log failed")
	}
}

// TestThumbsBadFiles: files that are not video give an error or no
// thumbnails, never a crash.
func TestThumbsBadFiles(t *testing.T) {
	dir := t.TempDir()
	junk := filepath.Join(dir, "junk.avi")
	os.WriteFile(junk, []byte("RIFF\x00\x00\x00\x00AVI LIST not really"), 0o644)
	clip := filepath.Join(dir, "short.avi")
	writeClip(t, clip, 5)
	b, _ := os.ReadFile(clip)
	cut := filepath.Join(dir, "cut.avi")
	os.WriteFile(cut, b[:len(b)/2], 0o644)
	for name, p := range map[string]string{"junk": junk, "missing": filepath.Join(dir, "none.avi"), "cut": cut} {
		th, err := report.Thumbs(p, []int{0, 3, 100, -1})
		if err == nil && (th[2] != nil || th[3] != nil) {
			t.Errorf("%s: thumbnails for frames outside the clip", name)
		}
	}
	th, err := report.Thumbs(clip, []int{4, 5})
	if err != nil || th[0] == nil || th[1] != nil {
		t.Errorf("short clip: %v, thumbs present %v %v", err, th[0] != nil, th[1] != nil)
	}
}

func BenchmarkReport(b *testing.B) {
	f, _ := os.Open("testdata/gap.track.ndjson.gz")
	defer f.Close()
	var l *tracklog.Log
	{
		zr, err := gzip.NewReader(f)
		if err != nil {
			b.Fatal(err)
		}
		l, err = tracklog.Read(zr)
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		r, err := report.Build([]report.Input{{Path: "gap", Log: l}}, report.Options{NoThumbs: true})
		if err != nil {
			b.Fatal(err)
		}
		var out bytes.Buffer
		if err := r.WriteHTML(&out); err != nil {
			b.Fatal(err)
		}
	}
}

// TestLongLogPlotIsDecimated: an eight-minute log draws at most two points
// per pixel column and keeps a one-frame spike.
func TestLongLogPlotIsDecimated(t *testing.T) {
	l := &tracklog.Log{Header: tracklog.Header{Width: 640, Height: 480, FPS: 30}}
	for i := 0; i < 15000; i++ {
		r := tracklog.Record{Frame: i, T: float64(i) / 30, Tracking: i < 14000, State: "holding", Confidence: 0.8}
		if i == 12345 {
			r.OffsetPx = 300
		}
		l.Records = append(l.Records, r)
	}
	r, err := report.Build([]report.Input{{Path: "long", Log: l}}, report.Options{NoThumbs: true})
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	if err := r.WriteHTML(&out); err != nil {
		t.Fatal(err)
	}
	m := regexp.MustCompile(`(?s)<svg id="plot-offset-1".*?class="series"[^>]* d="([^"]*)"`).FindStringSubmatch(out.String())
	if m == nil {
		t.Fatal("no offset path")
	}
	pts := strings.Count(m[1], "M") + strings.Count(m[1], "L")
	if pts > 2*900 || pts < 500 {
		t.Errorf("%d points drawn for 15000 frames", pts)
	}
	// Offset 300 of ±320 maps to y = 184 − (300+320)/640·164 ≈ 25.1 (the
	// plot's axis from 20 to 184 px).
	if !strings.Contains(m[1], " 25.1 ") {
		t.Error("the one-frame spike was lost")
	}
	if strings.Count(m[1], "M") != 1 {
		t.Errorf("%d pen-downs, want 1 (tracking ends once)", strings.Count(m[1], "M"))
	}
}
