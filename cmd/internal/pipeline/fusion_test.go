package pipeline_test

import (
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/vision"
)

type fixed struct {
	d     vision.Detection
	calls int
}

func (f *fixed) Detect(gocv.Mat, vision.Hint) vision.Detection { f.calls++; return f.d }

// line is a vertical centreline at x, measured at row 384 of a 640×480
// frame.
func line(x float64, conf float64, method string) vision.Detection {
	return vision.Detection{Found: true, OffsetPx: x - 320, RefRow: 384, Confidence: conf, Method: method,
		Points: []vision.Point{{X: x, Y: 479}, {X: x, Y: 200}}}
}

// track is the tracker's prediction of a vertical line at x, 4 px and 1.5°
// sigma (the tracker's default measurement noise).
func track(x float64) vision.Hint {
	return vision.Hint{Valid: true, OffsetPx: x - 320, OffsetSigma: 4, HeadingSigma: 1.5}
}

func TestFusionRule(t *testing.T) {
	img := gocv.NewMatWithSize(480, 640, gocv.MatTypeCV8UC3)
	defer img.Close()
	none := vision.Detection{Method: "classical", Reason: "no candidates"}
	for name, tc := range map[string]struct {
		primary, fallback vision.Detection
		hint              vision.Hint
		cross             int
		wantMethod        string
		wantFound         bool
		wantConf          float64
		wantFallbackRuns  int
	}{
		"confident classical, fallback idle": {line(300, 0.9, "classical"), line(300, 0.9, "cnn"), track(300), 0, "classical", true, 0.9, 0},
		// The fallback bridges a hard stretch of a held track, at a
		// confidence the tracker holds on but never acquires on.
		"classical finds nothing, cnn on the track": {none, line(302, 0.8, "cnn"), track(300), 0, "cnn", true, 0.45, 1},
		"classical finds nothing, no track":         {none, line(302, 0.8, "cnn"), vision.Hint{}, 0, "classical", false, 0, 1},
		"classical finds nothing, cnn off track":    {none, line(360, 0.8, "cnn"), track(300), 0, "classical", false, 0, 1},
		"classical finds nothing, cnn heading off": {none, func() vision.Detection {
			d := line(300, 0.8, "cnn")
			d.HeadingDeg = 20
			return d
		}(), track(300), 0, "classical", false, 0, 1},
		// The line ends in the near rows (the end of the line, a gap
		// ahead): the CNN alone may not say it is still there.
		"classical finds nothing, cnn sees only the near end": {none, func() vision.Detection {
			d := line(300, 0.8, "cnn")
			d.Points[1].Y = 380
			return d
		}(), track(300), 0, "classical", false, 0, 1},
		"unsure classical, cnn agrees":          {line(300, 0.3, "classical"), line(302, 0.8, "cnn"), track(300), 0, "fused", true, 0.45, 1},
		"unsure classical, cnn agrees weakly":   {line(300, 0.3, "classical"), line(302, 0.2, "cnn"), track(300), 0, "fused", true, 0.3, 1},
		"unsure classical, cnn agrees no track": {line(300, 0.3, "classical"), line(302, 0.8, "cnn"), vision.Hint{}, 0, "fused", true, 0.45, 1},
		"unsure classical, cnn finds nothing":   {line(300, 0.3, "classical"), vision.Detection{Method: "cnn"}, track(300), 0, "classical", true, 0.3, 1},
		// Classical jumped to a distractor 60 px off the track; the CNN
		// stays on it: the CNN's position, but halved, so the tracker
		// coasts rather than holds on a disputed frame.
		"disagreement, cnn on the track": {line(360, 0.3, "classical"), line(301, 0.8, "cnn"), track(300), 0, "disputed:cnn", true, 0.225, 1},
		"disagreement, cnn off track":    {line(300, 0.3, "classical"), line(360, 0.8, "cnn"), track(300), 0, "disputed:classical", true, 0.15, 1},
		"disagreement, no track":         {line(300, 0.3, "classical"), line(360, 0.8, "cnn"), vision.Hint{}, 0, "disputed:classical", true, 0.15, 1},
		"cross-check disagreement":       {line(300, 0.9, "classical"), line(360, 0.8, "cnn"), track(300), 1, "disputed:classical", true, 0.45, 1},
		"cross-check agreement":          {line(300, 0.9, "classical"), line(305, 0.8, "cnn"), track(300), 1, "fused", true, 0.9, 1},
	} {
		t.Run(name, func(t *testing.T) {
			p, c := &fixed{d: tc.primary}, &fixed{d: tc.fallback}
			f := &pipeline.Fused{Primary: p, Fallback: c, CrossCheck: tc.cross}
			d := f.Detect(img, tc.hint)
			if d.Method != tc.wantMethod || d.Found != tc.wantFound || d.Confidence != tc.wantConf || c.calls != tc.wantFallbackRuns {
				t.Errorf("got %s found %v conf %.3f with %d fallback runs, want %s %v %.3f %d (reason %q)",
					d.Method, d.Found, d.Confidence, c.calls, tc.wantMethod, tc.wantFound, tc.wantConf, tc.wantFallbackRuns, d.Reason)
			}
		})
	}
}

