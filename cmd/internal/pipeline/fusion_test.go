package pipeline_test

import (
	"testing"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/vision"
)

type fixed struct {
	d     vision.Detection
	calls int
}

func (f *fixed) Detect(gocv.Mat, vision.Hint) vision.Detection { f.calls++; return f.d }

func line(x float64, conf float64, method string) vision.Detection {
	return vision.Detection{Found: true, OffsetPx: x - 320, RefRow: 384, Confidence: conf, Method: method,
		Points: []vision.Point{{X: x, Y: 479}, {X: x, Y: 200}}}
}

func TestFusionRule(t *testing.T) {
	img := gocv.NewMatWithSize(480, 640, gocv.MatTypeCV8UC3)
	defer img.Close()
	for name, tc := range map[string]struct {
		primary, fallback vision.Detection
		cross             int
		wantMethod        string
		wantConf          float64
		wantFallbackRuns  int
	}{
		"confident classical, fallback idle": {line(300, 0.9, "classical"), line(300, 0.9, "cnn"), 0, "classical", 0.9, 0},
		"unsure classical, cnn takes over":   {line(300, 0.3, "classical"), line(302, 0.8, "cnn"), 0, "cnn", 0.8, 1},
		"classical finds nothing":            {vision.Detection{Method: "classical"}, line(310, 0.7, "cnn"), 0, "cnn", 0.7, 1},
		"unsure, cnn even less sure":         {line(300, 0.3, "classical"), line(300, 0.2, "cnn"), 0, "classical", 0.3, 1},
		"disagreement halves confidence":     {line(300, 0.3, "classical"), line(360, 0.8, "cnn"), 0, "cnn", 0.4, 1},
		"cross-check disagreement":           {line(300, 0.9, "classical"), line(360, 0.8, "cnn"), 1, "classical", 0.45, 1},
		"cross-check agreement":              {line(300, 0.9, "classical"), line(305, 0.8, "cnn"), 1, "classical", 0.9, 1},
	} {
		t.Run(name, func(t *testing.T) {
			p, c := &fixed{d: tc.primary}, &fixed{d: tc.fallback}
			f := &pipeline.Fused{Primary: p, Fallback: c, CrossCheck: tc.cross}
			d := f.Detect(img, vision.Hint{})
			if d.Method != tc.wantMethod || d.Confidence != tc.wantConf || c.calls != tc.wantFallbackRuns {
				t.Errorf("got %s conf %.2f with %d fallback runs, want %s %.2f %d (reason %q)", d.Method, d.Confidence, c.calls, tc.wantMethod, tc.wantConf, tc.wantFallbackRuns, d.Reason)
			}
		})
	}
}
