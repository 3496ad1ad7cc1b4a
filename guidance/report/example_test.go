package report_test

import (
	"bytes"
	"fmt"

	"github.com/hewline/hewline/guidance/report"
	"github.com/hewline/hewline/guidance/tracklog"
)

// A log of ten frames at 10 fps: tracking, a three-frame loss with the
// alarm because no line was found, then tracking again.
func ExampleCompute() {
	var buf bytes.Buffer
	w, _ := tracklog.NewWriter(&buf, tracklog.Header{Source: "aisle-3.avi", Width: 640, Height: 480, FPS: 10})
	for i := 0; i < 10; i++ {
		r := tracklog.Record{Frame: i, T: float64(i) / 10, Tracking: true, Confidence: 0.9, State: "holding"}
		if i >= 4 && i <= 6 {
			r = tracklog.Record{Frame: i, T: float64(i) / 10, Alarm: true, State: "lost",
				Reason: "no trusted measurement for 0.30 s (no line in frame)"}
		}
		w.Write(&r)
	}
	w.Close("eof", nil)
	l, _ := tracklog.Read(&buf)

	s := report.Compute("aisle-3", l)
	fmt.Printf("%d frames, %.0f %% tracking\n", s.Frames, s.TrackingPct())
	for _, loss := range s.Losses {
		fmt.Printf("loss: frames %d–%d, %.1f s, %s\n", loss.StartFrame, loss.EndFrame, loss.Duration, loss.Cause)
	}
	// Output:
	// 10 frames, 70 % tracking
	// loss: frames 4–6, 0.3 s, no candidate
}
