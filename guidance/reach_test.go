package guidance_test

import (
	"fmt"
	"strings"
	"testing"
	"time"

	"github.com/hewline/hewline/guidance"
)

// reaching is a good measurement whose line reaches rows past the
// reference row.
func reaching(rows float64) guidance.Measurement {
	m := good(10, 0)
	m.ReachPx, m.HasReach = rows, true
	return m
}

// lockReaching holds a line reaching 200 rows for 1 s and returns the next
// frame's time.
func lockReaching(t *testing.T, tr *guidance.Tracker) time.Duration {
	t.Helper()
	var now time.Duration
	var e guidance.Estimate
	for ; now < time.Second; now += 33 * ms {
		e = tr.Update(now, reaching(200))
	}
	if e.State != guidance.Holding {
		t.Fatalf("after 1 s of a steady line: %+v, want holding", e)
	}
	return now
}

func TestSeeingTheLineEnd(t *testing.T) {
	// The end of a solid line comes toward the camera: its far end runs
	// down the image 18 rows per frame (the gap scene at 640×480 runs
	// 15-19), from 200 rows past the reference row.
	const step = 18.0
	tests := map[string]struct {
		after     func(i int) guidance.Measurement // frames after the line starts shrinking
		wantLost  int                              // first frame index that must be Lost (−1: never within 12 frames)
		wantNote  string
		noneLostB int // no Lost before this index
	}{
		"the short line is seen running out before the reference row": {
			after: func(i int) guidance.Measurement { return reaching(200 - step*float64(i+1)*1.5) },
			// reach: 173, 146, 119, 92, 65, 38, 11 (index 6: under the
			// 24 rows needed ahead), −16
			wantLost: 6, noneLostB: 6, wantNote: "running out",
		},
		"the short line is seen ending short of the reference row": {
			// Falling 40 rows a frame: 160, 120, 80, 40, 0, −40 (index 5);
			// no reach between 0 and 24 is seen on the way.
			after: func(i int) guidance.Measurement {
				if i == 4 {
					return guidance.Measurement{} // the frame at 0 rows is missed
				}
				return reaching(160 - 40*float64(i))
			},
			wantLost: 4, noneLostB: 4, wantNote: "far end running out",
		},
		"the line vanishes and its shrinking end is extrapolated": {
			after: func(i int) guidance.Measurement {
				if i < 8 {
					return reaching(200 - step*float64(i+1))
				}
				return guidance.Measurement{} // the detector finds nothing
			},
			// last reach 56 at index 7, falling 540 rows/s: 38, then 20
			// (under 24) at index 9
			wantLost: 9, noneLostB: 9, wantNote: "far end running out",
		},
		"a dashed line: the fitted far end stays far while frames go missing": {
			after: func(i int) guidance.Measurement {
				if i%4 == 3 {
					return guidance.Measurement{}
				}
				return reaching(190 + float64(i%3)*5)
			},
			wantLost: -1, noneLostB: 12,
		},
		"the near mark's end takes over from the fitted far end, then runs out": {
			// A gap too long to bridge comes into view beyond the near
			// mark: the reach drops from the fitted line's far end (200)
			// to the mark's end (66), which then comes down 12 rows a
			// frame until the mark is no longer found.
			after: func(i int) guidance.Measurement {
				if i < 6 {
					return reaching(66 - 12*float64(i))
				}
				return guidance.Measurement{}
			},
			// After the jump the look-ahead does not apply (tape goes on
			// beyond the stretch: it may be a dash gap): last reach 6 at
			// index 5, falling 364 rows/s, below 0 at index 6.
			wantLost: 6, noneLostB: 6, wantNote: "far end running out",
		},
		"the near mark's end, seen between far ends, runs out": {
			// The fitted line runs on across a stretch to the tape beyond
			// on some frames (200 rows) and stops at the near mark's end
			// on others (100, 80, 60, 40), which comes down 20 rows a
			// frame: then nothing is found. The near mark's samples give
			// the trend: 40 at index 5, falling 364 rows/s, below 0 at
			// index 9 (after a jump the look-ahead does not apply). With
			// the trend from the latest jump alone (60, 40) the track
			// coasted to the fail-safe.
			after: func(i int) guidance.Measurement {
				if r, ok := map[int]float64{0: 100, 1: 200, 2: 80, 3: 200, 4: 60, 5: 40}[i]; ok {
					return reaching(r)
				}
				return guidance.Measurement{}
			},
			wantLost: 9, noneLostB: 9, wantNote: "far end running out",
		},
		"a sudden drop of the reach is no trend of its own": {
			// A drop from 200 to 90 and the line gone in the next
			// frames: the drop is the measurement changing what it
			// measures, not an end seen coming; coasting as before.
			after: func(i int) guidance.Measurement {
				if i == 0 {
					return reaching(90)
				}
				return guidance.Measurement{}
			},
			wantLost: -1, noneLostB: 9,
		},
		"one short detection in a steady line is refused, not an alarm": {
			after: func(i int) guidance.Measurement {
				if i == 2 {
					return reaching(-3)
				}
				return reaching(200)
			},
			wantLost: -1, noneLostB: 12,
		},
		"a wobbling far end is no trend, and a short detection in it is refused": {
			// A dashed line's fitted far end jumps about between 80 and
			// 120 rows; one frame sees only a stub reaching 10 rows.
			after: func(i int) guidance.Measurement {
				if i == 8 {
					return reaching(10)
				}
				return reaching(100 + 20*float64((i*7)%3-1))
			},
			wantLost: -1, noneLostB: 12,
		},
		"a line that steadily reaches only a little way is followed": {
			// The reach drops at once to 15 rows (a jump, not a trend) and
			// stays there: a short line, but not one running out.
			after:    func(i int) guidance.Measurement { return reaching(15 + float64(i%2)) },
			wantLost: -1, noneLostB: 12,
		},
		"no reach reported: coasting as before": {
			after: func(i int) guidance.Measurement {
				if i < 8 {
					return good(10, 0) // HasReach false
				}
				return guidance.Measurement{}
			},
			// FailSafeAfter 300 ms after the last trusted frame (index 7): index 17
			wantLost: -1, noneLostB: 12,
		},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			tr := newTracker(t, guidance.DefaultConfig())
			now := lockReaching(t, tr)
			for i := 0; i < 12; i++ {
				e := tr.Update(now, tc.after(i))
				now += 33 * ms
				lost := e.State == guidance.Lost
				if lost && i < tc.noneLostB {
					t.Fatalf("frame %d: lost (%s), want no alarm before frame %d", i, e.Reason, tc.noneLostB)
				}
				if i == tc.wantLost {
					if !lost || !e.Alarm {
						t.Fatalf("frame %d: %+v, want lost with the alarm on", i, e)
					}
					if !strings.Contains(e.Reason, tc.wantNote) {
						t.Errorf("reason %q, want it to mention %q", e.Reason, tc.wantNote)
					}
					return
				}
			}
			if tc.wantLost >= 0 {
				t.Fatalf("never lost within 12 frames, want lost at frame %d", tc.wantLost)
			}
		})
	}
}