// seq is a detector that plays back a list of detections, repeating the
// last one.
type seq struct {
	ds []vision.Detection
	i  int
}

func (s *seq) Detect(gocv.Mat, vision.Hint) vision.Detection {
	d := s.ds[min(s.i, len(s.ds)-1)]
	s.i++
	return d
}

// TestFusionBridge: the CNN alone bridges one unbroken stretch; once it
// has failed the gate it is not used alone until the classical detector
// is confident again, and no bridge is longer than MaxBridge frames.
func TestFusionBridge(t *testing.T) {
	img := gocv.NewMatWithSize(480, 640, gocv.MatTypeCV8UC3)
	defer img.Close()
	none := vision.Detection{Method: "classical", Reason: "no candidates"}
	on, off := line(301, 0.9, "cnn"), line(380, 0.9, "cnn")
	sure := line(300, 0.9, "classical")
	for name, tc := range map[string]struct {
		primary, fallback []vision.Detection
		maxBridge         int
		want              string // per frame: c classical, n cnn, - nothing found
	}{
		"unbroken bridge":          {[]vision.Detection{none}, []vision.Detection{on}, 0, "nnnnnn"},
		"broken bridge stays off":  {[]vision.Detection{none}, []vision.Detection{on, off, on, on}, 0, "n---"},
		"cnn lost stays off":       {[]vision.Detection{none}, []vision.Detection{on, {Method: "cnn"}, on}, 0, "n--"},
		"classical re-arms":        {[]vision.Detection{none, none, none, sure, none}, []vision.Detection{on, off, on, on, on}, 0, "n--cn"},
		"bridge length is limited": {[]vision.Detection{none}, []vision.Detection{on}, 3, "nnn---"},
	} {
		t.Run(name, func(t *testing.T) {
			f := &pipeline.Fused{Primary: &seq{ds: tc.primary}, Fallback: &seq{ds: tc.fallback}, MaxBridge: tc.maxBridge}
			got := ""
			for range tc.want {
				d := f.Detect(img, track(300))
				switch {
				case !d.Found:
					got += "-"
				case d.Method == "cnn":
					got += "n"
				default:
					got += "c"
				}
			}
			if got != tc.want {
				t.Errorf("got %s, want %s", got, tc.want)
			}
		})
	}
}

// TestFallbackNeverStartsTrack runs the fused detector into the real
// tracker with its default settings. A CNN that sees the line in every
// frame, with the classical detector seeing nothing, must never make the
// tracker claim tracking; the same CNN may carry a track the classical
// detector started, until its bridge limit, and then the fail-safe fires.
func TestFallbackNeverStartsTrack(t *testing.T) {
	img := gocv.NewMatWithSize(480, 640, gocv.MatTypeCV8UC3)
	defer img.Close()
	none := vision.Detection{Method: "classical", Reason: "no candidates"}
	run := func(primary []vision.Detection, frames int) []guidance.Estimate {
		tr, err := guidance.NewTracker(guidance.DefaultConfig())
		if err != nil {
			t.Fatal(err)
		}
		f := &pipeline.Fused{Primary: &seq{ds: primary}, Fallback: &seq{ds: []vision.Detection{line(300, 0.99, "cnn")}}}
		var es []guidance.Estimate
		for i := 0; i < frames; i++ {
			now := time.Duration(i) * time.Second / 30
			h := vision.Hint{}
			if off, head, so, sh, ok := tr.Predict(now); ok {
				h = vision.Hint{Valid: true, OffsetPx: off, HeadingDeg: head, OffsetSigma: so, HeadingSigma: sh}
			}
			d := f.Detect(img, h)
			es = append(es, tr.Update(now, guidance.Measurement{Valid: d.Found, OffsetPx: d.OffsetPx, HeadingDeg: d.HeadingDeg, Confidence: d.Confidence}))
		}
		return es
	}
	for name, primary := range map[string][]vision.Detection{
		"classical sees nothing": {none},
		// One classical glimpse starts an acquisition run (the tracker
		// then predicts the line); the CNN must not complete it.
		"one classical glimpse": {line(300, 0.9, "classical"), none},
	} {
		for i, e := range run(primary, 90) {
			if e.Tracking {
				t.Fatalf("%s: frame %d: tracking on the CNN alone (state %s)", name, i, e.State)
			}
		}
	}
	// 30 classical frames lock the track; then the CNN alone carries it
	// for MaxBridge (30) frames, after which nothing is trusted and the
	// alarm must be on within the fail-safe time (0.3 s, 9 frames).
	primary := make([]vision.Detection, 30)
	for i := range primary {
		primary[i] = line(300, 0.9, "classical")
	}
	primary = append(primary, none)
	es := run(primary, 90)
	if !es[29].Tracking {
		t.Fatalf("classical frames did not lock the track: %s", es[29].State)
	}
	for i := 30; i < 60; i++ {
		if !es[i].Tracking {
			t.Errorf("frame %d: bridge on the CNN broke (%s: %s)", i, es[i].State, es[i].Reason)
		}
	}
	if !es[69].Alarm {
		t.Errorf("frame 69: no alarm 10 frames after the bridge ended (%s)", es[69].State)
	}
}

