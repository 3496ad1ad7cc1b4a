package cnn

import (
	"errors"
	"image"
	"io"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/vision"
	"gocv.io/x/gocv"
)

func TestLabels(t *testing.T) {
	a := Arch{InW: 32, InH: 16, Conv: []int{4}, Hidden: 4, Rows: 4, Cells: 8}
	roi := image.Rect(0, 0, 80, 40) // cells 10 px wide, anchor rows at y = 5, 15, 25, 35
	ab := uint8(a.Absent())
	tests := map[string]struct {
		pts  []vision.Point
		want []uint8
	}{
		"vertical at 41": {seg(41, 40, 41, 0), []uint8{4, 4, 4, 4}},
		// x = 5 + 2·(40 − y): at y 35, 25, 15, 5 → 15, 35, 55, 75.
		"diagonal": {seg(5, 40, 85, 0), []uint8{7, 5, 3, 1}},
		// Only the lower half is marked.
		"ends halfway":  {seg(20, 40, 20, 20), []uint8{ab, ab, 2, 2}},
		"outside right": {seg(95, 40, 95, 0), []uint8{ab, ab, ab, ab}},
		"no line":       {nil, []uint8{ab, ab, ab, ab}},
		"top to bottom": {seg(41, 0, 41, 40), []uint8{4, 4, 4, 4}},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			got := Labels(a, roi, tc.pts)
			for i := range got {
				if got[i] != tc.want[i] {
					t.Fatalf("labels %v, want %v", got, tc.want)
				}
			}
		})
	}
	// An ROI offset inside a bigger frame shifts the cells with it.
	got := Labels(a, image.Rect(100, 50, 180, 90), seg(141, 90, 141, 50))
	if got[0] != 4 || got[3] != 4 {
		t.Errorf("offset roi: labels %v, want all 4", got)
	}
}

// seg is the straight centreline from (x0, y0) to (x1, y1).
func seg(x0, y0, x1, y1 float64) []vision.Point {
	return []vision.Point{{X: x0, Y: y0}, {X: x1, Y: y1}}
}

func meanGrey(t *testing.T, img gocv.Mat) float64 {
	t.Helper()
	px, err := img.DataPtrUint8()
	if err != nil {
		t.Fatal(err)
	}
	var s float64
	for _, v := range px {
		s += float64(v)
	}
	return s / float64(len(px))
}

func renderScene(t testing.TB, sc Scene) gocv.Mat {
	t.Helper()
	img := gocv.NewMat()
	if err := sc.Render(&img); err != nil {
		t.Fatal(err)
	}
	return img
}

func flatScene(w, h int) Scene {
	return Scene{W: w, H: h, Floor: [3]float64{120, 120, 120}, Tape: [3]float64{20, 200, 235}, Present: true,
		X0: float64(w) / 2, Length: 1, WidthNear: 10, WidthFar: 10, Gain: 1}
}

func TestDegradations(t *testing.T) {
	sc := flatScene(160, 120)
	base := renderScene(t, sc)
	defer base.Close()
	m0 := meanGrey(t, base)
	tests := map[string]struct {
		do   func(img *gocv.Mat, rng *rand.Rand) error
		want func(m float64) bool
	}{
		"shadow darkens":  {func(img *gocv.Mat, rng *rand.Rand) error { return Shadow(img, rng) }, func(m float64) bool { return m < m0-1 }},
		"glare brightens": {func(img *gocv.Mat, rng *rand.Rand) error { return Glare(img, rng) }, func(m float64) bool { return m > m0+1 }},
		// Rounding to whole grey levels moves the mean by at most 0.5.
		"gain halves":     {func(img *gocv.Mat, rng *rand.Rand) error { return Gain(img, 0.5) }, func(m float64) bool { return math.Abs(m-m0/2) < 0.6 }},
		"blur keeps mean": {func(img *gocv.Mat, rng *rand.Rand) error { return Blur(img, 2) }, func(m float64) bool { return math.Abs(m-m0) < 1 }},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			img := base.Clone()
			defer img.Close()
			if err := tc.do(&img, rand.New(rand.NewPCG(5, 6))); err != nil {
				t.Fatal(err)
			}
			if m := meanGrey(t, img); !tc.want(m) {
				t.Errorf("mean %.2f from %.2f", m, m0)
			}
		})
	}
	t.Run("noise has the asked deviation", func(t *testing.T) {
		img := base.Clone()
		defer img.Close()
		if err := Noise(&img, 8, rand.New(rand.NewPCG(1, 1))); err != nil {
			t.Fatal(err)
		}
		a, _ := base.DataPtrUint8()
		b, _ := img.DataPtrUint8()
		var s, s2 float64
		for i := range a {
			d := float64(b[i]) - float64(a[i])
			s += d
			s2 += d * d
		}
		n := float64(len(a))
		sd := math.Sqrt(s2/n - (s/n)*(s/n))
		// Rounding to integers adds a uniform error of variance 1/12
		// (sd of 8.005); 57 600 samples make the estimate good to ~0.5 %.
		if math.Abs(sd-8) > 0.2 {
			t.Errorf("noise sd %.3f, want 8", sd)
		}
	})
	t.Run("wear lowers the stripe's contrast", func(t *testing.T) {
		img := base.Clone()
		defer img.Close()
		pts := sc.Truth()
		if err := Wear(&img, pts, 10, 0.8, rand.New(rand.NewPCG(2, 2))); err != nil {
			t.Fatal(err)
		}
		if d := meanGrey(t, img) - m0; math.Abs(d) < 0.2 {
			t.Errorf("wear changed the mean by only %.2f", d)
		}
	})
	t.Run("empty Mat refused", func(t *testing.T) {
		e := gocv.NewMat()
		defer e.Close()
		for _, err := range []error{Shadow(&e, rand.New(rand.NewPCG(1, 1))), Blur(&e, 1), Gain(&e, 1), Noise(&e, 1, nil)} {
			if !errors.Is(err, errNotBGR) {
				t.Errorf("got %v, want errNotBGR", err)
			}
		}
	})
}

