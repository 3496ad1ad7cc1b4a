package vision

import (
	"math"
	"testing"
)

// pinholeFloor is a camera at height hMM pitched down by pitchDeg with no
// roll, written from the textbook pinhole model (Hartley & Zisserman,
// "Multiple View Geometry", ch. 6): the ray through row y leaves the
// camera at φ = pitch + atan((y − cy)/fy) below the horizontal and meets
// the floor at forward distance h/tan φ when φ > 0. With no roll the
// distance depends on the row only.
type pinholeFloor struct{ hMM, pitchDeg, fy, cy float64 }

func (p pinholeFloor) ToFloorMM(x, y float64) (float64, float64, bool) {
	phi := p.pitchDeg*math.Pi/180 + math.Atan((y-p.cy)/p.fy)
	if phi <= 0 {
		return 0, 0, false
	}
	return p.hMM / math.Tan(phi), 0, true
}

func TestFloorTop(t *testing.T) {
	// The row at FloorRangeMM: φ = atan(h/range), y = cy + fy·tan(φ − pitch).
	rangeRow := func(p pinholeFloor) float64 {
		phi := math.Atan(p.hMM / FloorRangeMM)
		return p.cy + p.fy*math.Tan(phi-p.pitchDeg*math.Pi/180)
	}
	tests := map[string]struct {
		cam  pinholeFloor
		want func(p pinholeFloor) float64 // fraction of the 480-row frame
	}{
		// A very low camera looking along the floor (as in the synth
		// scene low-camera: 15 cm, pitched 8°): walls above row ~175.
		"low camera": {pinholeFloor{150, 8, 500, 240}, func(p pinholeFloor) float64 { return math.Ceil(rangeRow(p)) / 480 }},
		// A cart camera 0.6 m up pitched 30°: the horizon is above the frame.
		"cart camera": {pinholeFloor{600, 30, 500, 240}, func(pinholeFloor) float64 { return 0 }},
		// Looking at the horizon: half the frame is sky, clamped to 0.7.
		"level camera": {pinholeFloor{1000, 0.5, 500, 240}, func(p pinholeFloor) float64 { return math.Min(math.Ceil(rangeRow(p))/480, 0.7) }},
		"looking down": {pinholeFloor{1000, 90, 500, 240}, func(pinholeFloor) float64 { return 0 }},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			got := FloorTop(tc.cam, 640, 480)
			want := tc.want(tc.cam)
			t.Logf("top %.4f (row %.1f), want %.4f", got, got*480, want)
			if math.Abs(got-want)*480 > 1.01 {
				t.Errorf("top %.4f (row %.1f), want %.4f (row %.1f)", got, got*480, want, want*480)
			}
		})
	}
	if FloorTop(nil, 640, 480) != 0 {
		t.Error("no calibration: want 0")
	}
}
