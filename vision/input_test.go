package vision

import (
	"image"
	"image/color"
	"strings"
	"testing"

	"gocv.io/x/gocv"
)

func TestDetectBadInput(t *testing.T) {
	det, err := NewClassical(DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	defer det.Close()
	tests := map[string]struct {
		make   func() gocv.Mat
		reason string // substring of the Reason
	}{
		"zero Mat":   {func() gocv.Mat { return gocv.Mat{} }, "empty"},
		"empty":      {func() gocv.Mat { return gocv.NewMat() }, "empty"},
		"float":      {func() gocv.Mat { return gocv.NewMatWithSize(480, 640, gocv.MatTypeCV32FC1) }, "unsupported pixel type"},
		"16-bit":     {func() gocv.Mat { return gocv.NewMatWithSize(480, 640, gocv.MatTypeCV16UC3) }, "unsupported pixel type"},
		"two-column": {func() gocv.Mat { return gocv.NewMatWithSize(480, 2, gocv.MatTypeCV8UC3) }, "too small"},
		"16x12":      {func() gocv.Mat { return gocv.NewMatWithSize(12, 16, gocv.MatTypeCV8UC3) }, "too small"},
		"too wide":   {func() gocv.Mat { return gocv.NewMatWithSize(24, 9000, gocv.MatTypeCV8UC1) }, "too large"},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			img := tc.make()
			defer func() {
				if img.Ptr() != nil {
					img.Close()
				}
			}()
			d := det.Detect(img, Hint{})
			if d.Found || d.Confidence != 0 {
				t.Errorf("Found=%v Confidence=%v for bad input", d.Found, d.Confidence)
			}
			if !strings.Contains(d.Reason, tc.reason) {
				t.Errorf("reason %q, want it to mention %q", d.Reason, tc.reason)
			}
			if d.Method != "classical" {
				t.Errorf("method %q", d.Method)
			}
		})
	}
}

// Frames of other layouts and sizes are measured like BGR ones.
func TestDetectFormats(t *testing.T) {
	det, err := NewClassical(DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	defer det.Close()
	convert := func(code gocv.ColorConversionCode) func(gocv.Mat) gocv.Mat {
		return func(m gocv.Mat) gocv.Mat {
			out := gocv.NewMat()
			gocv.CvtColor(m, &out, code)
			return out
		}
	}
	tests := map[string]struct {
		w, h int
		conv func(gocv.Mat) gocv.Mat
	}{
		"grey":      {640, 480, convert(gocv.ColorBGRToGray)},
		"BGRA":      {640, 480, convert(gocv.ColorBGRToBGRA)},
		"64x48":     {64, 48, nil},
		"3840x2160": {3840, 2160, nil},
		"portrait":  {480, 640, nil},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			s := baseScene(tc.w, tc.h)
			bgr := s.draw(t)
			defer bgr.Close()
			img := bgr
			if tc.conv != nil {
				c := tc.conv(bgr)
				defer c.Close()
				img = c
			}
			checkAgainst(t, s, det.Detect(img, Hint{}))
		})
	}
}

// A region of a larger Mat is not continuous; the detector must read it
// correctly all the same.
func TestDetectRegionOfMat(t *testing.T) {
	s := baseScene(640, 480)
	big := gocv.NewMatWithSize(600, 800, gocv.MatTypeCV8UC3)
	defer big.Close()
	gocv.Rectangle(&big, image.Rect(0, 0, 800, 600), color.RGBA{255, 0, 255, 0}, -1)
	roi := big.Region(image.Rect(100, 60, 740, 540))
	defer roi.Close()
	img := s.draw(t)
	defer img.Close()
	img.CopyTo(&roi)
	if roi.IsContinuous() {
		t.Fatal("test setup: region should not be continuous")
	}
	det, _ := NewClassical(DefaultConfig())
	defer det.Close()
	checkAgainst(t, s, det.Detect(roi, Hint{}))
}

func TestDetectAfterClose(t *testing.T) {
	det, _ := NewClassical(DefaultConfig())
	s := baseScene(320, 240)
	img := s.draw(t)
	defer img.Close()
	if d := det.Detect(img, Hint{}); !d.Found {
		t.Fatal(d.Reason)
	}
	if err := det.Close(); err != nil {
		t.Fatal(err)
	}
	if d := det.Detect(img, Hint{}); d.Found {
		t.Error("found after Close")
	}
	if err := det.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
}

// Size changes reallocate the working images; results stay right.
func TestDetectSizeChanges(t *testing.T) {
	det, _ := NewClassical(DefaultConfig())
	defer det.Close()
	for _, sz := range [][2]int{{640, 480}, {320, 240}, {640, 480}, {1280, 720}, {160, 120}} {
		s := baseScene(sz[0], sz[1])
		img := s.draw(t)
		checkAgainst(t, s, det.Detect(img, Hint{}))
		img.Close()
	}
}

func TestDeterministic(t *testing.T) {
	det, _ := NewClassical(DefaultConfig())
	defer det.Close()
	s := baseScene(640, 480)
	s.cracks = [][4]float64{{0.1, 0.4, 0.35, 1}}
	s.noise = 15
	img := s.draw(t)
	defer img.Close()
	a := det.Detect(img, Hint{})
	b := det.Detect(img, Hint{})
	if a.OffsetPx != b.OffsetPx || a.HeadingDeg != b.HeadingDeg || a.Confidence != b.Confidence {
		t.Errorf("same frame, different results: %+v vs %+v", a, b)
	}
}

func TestConfigValidate(t *testing.T) {
	if err := DefaultConfig().Validate(); err != nil {
		t.Fatalf("default config: %v", err)
	}
	tests := map[string]func(*Config){
		"ref row 0":        func(c *Config) { c.RefRow = 0 },
		"ref row 1.2":      func(c *Config) { c.RefRow = 1.2 },
		"roi inverted":     func(c *Config) { c.ROI.Top, c.ROI.Bottom = 0.9, 0.2 },
		"roi outside":      func(c *Config) { c.ROI.Right = 1.5 },
		"polarity":         func(c *Config) { c.Polarity = 7 },
		"colour name":      func(c *Config) { c.TapeColour = "plaid" },
		"colour grey":      func(c *Config) { c.TapeColour = "bgr:128,128,128" },
		"colour range":     func(c *Config) { c.TapeColour = "bgr:300,0,0" },
		"both width hints": func(c *Config) { c.WidthHintPx, c.WidthHintFrac = 20, 0.05 },
		"negative width":   func(c *Config) { c.WidthHintPx = -3 },
		"contrast":         func(c *Config) { c.MinContrast = 0 },
		"sauvola k":        func(c *Config) { c.SauvolaK = 2 },
		"work width":       func(c *Config) { c.WorkWidth = 10 },
		"iterations":       func(c *Config) { c.Iterations = 0 },
		"min span":         func(c *Config) { c.MinSpan = 0 },
	}
	for name, mut := range tests {
		t.Run(name, func(t *testing.T) {
			c := DefaultConfig()
			mut(&c)
			if err := c.Validate(); err == nil {
				t.Error("accepted")
			}
			if _, err := NewClassical(c); err == nil {
				t.Error("NewClassical accepted")
			}
		})
	}
	for _, ok := range []string{"", "none", "yellow", "Blue", "bgr:0,200,240"} {
		c := DefaultConfig()
		c.TapeColour = ok
		if err := c.Validate(); err != nil {
			t.Errorf("tape colour %q: %v", ok, err)
		}
	}
}