// rowsSeen is a fallback that reads the frame in rows, like the CNN, and
// says on what share of its near rows the image showed the line.
type rowsSeen struct {
	fixed
	near float64
}

func (r *rowsSeen) Coverage(y0, y1 float64) float64 {
	if y0 != 240 || y1 != 480 {
		return -1 // Fused asks about the lower half of the 480-row frame
	}
	return r.near
}

// TestFusionNearRows: the CNN carries a line on across a gap or past its
// end at full confidence (measured on the gap scene: rows 270–330 read
// "present" at 0.97–1.00 where the floor is bare), so its confidence and
// its measurement count only where the image shows the line on every one
// of its near rows, and a lift of the classical confidence also needs the
// classical line to reach over the near half. Its disagreement counts
// (the classical confidence halved) only where the image shows its line:
// on dashed-long at 640×480 the network read a line 20–86 px off a
// correct classical run-out across a dash gap on 17 frames.
func TestFusionNearRows(t *testing.T) {
	img := gocv.NewMatWithSize(480, 640, gocv.MatTypeCV8UC3)
	defer img.Close()
	none := vision.Detection{Method: "classical", Reason: "no candidates"}
	ending := line(300, 0.3, "classical")
	ending.Points[1].Y = 400 // the line ends in the near rows
	for name, tc := range map[string]struct {
		primary    vision.Detection
		cnnX       float64 // 0: 302, agreeing
		near       float64
		wantMethod string
		wantFound  bool
		wantConf   float64
	}{
		"agrees, every near row seen":    {line(300, 0.3, "classical"), 0, 1, "fused", true, 0.45},
		"agrees, a near row bare":        {line(300, 0.3, "classical"), 0, 0.75, "fused", true, 0.3},
		"agrees, classical line ends":    {ending, 0, 1, "fused", true, 0.3},
		"alone, every near row seen":     {none, 0, 1, "cnn", true, 0.45},
		"alone, a near row bare":         {none, 0, 0.75, "classical", false, 0},
		"alone, no near row seen":        {none, 0, 0, "classical", false, 0},
		"disagrees, every near row seen": {line(300, 0.44, "classical"), 340, 1, "disputed:classical", true, 0.22},
		"disagrees, a near row bare":     {line(300, 0.44, "classical"), 340, 0.75, "classical", true, 0.44},
	} {
		t.Run(name, func(t *testing.T) {
			x := tc.cnnX
			if x == 0 {
				x = 302
			}
			c := &rowsSeen{fixed: fixed{d: line(x, 0.8, "cnn")}, near: tc.near}
			f := &pipeline.Fused{Primary: &fixed{d: tc.primary}, Fallback: c}
			d := f.Detect(img, track(300))
			if d.Method != tc.wantMethod || d.Found != tc.wantFound || d.Confidence != tc.wantConf {
				t.Errorf("got %s found %v conf %.3f, want %s %v %.3f (reason %q)",
					d.Method, d.Found, d.Confidence, tc.wantMethod, tc.wantFound, tc.wantConf, d.Reason)
			}
		})
	}
	// MinNearSeen relaxes the rule.
	c := &rowsSeen{fixed: fixed{d: line(302, 0.8, "cnn")}, near: 0.75}
	f := &pipeline.Fused{Primary: &fixed{d: none}, Fallback: c, MinNearSeen: 0.75}
	if d := f.Detect(img, track(300)); d.Method != "cnn" {
		t.Errorf("MinNearSeen 0.75 with 3 of 4 near rows seen: %s (%q), want cnn", d.Method, d.Reason)
	}
}
