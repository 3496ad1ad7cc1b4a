package calib

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func validFile(t *testing.T) *File {
	t.Helper()
	l := Lens{Fx: 532.8, Fy: 532.9, Cx: 342.5, Cy: 233.9, Dist: [5]float64{-0.281, 0.0291, 0.0012, -0.00014, 0.155},
		RMSPx: 0.2, Views: 13, Board: BoardSpec{Cols: 9, Rows: 6, Square: 25}}
	fl, err := FloorFromPose(l, 900, 40)
	if err != nil {
		t.Fatal(err)
	}
	fl.LookaheadMM, fl.TapeWidthMM = 1200, 50
	return &File{Format: FormatV1, Tool: "hewline test", Created: "2026-01-02T03:04:05Z", ImageSize: [2]int{640, 480}, Lens: &l, Floor: &fl}
}

func TestSaveLoadRoundTrip(t *testing.T) {
	f := validFile(t)
	p := filepath.Join(t.TempDir(), "cam.calib.json")
	if err := f.Save(p); err != nil {
		t.Fatal(err)
	}
	g, err := Load(p)
	if err != nil {
		t.Fatal(err)
	}
	if *g.Lens != *f.Lens || *g.Floor != *f.Floor || g.ImageSize != f.ImageSize {
		t.Errorf("loaded %+v, saved %+v", g, f)
	}
	if err := g.CheckFrameSize(640, 480); err != nil {
		t.Error(err)
	}
	err = g.CheckFrameSize(1280, 720)
	if !errors.Is(err, ErrFrameSize) || !strings.Contains(err.Error(), "calibrate again") {
		t.Errorf("wrong frame size: err = %v", err)
	}
	// No temporary files left behind.
	ents, _ := os.ReadDir(filepath.Dir(p))
	if len(ents) != 1 {
		t.Errorf("folder holds %d entries after Save, want 1", len(ents))
	}
}

// TestExampleFile keeps testdata/example.calib.json (the documented
// example) loadable.
func TestExampleFile(t *testing.T) {
	f, err := Load("testdata/example.calib.json")
	if err != nil {
		t.Fatal(err)
	}
	if f.Lens == nil || f.Floor == nil {
		t.Fatal("example lacks a section")
	}
}

func TestLoadRefuses(t *testing.T) {
	singular := Homography{1, 2, 3, 2, 4, 6, 0, 0, 1} // rows 1 and 2 dependent
	cases := map[string]struct {
		edit func(f *File)
		raw  string // used instead of edit when set
		want string
	}{
		"negative focal length": {edit: func(f *File) { f.Lens.Fx = -532 }, want: "more than 0"},
		"zero focal length":     {edit: func(f *File) { f.Lens.Fy = 0 }, want: "more than 0"},
		"NaN in the file":       {raw: `{"format":"hewline-calib/1","image_size":[640,480],"lens":{"fx":NaN}}`, want: "not a readable calibration"},
		"truncated":             {raw: `{"format":"hewline-calib/1","image_si`, want: "not a readable calibration"},
		"unknown field":         {raw: `{"format":"hewline-calib/1","image_size":[640,480],"lens":{"focal":5}}`, want: "not a readable calibration"},
		"principal point out":   {edit: func(f *File) { f.Lens.Cx = 700 }, want: "outside the 640x480 image"},
		"wild distortion":       {edit: func(f *File) { f.Lens.Dist[0] = -3 }, want: "folds over"},
		"huge distortion":       {edit: func(f *File) { f.Lens.Dist[4] = 1e6 }, want: "out of range"},
		"zero image size":       {edit: func(f *File) { f.ImageSize = [2]int{0, 480} }, want: "image_size"},
		"wrong format":          {edit: func(f *File) { f.Format = "other/2" }, want: "format"},
		"singular homography":   {edit: func(f *File) { f.Floor.H = singular }, want: "not invertible"},
		"zero homography":       {edit: func(f *File) { f.Floor.H = Homography{} }, want: "not invertible"},
		"overflowing number":    {raw: `{"format":"hewline-calib/1","image_size":[640,480],"lens":{"fx":1e999}}`, want: "not a readable calibration"},
		"flipped homography":    {edit: func(f *File) { f.Floor.H = f.Floor.H.neg() }, want: "above the horizon"},
		"unknown method":        {edit: func(f *File) { f.Floor.Method = "guess" }, want: "method"},
		"negative tape width":   {edit: func(f *File) { f.Floor.TapeWidthMM = -50 }, want: "negative"},
		"bad date":              {edit: func(f *File) { f.Created = "yesterday" }, want: "RFC 3339"},
		"empty":                 {edit: func(f *File) { f.Lens, f.Floor = nil, nil }, want: "neither"},
	}
	for name, c := range cases {
		t.Run(name, func(t *testing.T) {
			p := filepath.Join(t.TempDir(), "bad.json")
			raw := []byte(c.raw)
			if c.raw == "" {
				f := validFile(t)
				c.edit(f)
				var err error
				if raw, err = json.Marshal(f); err != nil {
					t.Fatal(err)
				}
			}
			if err := os.WriteFile(p, raw, 0o644); err != nil {
				t.Fatal(err)
			}
			_, err := Load(p)
			if err == nil {
				t.Fatal("loaded without complaint")
			}
			if !strings.Contains(err.Error(), p) || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %q should name the file and say %q", err, c.want)
			}
			if !errors.Is(err, ErrInvalid) {
				t.Errorf("error %q does not wrap ErrInvalid", err)
			}
		})
	}
}