func TestShortLineIsNotAcquired(t *testing.T) {
	// A line that ends below the reference row gives no offset there: it
	// must not bring guidance back.
	tr := newTracker(t, guidance.DefaultConfig())
	var e guidance.Estimate
	for now := time.Duration(0); now < time.Second; now += 33 * ms {
		e = tr.Update(now, reaching(-10))
	}
	if e.Tracking {
		t.Fatalf("tracking on a line that ends short of the reference row: %+v", e)
	}
}

func TestSeeingTheLineEndAtEverySize(t *testing.T) {
	// The same end coming toward the camera at every frame size: at
	// 640×480 it runs down 8 rows a frame from 96 rows past the reference
	// row, at 160×120 (a quarter) 2 rows a frame from 24 (the worn gap of
	// lane-reflections at 160×120 came down 2 rows a frame from 24.5).
	// The first frame that reaches less than the 24 rows needed ahead at
	// 640 (index 9: 16 rows, scaled with the frame) is an alarm at every
	// size, well before FailSafeAfter would raise one.
	for _, w := range []int{160, 320, 640, 1280} {
		t.Run(fmt.Sprintf("%d px wide", w), func(t *testing.T) {
			s := float64(w) / guidance.RefWidthPx
			tr := newTracker(t, guidance.DefaultConfig())
			tr.SetFrameWidth(w)
			tr.SetFrameHeight(w * 3 / 4)
			var now time.Duration
			for ; now < time.Second; now += 33 * ms {
				tr.Update(now, reaching(96*s))
			}
			for i := 0; i < 16; i++ {
				e := tr.Update(now, reaching((96-8*float64(i+1))*s))
				now += 33 * ms
				lost := e.State == guidance.Lost
				if lost && i < 9 {
					t.Fatalf("frame %d: lost (%s) while the line still reaches far enough past the reference row", i, e.Reason)
				}
				if i == 9 {
					if !lost || !strings.Contains(e.Reason, "running out") {
						t.Fatalf("frame %d (reach %.1f rows): %s (%q), want lost: the line is running out", i, (96-8*float64(i+1))*s, e.State, e.Reason)
					}
					return
				}
			}
		})
	}
}

