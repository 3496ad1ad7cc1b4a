package main

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"testing"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture/synth"
)

// TestReplayEverySize: `hewline replay -truth` takes a video and a folder
// of images at each frame size of small vehicles' cameras, 160×120 to
// 1280×720, with no option but the truth file: the same rendered dashed
// line (60 frames; the first 0.2 s are the confirmation, so 0.9 is the
// most) is read at recall 0.85 or more from both, and the lossless
// folder and the MJPEG video agree within 0.05.
func TestReplayEverySize(t *testing.T) {
	if testing.Short() {
		t.Skip("renders and replays clips at four sizes")
	}
	recallRe := regexp.MustCompile(`against truth: recall ([0-9.]+)`)
	for _, size := range [][2]int{{160, 120}, {320, 240}, {640, 480}, {1280, 720}} {
		w, h := size[0], size[1]
		t.Run(fmt.Sprintf("%dx%d", w, h), func(t *testing.T) {
			sc, err := synth.Lookup("dashed")
			if err != nil {
				t.Fatal(err)
			}
			sc = sc.Resized(w, h)
			sc.Frames = 60
			dir := t.TempDir()
			clip, tr := filepath.Join(dir, "dashed.avi"), filepath.Join(dir, "dashed.truth.ndjson")
			if err := synth.WriteClip(sc, clip, tr); err != nil {
				t.Fatal(err)
			}
			folder := filepath.Join(dir, "frames")
			writeFrames(t, sc, folder)
			recall := map[string]float64{}
			for name, src := range map[string]string{"video": clip, "folder": folder} {
				code, stdout, stderr := runCmd(t, "replay", "-truth", tr, "-out", filepath.Join(dir, "out-"+name), src)
				if code != 0 {
					t.Fatalf("replay %s: exit %d: %s", name, code, stderr)
				}
				m := recallRe.FindStringSubmatch(stdout)
				if m == nil {
					t.Fatalf("replay %s: no recall in %q", name, stdout)
				}
				recall[name], _ = strconv.ParseFloat(m[1], 64)
			}
			t.Logf("recall: video %.3f, folder %.3f", recall["video"], recall["folder"])
			for name, r := range recall {
				if r < 0.85 {
					t.Errorf("%s: recall %.3f, want 0.85 or more", name, r)
				}
			}
			if d := math.Abs(recall["video"] - recall["folder"]); d > 0.05 {
				t.Errorf("video and folder differ by %.3f in recall", d)
			}
		})
	}
}

// writeFrames renders sc into dir as numbered PNG files.
func writeFrames(t *testing.T, sc synth.Scenario, dir string) {
	t.Helper()
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	r, err := synth.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	m := gocv.NewMat()
	defer m.Close()
	for i := 0; ; i++ {
		if _, err := r.Read(&m); errors.Is(err, io.EOF) {
			return
		} else if err != nil {
			t.Fatal(err)
		}
		if !gocv.IMWrite(filepath.Join(dir, fmt.Sprintf("frame%04d.png", i)), m) {
			t.Fatalf("write frame %d", i)
		}
	}
}