func (h Homography) neg() Homography {
	for i := range h {
		h[i] = -h[i]
	}
	return h
}

// TestValidateNonFinite: values JSON cannot carry (NaN, Inf) may still
// reach a File built in code; Validate refuses them.
func TestValidateNonFinite(t *testing.T) {
	for name, edit := range map[string]func(f *File){
		"NaN fx":         func(f *File) { f.Lens.Fx = math.NaN() },
		"Inf k2":         func(f *File) { f.Lens.Dist[1] = math.Inf(-1) },
		"NaN in H":       func(f *File) { f.Floor.H[4] = math.NaN() },
		"Inf in H":       func(f *File) { f.Floor.H[0] = math.Inf(1) },
		"NaN look-ahead": func(f *File) { f.Floor.LookaheadMM = Millimetres(math.NaN()) },
	} {
		f := validFile(t)
		edit(f)
		if err := f.Validate(); !errors.Is(err, ErrInvalid) || !strings.Contains(err.Error(), "finite") {
			t.Errorf("%s: err = %v, want a 'finite' ErrInvalid", name, err)
		}
	}
}

// TestWriteExample rewrites testdata/example.calib.json when
// HEWLINE_UPDATE=1 (an invented camera 0.9 m above the floor).
func TestWriteExample(t *testing.T) {
	if os.Getenv("HEWLINE_UPDATE") != "1" {
		t.Skip("set HEWLINE_UPDATE=1 to rewrite testdata/example.calib.json")
	}
	l := Lens{Fx: 610, Fy: 600, Cx: 328, Cy: 236, Dist: [5]float64{-0.22, 0.06, 0.0008, -0.0006, 0}, RMSPx: 0.21, Views: 14, Board: BoardSpec{Cols: 9, Rows: 6, Square: 25}}
	fl, err := FloorFromPose(l, 900, 40)
	if err != nil {
		t.Fatal(err)
	}
	fl.LookaheadMM, fl.TapeWidthMM = 1200, 50
	f := &File{Format: FormatV1, Tool: "hewline 0.1.0-dev", Created: "2026-01-02T03:04:05Z", ImageSize: [2]int{640, 480}, Lens: &l, Floor: &fl}
	if err := f.Save("testdata/example.calib.json"); err != nil {
		t.Fatal(err)
	}
}
