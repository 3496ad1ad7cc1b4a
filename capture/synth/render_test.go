package synth

import (
	"bytes"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/truth"
)

// rowCoverage measures the stripe in one row of a rendered frame from the
// blue channel, where floor and yellow tape differ most: each pixel's
// share of tape is (floor − value)/(floor − tape). It returns the summed
// share (the width in pixels) and the share-weighted mean x (the centre).
func rowCoverage(buf []byte, w, y int, floorB, tapeB float64) (width, centre float64) {
	var sx float64
	for x := 0; x < w; x++ {
		c := (floorB - float64(buf[3*(y*w+x)])) / (floorB - tapeB)
		if c < 0.02 {
			continue
		}
		width += c
		sx += c * float64(x)
	}
	if width == 0 {
		return 0, math.NaN()
	}
	return width, sx / width
}

// TestRenderedStripeMatchesTruth renders clean scenes (flat floor) and
// measures the stripe in the pixels: its width within 1 px of the truth
// width, its centre within 0.5 px of the truth centreline on every
// sampled row where the whole stripe is inside the image.
func TestRenderedStripeMatchesTruth(t *testing.T) {
	curve := straightScene()
	curve.Name = "test-curve"
	curve.Stripe.Path = Path{Segments: []Segment{Straight(1.5), Arc(1.5, 60), Straight(5)}}
	curve.Motion = Motion{SpeedMps: 1, StartM: 0.5, WeaveAmpM: 0.08, WeaveWavelengthM: 3}
	curve.Frames = 40
	weave := straightScene()
	weave.Motion = Motion{SpeedMps: 1, StartM: 0.5, WeaveAmpM: 0.15, WeaveWavelengthM: 4}
	weave.Name = "test-weave"
	weave.Frames = 40
	wide := straightScene()
	wide.Stripe.WidthM = 0.1
	wide.Camera.HeightM, wide.Camera.PitchDeg = 0.9, 45
	wide.Name = "test-wide"
	wide.Frames = 2
	// rows exposed at their own times while the cart weaves and shakes:
	// the truth must follow the same per-row poses as the pixels
	rolling := straightScene()
	rolling.Name = "test-rolling"
	rolling.Motion = Motion{SpeedMps: 2, StartM: 0.5, WeaveAmpM: 0.15, WeaveWavelengthM: 3, ShakeDeg: 2}
	rolling.Light.LineTimeS = 1.0 / (30 * 500)
	rolling.Light.RollingPose = true
	rolling.Frames = 40
	// width varying smoothly along the line: the truth width is the local
	// width (not at a patch's sudden change of width, where a row crossing
	// the line at an angle sees one edge of each width)
	uneven := straightScene()
	uneven.Name = "test-uneven"
	uneven.Stripe.WidthVar = 0.3
	uneven.Motion = Motion{SpeedMps: 1, StartM: 0.5, WeaveAmpM: 0.1, WeaveWavelengthM: 3}
	uneven.Frames = 40
	for _, sc := range []Scenario{weave, curve, wide, rolling, uneven} {
		t.Run(sc.Name, func(t *testing.T) {
			r, err := New(sc)
			if err != nil {
				t.Fatal(err)
			}
			floorB := 255 * sc.Floor.Colour.B
			tapeB := 255 * sc.Stripe.Colour.B
			m := gocv.NewMat()
			defer m.Close()
			var checked int
			var worstC, worstW float64
			for fi := 0; fi < sc.Frames; fi += 3 {
				for r.next < fi+1 {
					if _, err := r.Read(&m); err != nil {
						t.Fatal(err)
					}
				}
				f := r.Truth()
				for _, p := range f.Points {
					y := int(p[1])
					width, centre := rowCoverage(r.Bytes(), sc.Width, y, floorB, tapeB)
					// only rows with the whole stripe inside the image
					if centre-width < 2 || centre+width > float64(sc.Width)-3 {
						continue
					}
					checked++
					worstC = math.Max(worstC, math.Abs(centre-p[0]))
					if y == int(r.refRow()) {
						worstW = math.Max(worstW, math.Abs(width-f.WidthPx))
					}
					if math.Abs(centre-p[0]) > 0.5 {
						t.Errorf("frame %d row %d: rendered centre %.3f, truth %.3f", fi, y, centre, p[0])
					}
					if y == int(r.refRow()) && math.Abs(width-f.WidthPx) > 1 {
						t.Errorf("frame %d ref row: rendered width %.3f, truth %.3f", fi, width, f.WidthPx)
					}
				}
			}
			t.Logf("%d rows: worst centre error %.3f px, worst width error at the reference row %.3f px", checked, worstC, worstW)
			if checked < 100 {
				t.Errorf("only %d rows checked", checked)
			}
		})
	}
}

