package score_test

import (
	"math"
	"strings"
	"testing"

	"github.com/hewline/hewline/capture/truth"
	"github.com/hewline/hewline/guidance/score"
	"github.com/hewline/hewline/guidance/tracklog"
)

// vertical makes a vertical line at x over rows 240..478, every 2 rows.
func vertical(x float64) [][2]float64 {
	var p [][2]float64
	for y := 478.0; y >= 240; y -= 2 {
		p = append(p, [2]float64{x, y})
	}
	return p
}

// workedExample is a 30 fps clip worked out by hand: frames 0–29
// visible, 30–44 a gap, 45–59 visible again, tracked as the comments say.
func workedExample() (h truth.Header, tf []truth.Frame, rec []tracklog.Record) {
	h = truth.Header{Width: 640, Height: 480, FPS: 30}
	for i := 0; i < 60; i++ {
		ti := float64(i) / 30
		vis := i < 30 || i >= 45
		tf = append(tf, truth.Frame{Frame: i, T: ti, Visible: vis, Points: vertical(320)})
		r := tracklog.Record{Frame: i, T: ti, MeasConfidence: 0.9}
		switch {
		case i < 10: // 8 px off: within 10 px
			r.Tracking, r.Points = true, vertical(328)
		case i < 20: // 12 px off: outside tolerance, not yet a false track
			r.Tracking, r.Points = true, vertical(332)
		case i < 25: // 40 px off: a false track
			r.Tracking, r.Points = true, vertical(360)
		case i < 30: // exact
			r.Tracking, r.Points = true, vertical(320)
		case i < 33: // coasting into the gap: claims tracking where nothing is visible
			r.Tracking = true
		case i < 45: // alarm from frame 39: 9 frames = 0.3 s after the loss at 30
			r.Alarm = i >= 39
		default: // alarm held until frame 50, tracking again from 51
			r.Alarm = i <= 50
			r.Tracking = i > 50
			r.Points = vertical(321)
		}
		rec = append(rec, r)
	}
	return h, tf, rec
}

// TestWorkedExample checks the rules on workedExample.
func TestWorkedExample(t *testing.T) {
	h, tf, rec := workedExample()
	r, err := score.Clip("worked", h, tf, rec)
	if err != nil {
		t.Fatal(err)
	}
	// Correct: 0–9, 25–29, 51–59 = 10 + 5 + 9 = 24 of 45 visible.
	if r.VisibleFrames != 45 || r.CorrectFrames != 24 {
		t.Errorf("visible %d correct %d, want 45 and 24", r.VisibleFrames, r.CorrectFrames)
	}
	// False tracks: 20–24 (40 px) and 30–32 (no line) = 8.
	if r.FalseTracks != 8 {
		t.Errorf("false tracks %d, want 8", r.FalseTracks)
	}
	if r.Losses != 1 || r.MissedAlarms != 0 || len(r.AlarmLatencies) != 1 || math.Abs(r.AlarmLatencies[0]-0.3) > 1e-9 {
		t.Errorf("losses %d missed %d latencies %v, want one of 0.3 s", r.Losses, r.MissedAlarms, r.AlarmLatencies)
	}
	if r.FalseAlarms != 0 {
		t.Errorf("false alarms %d", r.FalseAlarms)
	}
	// Median error over tracked visible frames: errors are 8 (10×), 12 (10×),
	// 40 (5×), 0 (5×), 1 (9×): 39 values, the 20th sorted is 8.
	if got := r.MedianError(); got != 8 {
		t.Errorf("median error %v, want 8", got)
	}
	var b strings.Builder
	score.WriteTable(&b, []*score.Result{r})
	if !strings.Contains(b.String(), "| worked | 60 | 45 | 0.533 |") {
		t.Errorf("table:\n%s", b.String())
	}
}

// TestCoastingFramesAreJudgedOnThePrediction: while guidance coasts on the
// filter alone, the record's predicted_points are the line it used; the
// scorer judges that line, and the reliability table still judges the
// detector's own points at its own confidence.
func TestCoastingFramesAreJudgedOnThePrediction(t *testing.T) {
	h := truth.Header{Width: 640, Height: 480, FPS: 30}
	cases := map[string]struct {
		rec                    tracklog.Record
		wantCorrect, wantFalse int
		wantBinWithin          int // of the one frame in bin 8
	}{
		// The detector lost the line (no points); the prediction is on it.
		"prediction on the line, no detection": {tracklog.Record{Tracking: true, PredictedPoints: vertical(322)}, 1, 0, -1},
		// The prediction has drifted 40 px off: a false track, even
		// though the gated detection itself was right.
		"prediction off, gated detection right": {tracklog.Record{Tracking: true, PredictedPoints: vertical(360), Points: vertical(320), MeasConfidence: 0.85}, 0, 1, 1},
		// A detection 50 px off that the gate refused; guidance stayed on the line.
		"prediction on, gated detection off": {tracklog.Record{Tracking: true, PredictedPoints: vertical(321), Points: vertical(370), MeasConfidence: 0.85}, 1, 0, 0},
		// Not tracking: a stray predicted line never counts.
		"not tracking": {tracklog.Record{PredictedPoints: vertical(320)}, 0, 0, -1},
	}
	for name, tc := range cases {
		t.Run(name, func(t *testing.T) {
			tf := []truth.Frame{{Frame: 0, Visible: true, Points: vertical(320)}}
			r, err := score.Clip(name, h, tf, []tracklog.Record{tc.rec})
			if err != nil {
				t.Fatal(err)
			}
			if r.CorrectFrames != tc.wantCorrect || r.FalseTracks != tc.wantFalse {
				t.Errorf("correct %d false %d, want %d and %d", r.CorrectFrames, r.FalseTracks, tc.wantCorrect, tc.wantFalse)
			}
			if tc.wantBinWithin >= 0 && (r.Bins[8].N != 1 || r.Bins[8].Within != tc.wantBinWithin) {
				t.Errorf("reliability bin 0.8: %+v, want 1 frame, %d within", r.Bins[8], tc.wantBinWithin)
			}
		})
	}
}

func TestFalseAndMissedAlarms(t *testing.T) {
	h := truth.Header{Width: 320, Height: 480, FPS: 10}
	var tf []truth.Frame
	var rec []tracklog.Record
	for i := 0; i < 60; i++ {
		ti := float64(i) / 10
		vis := !(i >= 40 && i < 45) // short gap the tracker never alarms on
		tf = append(tf, truth.Frame{Frame: i, T: ti, Visible: vis, Points: vertical(160)})
		rec = append(rec, tracklog.Record{Frame: i, T: ti, Tracking: vis, Points: vertical(162), Alarm: i == 20 || i == 21})
	}
	r, err := score.Clip("alarms", h, tf, rec)
	if err != nil {
		t.Fatal(err)
	}
	if r.FalseAlarms != 1 || r.MissedAlarms != 1 || r.Losses != 1 {
		t.Errorf("false %d missed %d losses %d, want 1 1 1", r.FalseAlarms, r.MissedAlarms, r.Losses)
	}
	if !math.IsInf(r.MaxLatency(), 1) {
		t.Errorf("max latency %v, want +Inf for a missed alarm", r.MaxLatency())
	}
}