// TestTrainLearns trains a tiny network on rendered scenes and scores it
// on 300 scenes it never saw: the loss must fall to under 0.7 of the loss
// of guessing uniformly over the classes, ln(Cells+1), and the row
// accuracy must beat always guessing the most common class by 0.1.
func TestTrainLearns(t *testing.T) {
	a := Arch{InW: 32, InH: 16, Conv: []int{8, 8}, Hidden: 32, Rows: 4, Cells: 8}
	data, err := SceneSamples(a, 1500, 3)
	if err != nil {
		t.Fatal(err)
	}
	test, train := data[:300], data[300:]
	m, err := NewModel(a, NewRand(1))
	if err != nil {
		t.Fatal(err)
	}
	before := Evaluate(m, test)
	stats, err := Train(m, train, TrainConfig{Epochs: 15, Seed: 2, LR: 3e-3, Mirror: true})
	if err != nil {
		t.Fatal(err)
	}
	counts := make([]int, a.Classes())
	for _, s := range test {
		for _, l := range s.Labels {
			counts[l]++
		}
	}
	most := 0
	for _, c := range counts {
		most = max(most, c)
	}
	base := float64(most) / float64(len(test)*a.Rows)
	after := Evaluate(m, test)
	t.Logf("%d epochs; unseen scenes: loss %.3f → %.3f, row accuracy %.3f → %.3f (within one cell %.3f), majority class %.3f",
		len(stats), before.Loss, after.Loss, before.RowAcc, after.RowAcc, after.RowNear, base)
	if uniform := math.Log(float64(a.Classes())); after.Loss > 0.7*uniform {
		t.Errorf("loss %.3f, want below 0.7 × ln(%d) = %.3f", after.Loss, a.Classes(), 0.7*uniform)
	}
	if after.RowAcc < base+0.1 {
		t.Errorf("row accuracy %.3f does not beat the majority class %.3f by 0.1", after.RowAcc, base)
	}
}

func TestMirror(t *testing.T) {
	a := Arch{InW: 8, InH: 2, Conv: []int{1}, Hidden: 1, Rows: 2, Cells: 4}
	in := []float32{0, 1, 2, 3, 4, 5, 6, 7, 10, 11, 12, 13, 14, 15, 16, 17}
	lab := []uint8{0, 4} // cell 0 (x 0–1), absent
	in2, lab2 := make([]float32, 16), make([]uint8, 2)
	mirror(a, in, lab, in2, lab2)
	want := []float32{7, 6, 5, 4, 3, 2, 1, 0, 17, 16, 15, 14, 13, 12, 11, 10}
	for i := range want {
		if in2[i] != want[i] {
			t.Fatalf("mirrored %v, want %v", in2, want)
		}
	}
	if lab2[0] != 3 || lab2[1] != 4 {
		t.Errorf("mirrored labels %v, want [3 4]", lab2)
	}
}