// TestGapVisibility: in "gap" the truth says invisible exactly when, in
// the rendered pixels, fewer than half the near-half rows show tape; and
// the invisible frames form one run of at least 0.6 s (the gap) and a run
// to the last frame (the end of the line).
func TestGapVisibility(t *testing.T) {
	sc, err := Lookup("gap")
	if err != nil {
		t.Fatal(err)
	}
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	m := gocv.NewMat()
	defer m.Close()
	var vis []bool
	for {
		if _, err := r.Read(&m); err == io.EOF {
			break
		} else if err != nil {
			t.Fatal(err)
		}
		f := r.Truth()
		var rows, tape int
		buf := r.Bytes()
		for y := sc.Height - 2; y >= sc.Height/2; y -= 2 {
			rows++
			for x := 0; x < sc.Width; x++ {
				b, rr := buf[3*(y*sc.Width+x)], buf[3*(y*sc.Width+x)+2]
				if b < 60 && rr > 180 { // yellow: little blue, much red
					tape++
					break
				}
			}
		}
		frac := float64(tape) / float64(rows)
		if math.Abs(frac-0.5) > 0.02 && f.Visible != (frac >= 0.5) {
			t.Errorf("frame %d: visible %v but tape on %.2f of near rows", f.Frame, f.Visible, frac)
		}
		if !f.Visible && !slices.Contains(f.Tags, "gap") && !slices.Contains(f.Tags, "end") {
			t.Errorf("frame %d: invisible without a gap or end tag: %v", f.Frame, f.Tags)
		}
		vis = append(vis, f.Visible)
	}
	var runs [][2]int
	for i := 0; i < len(vis); i++ {
		if vis[i] {
			continue
		}
		j := i
		for j < len(vis) && !vis[j] {
			j++
		}
		runs = append(runs, [2]int{i, j})
		i = j
	}
	if len(runs) != 2 {
		t.Fatalf("invisible runs %v, want two (gap, end)", runs)
	}
	if n := runs[0][1] - runs[0][0]; float64(n)/sc.FPS < 0.6 {
		t.Errorf("gap run %v lasts %.2f s, want ≥ 0.6", runs[0], float64(n)/sc.FPS)
	}
	if runs[1][1] != len(vis) || runs[0][0] == 0 {
		t.Errorf("runs %v: want the line visible at the start and gone at the end", runs)
	}
}

func readAll(t *testing.T, sc Scenario) []byte {
	t.Helper()
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	m := gocv.NewMat()
	defer m.Close()
	var all []byte
	for {
		if _, err := r.Read(&m); err == io.EOF {
			return all
		} else if err != nil {
			t.Fatal(err)
		}
		all = append(all, m.ToBytes()...)
	}
}

// TestDeterministic: the same scenario and seed give the same bytes, also
// with one worker instead of several; another seed changes the floor.
func TestDeterministic(t *testing.T) {
	sc, _ := Lookup("weave")
	sc.Frames = 3
	sc.Light.NoiseSD = 3
	a, b := readAll(t, sc), readAll(t, sc)
	if !bytes.Equal(a, b) {
		t.Fatal("same seed, different frames")
	}
	r, _ := New(sc)
	r.workers = 1
	m := gocv.NewMat()
	defer m.Close()
	var one []byte
	for range 3 {
		if _, err := r.Read(&m); err != nil {
			t.Fatal(err)
		}
		one = append(one, m.ToBytes()...)
	}
	if !bytes.Equal(a, one) {
		t.Error("one worker renders differently")
	}
	sc.Seed++
	if bytes.Equal(a, readAll(t, sc)) {
		t.Error("another seed, same frames")
	}
}