func TestSeeingAJitteryLineEnd(t *testing.T) {
	// fisheye-tight at 320×240: the line leaves the side of the frame and
	// its far end comes down with the detector's jitter, rising once by 3
	// rows (more than the 1 row of slack at that size), then no line is
	// found at all. Measured from the scene's track log (frames 136-144).
	reaches := []float64{54.5, 48.5, 48.5, 48.5, 39.5, 33.5, 36.5, 30.5, 21.5}
	tr := newTracker(t, guidance.DefaultConfig())
	tr.SetFrameWidth(320)
	tr.SetFrameHeight(240)
	var now time.Duration
	for ; now < time.Second; now += 33 * ms {
		tr.Update(now, reaching(60))
	}
	for i, r := range reaches {
		if e := tr.Update(now, reaching(r)); e.State == guidance.Lost {
			t.Fatalf("sample %d (reach %.1f): lost (%s) while the line still reaches far enough", i, r, e.Reason)
		}
		now += 33 * ms
	}
	// The least-squares fit falls about 111 rows/s: from 21.5, the 12 rows
	// needed ahead at 320 px are passed 3 frames later (10.4 rows).
	for i := 0; i < 6; i++ {
		e := tr.Update(now, guidance.Measurement{})
		now += 33 * ms
		if i < 2 && e.State == guidance.Lost {
			t.Fatalf("frame %d after the line went: lost (%s), want coasting while the extrapolated end still reaches 12 rows", i, e.Reason)
		}
		if i == 2 {
			if e.State != guidance.Lost || !strings.Contains(e.Reason, "far end running out") {
				t.Fatalf("frame %d after the line went: %s (%q), want lost with the far end running out", i, e.State, e.Reason)
			}
			return
		}
	}
}

// TestSeeingTheLineEndAfterAStep: the line moves (a bend sweeping across
// the image as it leaves a wide lens's frame at the side) while its far
// end runs down 30 rows a frame: 150, 120, 90 rows past the reference
// row on the three frames that re-lock the track onto it, 60 on the
// next, then nothing is found. The re-locked track keeps the reach of
// the frames that confirmed the step, so the falling end (909 rows/s,
// extrapolated: 30 rows at index 4, 0 at index 5, under the 24 needed
// ahead) is alarmed at index 5. With the trend started afresh at the
// re-lock there were only two samples, and the track coasted to the
// fail-safe, 0.3 s after index 3.
func TestSeeingTheLineEndAfterAStep(t *testing.T) {
	tr := newTracker(t, guidance.DefaultConfig())
	now := lockReaching(t, tr)
	moved := func(rows float64) guidance.Measurement {
		m := good(90, 2)
		m.ReachPx, m.HasReach = rows, true
		return m
	}
	frames := []guidance.Measurement{moved(150), moved(120), moved(90), moved(60), {}, {}, {}, {}}
	for i, m := range frames {
		e := tr.Update(now, m)
		now += 33 * ms
		switch {
		case i == 2 && !strings.Contains(e.Reason, "line moved"):
			t.Fatalf("frame %d: %+v, want the track re-locked onto the moved line", i, e)
		case i < 5 && (e.State == guidance.Lost || e.Alarm):
			t.Fatalf("frame %d: %+v, want no alarm before frame 5", i, e)
		case i == 5:
			if e.State != guidance.Lost || !e.Alarm || !strings.Contains(e.Reason, "far end running out") {
				t.Fatalf("frame %d: %+v, want lost with the far end running out", i, e)
			}
			return
		}
	}
}
