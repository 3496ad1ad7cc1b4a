package pipeline

import (
	"math"
	"testing"

	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/vision"
)

// TestPredictorMovesTheLastLineWithTheFilter: on frames guidance coasts on
// the filter alone, the predicted line is the last accepted line shifted
// and sheared so that it has the filter's offset and heading at the
// reference row; it keeps a curve's shape. Worked by hand: a line bending
// 20 px over 200 rows, moved 6 px right and turned from 0° to 45°
// (tan 45° = 1) about row 400.
func TestPredictorMovesTheLastLineWithTheFilter(t *testing.T) {
	curve := []vision.Point{{X: 300, Y: 480}, {X: 305, Y: 400}, {X: 320, Y: 280}}
	det := vision.Detection{Found: true, Points: curve, RefRow: 400}
	var p predictor
	steps := []struct {
		name string
		d    vision.Detection
		e    guidance.Estimate
		want []vision.Point // nil: no prediction
	}{
		{"seeking", det, guidance.Estimate{}, nil},
		{"measured", det, guidance.Estimate{Tracking: true, Measured: true, OffsetPx: -15}, nil},
		{"coasting", vision.Detection{}, guidance.Estimate{Tracking: true, OffsetPx: -9, HeadingDeg: 45},
			[]vision.Point{{X: 300 + 6 - 80, Y: 480}, {X: 305 + 6, Y: 400}, {X: 320 + 6 + 120, Y: 280}}},
		{"gated", det, guidance.Estimate{Tracking: true, Gated: true, OffsetPx: -15}, curve},
		{"lost", vision.Detection{}, guidance.Estimate{Alarm: true}, nil},
		// After a loss there is nothing to predict from until a new
		// measurement is accepted.
		{"coasting after loss", vision.Detection{}, guidance.Estimate{Tracking: true, OffsetPx: -15}, nil},
	}
	for _, s := range steps {
		got := p.next(s.d, s.e)
		if len(got) != len(s.want) {
			t.Fatalf("%s: %v, want %v", s.name, got, s.want)
		}
		for i := range got {
			if math.Abs(got[i].X-s.want[i].X) > 1e-9 || got[i].Y != s.want[i].Y {
				t.Errorf("%s: point %d = %v, want %v", s.name, i, got[i], s.want[i])
			}
		}
	}
	// The prediction is the result's own: changing it leaves the memory.
	p.next(det, guidance.Estimate{Tracking: true, Measured: true})
	a := p.next(vision.Detection{}, guidance.Estimate{Tracking: true})
	a[0].X = -1
	if b := p.next(vision.Detection{}, guidance.Estimate{Tracking: true}); b[0].X != 300 {
		t.Errorf("a sink's change reached the predictor: %v", b[0])
	}
}

// TestReach: the reach passed to the tracker is the rows from the
// reference row to the line's far end in stripe mode, and in lane mode
// the lane detector's own (from the lines' support: a centre fitted
// across a worn gap in both lines reaches far, the lines do not).
func TestReach(t *testing.T) {
	pts := []vision.Point{{X: 160, Y: 239}, {X: 160, Y: 150}, {X: 160, Y: 40}}
	for _, tc := range []struct {
		name   string
		d      vision.Detection
		want   float64
		wantOK bool
	}{
		{name: "nothing found", d: vision.Detection{}, wantOK: false},
		{name: "stripe", d: vision.Detection{Found: true, RefRow: 192, Points: pts}, want: 152, wantOK: true},
		{name: "lane seen past a gap", d: vision.Detection{Found: true, RefRow: 192, Points: pts, Lane: &vision.LaneMeasure{ReachPx: -30}}, want: -30, wantOK: true},
		{name: "lane", d: vision.Detection{Found: true, RefRow: 192, Points: pts, Lane: &vision.LaneMeasure{ReachPx: 70}}, want: 70, wantOK: true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got, ok := reach(tc.d)
			if ok != tc.wantOK || (ok && got != tc.want) {
				t.Errorf("reach = %v, %v; want %v, %v", got, ok, tc.want, tc.wantOK)
			}
		})
	}
}