func TestReadEOFAndInfo(t *testing.T) {
	sc := straightScene()
	sc.Frames = 2
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	m := gocv.NewMatWithSize(10, 10, gocv.MatTypeCV8UC1) // wrong size and type: replaced
	defer m.Close()
	for i := 0; i < 2; i++ {
		fi, err := r.Read(&m)
		if err != nil || fi.Index != i || fi.Size.X != 640 || m.Type() != gocv.MatTypeCV8UC3 || m.Rows() != 480 {
			t.Fatalf("frame %d: %+v %v type %v", i, fi, err, m.Type())
		}
	}
	if _, err := r.Read(&m); err != io.EOF {
		t.Fatalf("after the last frame: %v, want io.EOF", err)
	}
	if in := r.Info(); in.Kind != "synthetic" || in.Name != "synthetic:test-straight" || in.Frames != 2 {
		t.Errorf("info %+v", in)
	}
	if h := r.Header(); h.RefRow != 384 || h.LookaheadM != 1 || h.Format != truth.Format {
		t.Errorf("header %+v", h)
	}
}

func TestLookup(t *testing.T) {
	names := Names()
	if !slices.IsSorted(names) || !slices.Contains(names, "weave") || !slices.Contains(names, "gap") {
		t.Fatalf("names %v", names)
	}
	if _, err := Lookup("no-such-scene"); !errors.Is(err, capture.ErrNotFound) {
		t.Errorf("unknown name: %v, want ErrNotFound", err)
	}
	for name, mod := range map[string]func(sc *Scenario){
		"pitch 90":         func(sc *Scenario) { sc.Camera.PitchDeg = 90 },
		"pitch -30":        func(sc *Scenario) { sc.Camera.PitchDeg = -30 },
		"jpeg quality 101": func(sc *Scenario) { sc.JPEGQuality = 101 },
		"rolling, no line": func(sc *Scenario) { sc.Light.RollingPose = true },
		"prop shape":       func(sc *Scenario) { sc.Props = []Prop{{Shape: "tree", WidthM: 1, HeightM: 1}} },
		"prop size":        func(sc *Scenario) { sc.Props = []Prop{{Shape: "post", HeightM: 1}} },
		"dots overlap":     func(sc *Scenario) { sc.Stripe.DotPitchM = 0.01 },
	} {
		bad := straightScene()
		mod(&bad)
		if _, err := New(bad); !errors.Is(err, ErrScenario) {
			t.Errorf("%s: %v, want ErrScenario", name, err)
		}
	}
}

// TestScenarios renders the first frame of every built-in scenario and
// checks the common promises: size, length, a visible stripe at the start.
func TestScenarios(t *testing.T) {
	for _, name := range Names() {
		t.Run(name, func(t *testing.T) {
			sc, err := Lookup(name)
			if err != nil {
				t.Fatal(err)
			}
			if sc.Frames < 200 || sc.Notes == "" || sc.Name != name {
				t.Errorf("frames %d notes %q name %q", sc.Frames, sc.Notes, sc.Name)
			}
			r, err := New(sc)
			if err != nil {
				t.Fatal(err)
			}
			m := gocv.NewMat()
			defer m.Close()
			if _, err := r.Read(&m); err != nil {
				t.Fatal(err)
			}
			if f := r.Truth(); !f.Visible || len(f.Points) < 20 {
				t.Errorf("frame 0: visible %v with %d points", f.Visible, len(f.Points))
			}
			// the same scene at the small and large sizes the suite uses:
			// rendered at 160×120, truth only at 1280×720
			small, err := New(sc.Resized(160, 120))
			if err != nil {
				t.Fatal(err)
			}
			if _, err := small.Read(&m); err != nil || m.Cols() != 160 || m.Rows() != 120 {
				t.Fatalf("160x120: %v, %dx%d", err, m.Cols(), m.Rows())
			}
			if f := small.Truth(); !f.Visible || len(f.Points) < 15 {
				t.Errorf("160x120 frame 0: visible %v with %d points", f.Visible, len(f.Points))
			}
			big, err := New(sc.Resized(1280, 720))
			if err != nil {
				t.Fatal(err)
			}
			if f := big.truthAt(0, big.cartAt(0)); !f.Visible || len(f.Points) < 60 {
				t.Errorf("1280x720 frame 0: visible %v with %d points", f.Visible, len(f.Points))
			}
		})
	}
}

