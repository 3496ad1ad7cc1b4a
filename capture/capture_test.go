package capture_test

import (
	"errors"
	"image"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/matcheck"
)

func TestMain(m *testing.M) { matcheck.Main(m) }

// writeClip writes n frames whose mean grey level encodes the index.
func writeClip(t *testing.T, path, fourcc string, n int, fps float64) {
	t.Helper()
	w, err := gocv.VideoWriterFile(path, fourcc, fps, 160, 120, true)
	if err != nil {
		t.Fatalf("VideoWriterFile: %v", err)
	}
	defer w.Close()
	m := gocv.NewMatWithSize(120, 160, gocv.MatTypeCV8UC3)
	defer m.Close()
	for i := 0; i < n; i++ {
		m.SetTo(gocv.NewScalar(float64(10*i), float64(10*i), float64(10*i), 0))
		if err := w.Write(m); err != nil {
			t.Fatal(err)
		}
	}
}

func readAll(t *testing.T, src capture.FileSource) ([]capture.FrameInfo, []float64, error) {
	t.Helper()
	dst := gocv.NewMat()
	defer dst.Close()
	var infos []capture.FrameInfo
	var means []float64
	for {
		fi, err := src.Read(&dst)
		if err != nil {
			return infos, means, err
		}
		if dst.Type() != gocv.MatTypeCV8UC3 {
			t.Fatalf("frame %d: type %v, want CV_8UC3", fi.Index, dst.Type())
		}
		infos = append(infos, fi)
		means = append(means, dst.Mean().Val1)
	}
}

// ffprobeFrames counts frames with ffprobe (Debian's ffmpeg package), an
// outside decoder, so that our frame count is not checked against itself.
func ffprobeFrames(t *testing.T, path string) int {
	t.Helper()
	if _, err := exec.LookPath("ffprobe"); err != nil {
		t.Log("ffprobe not installed (scripts/setup.sh installs ffmpeg): outside frame count skipped")
		return -1
	}
	out, err := exec.Command("ffprobe", "-v", "error", "-count_frames", "-select_streams", "v:0",
		"-show_entries", "stream=nb_read_frames", "-of", "csv=p=0", path).Output()
	if err != nil {
		t.Fatalf("ffprobe %s: %v", path, err)
	}
	n, err := strconv.Atoi(strings.TrimSpace(string(out)))
	if err != nil {
		t.Fatalf("ffprobe output %q: %v", out, err)
	}
	return n
}

func TestVideoFile(t *testing.T) {
	// tol is the grey-level error a lossy codec may add; frames differ by
	// 10 levels, so a swapped frame still shows.
	for name, tc := range map[string]struct {
		file, fourcc string
		tol          float64
	}{
		"mjpeg avi": {"clip.avi", "MJPG", 4},
		"mp4":       {"clip.mp4", "mp4v", 6},
	} {
		t.Run(name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), tc.file)
			const n, fps = 20, 25.0
			writeClip(t, path, tc.fourcc, n, fps)
			if got := ffprobeFrames(t, path); got >= 0 && got != n {
				t.Fatalf("ffprobe counts %d frames, want %d", got, n)
			}
			src, err := capture.Open(path)
			if err != nil {
				t.Fatal(err)
			}
			defer src.Close()
			info := src.Info()
			if info.Size != image.Pt(160, 120) || info.FPS != fps || info.Kind != "video" {
				t.Errorf("info %+v", info)
			}
			infos, means, err := readAll(t, src)
			if err != io.EOF {
				t.Fatalf("end: %v, want io.EOF", err)
			}
			if len(infos) != n {
				t.Fatalf("read %d frames, want %d", len(infos), n)
			}
			for i, fi := range infos {
				want := time.Duration(float64(i) / fps * float64(time.Second))
				if fi.Index != i || fi.Size != image.Pt(160, 120) {
					t.Errorf("frame %d: %+v", i, fi)
				}
				if d := fi.T - want; d < -time.Millisecond || d > time.Millisecond {
					t.Errorf("frame %d: t %v, want %v", i, fi.T, want)
				}
				if d := means[i] - float64(10*i); d < -tc.tol || d > tc.tol {
					t.Errorf("frame %d: mean %.1f, want about %d (frames out of order?)", i, means[i], 10*i)
				}
			}
		})
	}
}