func TestTrainDeterministic(t *testing.T) {
	a := Arch{InW: 16, InH: 8, Conv: []int{3}, Hidden: 8, Rows: 2, Cells: 4}
	data, err := SceneSamples(a, 100, 1)
	if err != nil {
		t.Fatal(err)
	}
	run := func() []byte {
		m, _ := NewModel(a, NewRand(7))
		if _, err := Train(m, data, TrainConfig{Epochs: 2, Seed: 7}); err != nil {
			t.Fatal(err)
		}
		b, err := m.MarshalONNX()
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	if string(run()) != string(run()) {
		t.Error("two runs with the same seed gave different weights")
	}
}

func TestTrainRefusesBadSamples(t *testing.T) {
	a := Arch{InW: 16, InH: 8, Conv: []int{3}, Hidden: 8, Rows: 2, Cells: 4}
	m, _ := NewModel(a, NewRand(1))
	good := Sample{In: make([]float32, 128), Labels: []uint8{0, 4}}
	tests := map[string][]Sample{
		"short input": {good, {In: make([]float32, 5), Labels: []uint8{0, 0}}},
		"bad label":   {good, {In: make([]float32, 128), Labels: []uint8{0, 5}}},
		"one sample":  {good},
	}
	for name, d := range tests {
		t.Run(name, func(t *testing.T) {
			if _, err := Train(m, d, TrainConfig{Epochs: 1}); err == nil {
				t.Error("accepted")
			}
		})
	}
}

// sceneClip is a FrameReader over rendered scenes.
type sceneClip struct {
	scenes []Scene
	i      int
}

func (c *sceneClip) Read(dst *gocv.Mat) (capture.FrameInfo, error) {
	if c.i >= len(c.scenes) {
		return capture.FrameInfo{}, io.EOF
	}
	sc := c.scenes[c.i]
	c.i++
	if err := sc.Render(dst); err != nil {
		return capture.FrameInfo{}, err
	}
	return capture.FrameInfo{Index: c.i - 1, Size: image.Pt(sc.W, sc.H)}, nil
}

// truthLabeler stands in for the classical detector: it reports each
// scene's true centreline, confident on even frames and unsure on odd ones.
type truthLabeler struct {
	clip *sceneClip
	n    int
}

func (l *truthLabeler) Detect(img gocv.Mat, _ vision.Hint) vision.Detection {
	sc := l.clip.scenes[l.clip.i-1]
	l.n++
	conf := 0.95
	if (l.clip.i-1)%2 == 1 {
		conf = 0.3
	}
	return vision.Detection{Found: true, Points: sc.Truth(), Confidence: conf, WidthPx: sc.WidthNear, Method: "classical"}
}

func TestSiteSamples(t *testing.T) {
	a := DefaultArch()
	rng := rand.New(rand.NewPCG(8, 8))
	clip := &sceneClip{}
	for i := 0; i < 12; i++ {
		sc := RandomScene(rng, 640, 480)
		sc.Present = true
		clip.scenes = append(clip.scenes, sc)
	}
	lab := &truthLabeler{clip: clip}
	samples, st, err := SiteSamples(clip, lab, a, SiteConfig{Every: 1, Copies: 2, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if st.Frames != 12 || st.Used != 6 || st.Unsure != 6 || len(samples) != 18 {
		t.Fatalf("stats %+v and %d samples, want 12 frames, 6 used, 6 unsure, 18 samples", st, len(samples))
	}
	for k := 0; k < 6; k++ {
		want := Labels(a, image.Rect(0, 0, 640, 480), clip.scenes[2*k].Truth())
		for c := 0; c < 3; c++ {
			got := samples[3*k+c].Labels
			for r := range want {
				// Shrinking to 160×120 moves a boundary case by one cell at most.
				if d := int(got[r]) - int(want[r]); (got[r] == uint8(a.Absent())) != (want[r] == uint8(a.Absent())) || d > 1 || d < -1 {
					t.Fatalf("frame %d copy %d: labels %v, want %v", 2*k, c, got, want)
				}
			}
		}
		if samplesEqual(samples[3*k].In, samples[3*k+1].In) {
			t.Errorf("frame %d: the degraded copy equals the clean one", 2*k)
		}
	}
}

func samplesEqual(a, b []float32) bool {
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

func TestSynthSamples(t *testing.T) {
	a := DefaultArch()
	s, err := SynthSamples(a, 25, 1)
	if err != nil {
		t.Fatal(err)
	}
	if len(s) != 25 {
		t.Fatalf("%d samples, want 25", len(s))
	}
	present := 0
	for _, smp := range s {
		for _, l := range smp.Labels {
			if int(l) != a.Absent() {
				present++
			}
		}
	}
	// The renderer's camera looks down the aisle, so the stripe crosses
	// all anchor rows of a "weave" frame; "gap" clips may start past the
	// tape's end, so ask for a third of the rows overall.
	if present < 25*a.Rows/3 {
		t.Errorf("stripe on only %d of %d rows", present, 25*a.Rows)
	}
}