// TestResized: half the resolution halves every image-plane truth value
// and leaves the floor values alone.
func TestResized(t *testing.T) {
	sc, _ := Lookup("weave")
	sc.Frames = 1
	full, _ := New(sc)
	half, _ := New(sc.Resized(320, 240))
	m := gocv.NewMat()
	defer m.Close()
	full.Read(&m)
	half.Read(&m)
	if m.Cols() != 320 || m.Rows() != 240 {
		t.Fatalf("resized frame %dx%d", m.Cols(), m.Rows())
	}
	a, b := full.Truth(), half.Truth()
	if math.Abs(a.OffsetPx/2-b.OffsetPx) > 0.5 || math.Abs(a.WidthPx/2-b.WidthPx) > 0.5 ||
		math.Abs(a.HeadingDeg-b.HeadingDeg) > 0.5 || a.OffsetM != b.OffsetM {
		t.Errorf("full %+v\nhalf %+v", a, b)
	}
}

// TestResizedWide: 16:9 from 4:3 keeps square pixels and the horizontal
// field of view (the sensor is cropped top and bottom), and a rolling
// shutter still reads the frame out in the same time.
func TestResizedWide(t *testing.T) {
	sc, _ := Lookup("rolling-shutter")
	w := sc.Resized(1280, 720)
	c := w.Camera
	if c.Fx != 1000 || c.Fy != 1000 || c.Cx != 640 || c.Cy != 360 {
		t.Errorf("1280x720 intrinsics %+v", c)
	}
	if a, b := sc.Light.LineTimeS*480, w.Light.LineTimeS*720; math.Abs(a-b) > 1e-12 {
		t.Errorf("readout %.6f s at 480 rows, %.6f s at 720", a, b)
	}
}

// TestWriteClip writes a short clip and reads it back through OpenCV's
// own video reader and the truth reader.
func TestWriteClip(t *testing.T) {
	sc, _ := Lookup("gap")
	sc.Frames = 12
	dir := t.TempDir()
	vp, tp := filepath.Join(dir, "gap.avi"), filepath.Join(dir, "gap.ndjson")
	if err := WriteClip(sc, vp, tp); err != nil {
		t.Fatal(err)
	}
	vc, err := gocv.VideoCaptureFile(vp)
	if err != nil {
		t.Fatal(err)
	}
	defer vc.Close()
	m := gocv.NewMat()
	defer m.Close()
	n := 0
	for vc.Read(&m) && !m.Empty() {
		if m.Cols() != 640 || m.Rows() != 480 {
			t.Fatalf("frame %d is %dx%d", n, m.Cols(), m.Rows())
		}
		n++
	}
	if n != sc.Frames {
		t.Errorf("read back %d frames, want %d", n, sc.Frames)
	}
	if fps := vc.Get(gocv.VideoCaptureFPS); math.Abs(fps-sc.FPS) > 0.01 {
		t.Errorf("fps %.3f, want %.0f", fps, sc.FPS)
	}
	f, err := os.Open(tp)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	h, frames, err := truth.Read(f)
	if err != nil || h.Scenario != "gap" || len(frames) != sc.Frames || h.Frames != sc.Frames {
		t.Errorf("truth: %v, header %+v, %d frames", err, h, len(frames))
	}
}