func TestVideoFileBadInput(t *testing.T) {
	dir := t.TempDir()
	good := filepath.Join(dir, "good.avi")
	writeClip(t, good, "MJPG", 30, 30)
	data, err := os.ReadFile(good)
	if err != nil {
		t.Fatal(err)
	}
	write := func(name string, b []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	cases := map[string]struct {
		path string
		want error
	}{
		"missing":   {filepath.Join(dir, "nope.avi"), capture.ErrNotFound},
		"zero byte": {write("empty.avi", nil), capture.ErrUnreadable},
		"text":      {write("notes.avi", []byte("this is not a video\n")), capture.ErrUnreadable},
		"truncated": {write("cut.avi", data[:len(data)*6/10]), capture.ErrUnreadable},
		"header":    {write("head.avi", data[:200]), capture.ErrUnreadable},
	}
	for name, tc := range cases {
		t.Run(name, func(t *testing.T) {
			src, err := capture.Open(tc.path)
			if err == nil {
				// Some damage shows only while reading: every frame
				// that decodes is delivered, then the error comes.
				defer src.Close()
				_, _, err = readAll(t, src)
			}
			if !errors.Is(err, tc.want) {
				t.Fatalf("error %v, want one wrapping %v", err, tc.want)
			}
			if !strings.Contains(err.Error(), tc.path) {
				t.Errorf("error %q does not name the file", err)
			}
		})
	}
}

func TestImageFolder(t *testing.T) {
	dir := t.TempDir()
	names := []string{"f10.png", "f2.png", "f1.png", "f03.jpg"}
	for i, n := range []int{3, 1, 0, 2} { // grey level by natural order
		img := gocv.NewMatWithSize(48, 64, gocv.MatTypeCV8UC1) // grey input becomes BGR
		img.SetTo(gocv.NewScalar(float64(40*n+20), 0, 0, 0))
		if !gocv.IMWrite(filepath.Join(dir, names[i]), img) {
			t.Fatal("IMWrite")
		}
		img.Close()
	}
	os.WriteFile(filepath.Join(dir, "README.txt"), []byte("skipped"), 0o644)
	src, err := capture.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	infos, means, err := readAll(t, src)
	if err != io.EOF || len(infos) != 4 {
		t.Fatalf("read %d frames, end %v", len(infos), err)
	}
	for i := range infos {
		if d := means[i] - float64(40*i+20); d < -3 || d > 3 {
			t.Errorf("frame %d: mean %.1f, want %d: not in natural order", i, means[i], 40*i+20)
		}
		if infos[i].T != time.Duration(i)*time.Second/capture.DefaultFolderFPS {
			t.Errorf("frame %d: t %v", i, infos[i].T)
		}
	}
}

func TestImageFolderBad(t *testing.T) {
	dir := t.TempDir()
	if _, err := capture.Open(dir); !errors.Is(err, capture.ErrUnreadable) {
		t.Errorf("empty folder: %v", err)
	}
	os.WriteFile(filepath.Join(dir, "a.png"), []byte("not a png"), 0o644)
	if _, err := capture.Open(dir); !errors.Is(err, capture.ErrUnreadable) || !strings.Contains(err.Error(), "a.png") {
		t.Errorf("bad image: %v", err)
	}
}

func TestNaturalLess(t *testing.T) {
	for name, tc := range map[string]struct {
		a, b string
		want bool
	}{
		"numeric":       {"f2", "f10", true},
		"numeric rev":   {"f10", "f2", false},
		"leading zeros": {"f002", "f10", true},
		"tie zeros":     {"f02", "f2", false},
		"prefix":        {"f", "f1", true},
		"letters":       {"a10", "b1", true},
		"equal":         {"x1", "x1", false},
		"multiple runs": {"s1-f9", "s1-f10", true},
	} {
		t.Run(name, func(t *testing.T) {
			if got := capture.NaturalLess(tc.a, tc.b); got != tc.want {
				t.Errorf("NaturalLess(%q, %q) = %v", tc.a, tc.b, got)
			}
		})
	}
}
