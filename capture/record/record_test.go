package record_test

import (
	"bufio"
	"errors"
	"fmt"
	"image"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/capturetest"
	"github.com/hewline/hewline/capture/matcheck"
	"github.com/hewline/hewline/capture/record"
	"gocv.io/x/gocv"
)

const childEnv = "HEWLINE_RECORD_CHILD_DIR"

func TestMain(m *testing.M) {
	if dir := os.Getenv(childEnv); dir != "" {
		recordUntilKilled(dir)
		return
	}
	matcheck.Main(m)
}

var size = image.Pt(320, 240)

// frameTime: a camera at 30 fps with a little jitter, so that the sidecar
// times are not simply i/30 (what a container would give).
func frameTime(i int) time.Duration {
	return time.Duration(i)*time.Second/30 + time.Duration(i%3)*time.Millisecond + 7*time.Nanosecond
}

func writeFrames(t *testing.T, r *record.Recorder, from, n int) {
	t.Helper()
	for i := from; i < from+n; i++ {
		m := capturetest.PatternMat(size, i)
		err := r.Write(m, capture.FrameInfo{Index: i, T: frameTime(i), Size: size})
		m.Close()
		if err != nil {
			t.Fatal(err)
		}
	}
}

// countFrames reads a clip back with OpenCV and returns its frame count
// and the frame numbers drawn into the frames.
func countFrames(t *testing.T, path string) (int, []int) {
	t.Helper()
	vc, err := gocv.VideoCaptureFile(path)
	if err != nil {
		if vc != nil {
			vc.Close()
		}
		t.Fatalf("open %s: %v", path, err)
	}
	defer vc.Close()
	m := gocv.NewMat()
	defer m.Close()
	var nums []int
	for vc.Read(&m) && !m.Empty() {
		k, _ := capturetest.FrameNumber(m)
		nums = append(nums, k)
	}
	return len(nums), nums
}

func plenty(string) (uint64, error) { return 100 << 30, nil }

// Sixty frames come back from the AVI, in order, and the sidecar gives back
// the exact source times.
func TestRecordAndReadBack(t *testing.T) {
	dir := t.TempDir()
	r, err := record.New(record.Options{Dir: dir, FreeSpace: plenty})
	if err != nil {
		t.Fatal(err)
	}
	writeFrames(t, r, 0, 60)
	if err := r.Close(); err != nil {
		t.Fatal(err)
	}
	files := r.Files()
	if len(files) != 1 || filepath.Base(files[0]) != "rec-0001.avi" {
		t.Fatalf("files %v", files)
	}
	n, nums := countFrames(t, files[0])
	if n != 60 {
		t.Fatalf("read back %d frames, want 60", n)
	}
	for i, k := range nums {
		if k != i {
			t.Fatalf("frame %d carries number %d", i, k)
		}
	}
	ts, err := record.ReadSidecar(record.SidecarPath(files[0]))
	if err != nil {
		t.Fatal(err)
	}
	if len(ts) != 60 {
		t.Fatalf("sidecar has %d times", len(ts))
	}
	for i, d := range ts {
		if d != frameTime(i) {
			t.Errorf("frame %d: sidecar %v, want %v", i, d, frameTime(i))
		}
	}
	h, _, err := record.ReadSidecarFull(record.SidecarPath(files[0]))
	if err != nil || h.Width != 320 || h.Height != 240 || h.Video != "rec-0001.avi" || h.FPS != 30 {
		t.Errorf("header %+v %v", h, err)
	}
	// A second session in the same folder continues the numbering.
	r2, err := record.New(record.Options{Dir: dir, FreeSpace: plenty})
	if err != nil {
		t.Fatal(err)
	}
	writeFrames(t, r2, 0, 2)
	r2.Close()
	if f := r2.Files(); len(f) != 1 || filepath.Base(f[0]) != "rec-0002.avi" {
		t.Errorf("second session wrote %v", f)
	}
}

// An ordinary player's demuxer (FFmpeg's ffprobe, outside the project)
// sees an MJPEG stream with every frame.
func TestClipPlaysInFFprobe(t *testing.T) {
	probe, err := exec.LookPath("ffprobe")
	if err != nil {
		t.Skip("SKIPPED LOUDLY: ffprobe not installed (scripts/setup.sh installs ffmpeg); the AVI was not checked by an outside player")
	}
	dir := t.TempDir()
	r, err := record.New(record.Options{Dir: dir, FreeSpace: plenty})
	if err != nil {
		t.Fatal(err)
	}
	writeFrames(t, r, 0, 45)
	r.Close()
	out, err := exec.Command(probe, "-v", "error", "-count_frames", "-select_streams", "v:0",
		"-show_entries", "stream=codec_name,nb_read_frames,width,height", "-of", "default=nw=1",
		r.Files()[0]).CombinedOutput()
	if err != nil {
		t.Fatalf("ffprobe: %v: %s", err, out)
	}
	for _, want := range []string{"codec_name=mjpeg", "width=320", "height=240", "nb_read_frames=45"} {
		if !strings.Contains(string(out), want) {
			t.Errorf("ffprobe output lacks %q:\n%s", want, out)
		}
	}
}

func TestRotation(t *testing.T) {
	tests := []struct {
		name   string
		opt    record.Options
		frames int
		check  func(t *testing.T, counts []int, sizes []int64)
	}{
		{"every second of source time", record.Options{RotateEvery: time.Second}, 70, func(t *testing.T, counts []int, _ []int64) {
			// frameTime(30) ≥ 1 s: clips of 30, 30 and 10 frames.
			if fmt.Sprint(counts) != "[30 30 10]" {
				t.Errorf("clip frame counts %v, want [30 30 10]", counts)
			}
		}},
		{"every 50 kB", record.Options{RotateBytes: 50_000}, 200, func(t *testing.T, counts []int, sizes []int64) {
			if len(counts) < 2 {
				t.Fatalf("no rotation: %v bytes", sizes)
			}
			// The writer buffers and its encoder's rate control varies
			// frame sizes, so the size is estimated: a clip stays within
			// half the limit of it (the free-space check, not rotation,
			// is what protects the disk).
			for i, s := range sizes {
				if s > 75_000 {
					t.Errorf("clip %d has %d bytes, far over the limit", i+1, s)
				}
				if i < len(sizes)-1 && s < 20_000 {
					t.Errorf("clip %d closed at %d bytes, far below the limit", i+1, s)
				}
			}
			t.Logf("clip sizes %v", sizes)
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tc.opt.Dir = t.TempDir()
			tc.opt.FreeSpace = plenty
			r, err := record.New(tc.opt)
			if err != nil {
				t.Fatal(err)
			}
			writeFrames(t, r, 0, tc.frames)
			r.Close()
			var counts []int
			var sizes []int64
			total := 0
			for i, f := range r.Files() {
				if want := fmt.Sprintf("rec-%04d.avi", i+1); filepath.Base(f) != want {
					t.Errorf("clip %d named %s, want %s", i, filepath.Base(f), want)
				}
				n, nums := countFrames(t, f)
				ts, err := record.ReadSidecar(record.SidecarPath(f))
				if err != nil || len(ts) != n {
					t.Errorf("%s: %d frames, sidecar %d (%v)", f, n, len(ts), err)
				}
				for j, k := range nums {
					if k != total+j || ts[j] != frameTime(total+j) {
						t.Errorf("%s frame %d: number %d time %v", f, j, k, ts[j])
					}
				}
				total += n
				st, _ := os.Stat(f)
				counts = append(counts, n)
				sizes = append(sizes, st.Size())
			}
			if total != tc.frames {
				t.Errorf("%d frames in all clips, want %d", total, tc.frames)
			}
			tc.check(t, counts, sizes)
		})
	}
}

// When the disk fills, recording stops with ErrDiskFull, the clip so far is
// finalised and readable, and Write keeps returning nil.
func TestDiskFullStopsRecordingNotTheCaller(t *testing.T) {
	dir := t.TempDir()
	calls := 0
	free := func(string) (uint64, error) {
		calls++
		if calls <= 2 { // New and the first clip
			return 1 << 30, nil
		}
		return 10 << 20, nil // 10 MiB: below the 256 MiB default
	}
	r, err := record.New(record.Options{Dir: dir, FreeSpace: free, CheckEvery: 10})
	if err != nil {
		t.Fatal(err)
	}
	writeFrames(t, r, 0, 40) // Write returning an error fails here
	if !r.Stopped() || !errors.Is(r.Err(), record.ErrDiskFull) {
		t.Fatalf("stopped %v err %v, want ErrDiskFull", r.Stopped(), r.Err())
	}
	if r.Frames() != 10 {
		t.Errorf("recorded %d frames, want 10 (stopped at the first check)", r.Frames())
	}
	if err := r.Close(); !errors.Is(err, record.ErrDiskFull) {
		t.Errorf("Close: %v", err)
	}
	if n, _ := countFrames(t, r.Files()[0]); n != 10 {
		t.Errorf("clip holds %d frames, want 10", n)
	}
	// Already too full at start: a stopped Recorder, no file.
	r2, err := record.New(record.Options{Dir: t.TempDir(), FreeSpace: func(string) (uint64, error) { return 0, nil }})
	if err != nil {
		t.Fatal(err)
	}
	writeFrames(t, r2, 0, 3)
	if !errors.Is(r2.Err(), record.ErrDiskFull) || len(r2.Files()) != 0 {
		t.Errorf("full disk at start: err %v files %v", r2.Err(), r2.Files())
	}
	r2.Close()
}

func TestRejectsNonBGR(t *testing.T) {
	r, err := record.New(record.Options{Dir: t.TempDir(), FreeSpace: plenty})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	grey := gocv.NewMatWithSize(240, 320, gocv.MatTypeCV8UC1)
	defer grey.Close()
	empty := gocv.NewMat()
	defer empty.Close()
	for _, m := range []gocv.Mat{grey, empty} {
		if err := r.Write(m, capture.FrameInfo{}); err == nil {
			t.Error("accepted a frame that is not 8-bit BGR")
		}
	}
}

// recordUntilKilled is the child of TestKillKeepsEarlierClips: it records
// clips of 9 frames and says on stdout each time a clip begins.
func recordUntilKilled(dir string) {
	r, err := record.New(record.Options{Dir: dir, FreeSpace: plenty, RotateEvery: 300 * time.Millisecond})
	if err != nil {
		fmt.Println("error", err)
		os.Exit(1)
	}
	m := capturetest.PatternMat(size, 0)
	for i, clips := 0, 0; ; i++ {
		// 30 fps source time: a new clip starts every 9 frames.
		if err := r.Write(m, capture.FrameInfo{Index: i, T: time.Duration(i) * time.Second / 30}); err != nil {
			fmt.Println("error", err)
			os.Exit(1)
		}
		if n := len(r.Files()); n > clips {
			clips = n
			fmt.Println("clip", n) // clip n is being written
		}
		if len(r.Files()) > 3 {
			time.Sleep(10 * time.Millisecond) // wait for the kill inside clip 4
		}
	}
}

// A recorder killed mid-clip leaves every earlier clip complete and
// playable, and the killed clip's sidecar readable.
func TestKillKeepsEarlierClips(t *testing.T) {
	dir := t.TempDir()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), childEnv+"="+dir)
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(out)
	for sc.Scan() {
		f := strings.Fields(sc.Text())
		if len(f) == 2 && f[0] == "clip" {
			if n, _ := strconv.Atoi(f[1]); n >= 4 {
				break
			}
			continue
		}
		t.Fatalf("child said %q", sc.Text())
	}
	cmd.Process.Signal(syscall.SIGKILL)
	cmd.Wait()
	for i := 1; i <= 3; i++ {
		clip := filepath.Join(dir, fmt.Sprintf("rec-%04d.avi", i))
		if n, _ := countFrames(t, clip); n != 9 {
			t.Errorf("%s: %d frames, want 9", clip, n)
		}
		if ts, err := record.ReadSidecar(record.SidecarPath(clip)); err != nil || len(ts) != 9 {
			t.Errorf("%s sidecar: %d times, %v", clip, len(ts), err)
		}
	}
	if ts, err := record.ReadSidecar(filepath.Join(dir, "rec-0004.frames.ndjson")); err != nil || len(ts) > 9 {
		t.Errorf("killed clip's sidecar: %d times, %v", len(ts), err)
	}
}

func TestReadSidecarErrors(t *testing.T) {
	dir := t.TempDir()
	write := func(name, s string) string {
		p := filepath.Join(dir, name)
		os.WriteFile(p, []byte(s), 0o644)
		return p
	}
	hdr := `{"format":"hewline-frames/1","video":"a.avi","width":4,"height":4,"fps":30,"start":"2026-01-01T00:00:00Z"}` + "\n"
	tests := []struct {
		name string
		path string
		want error
		n    int
	}{
		{"missing", filepath.Join(dir, "none.ndjson"), capture.ErrNotFound, 0},
		{"empty", write("e.ndjson", ""), capture.ErrUnreadable, 0},
		{"wrong header", write("w.ndjson", `{"format":"other/1"}`+"\n"), capture.ErrUnreadable, 0},
		{"bad middle line", write("b.ndjson", hdr+`{"i":0,"t":0}`+"\nxx\n"+`{"i":2,"t":0.1}`+"\n"), capture.ErrUnreadable, 0},
		{"gap in numbering", write("g.ndjson", hdr+`{"i":0,"t":0}`+"\n"+`{"i":2,"t":0.1}`+"\n"), capture.ErrUnreadable, 0},
		{"last line cut by a crash", write("c.ndjson", hdr+`{"i":0,"t":0}`+"\n"+`{"i":1,"t":0.03`), nil, 1},
		{"header only", write("h.ndjson", hdr), nil, 0},
		{"tracker events in order", write("ev.ndjson", hdr+`{"i":0,"t":0}`+"\n"+`{"i":1,"t":0.3,"before":[{"t":0.1},{"t":0.25,"fault":"camera stalled"}]}`+"\n"), nil, 2},
		{"tracker event after its frame", write("ea.ndjson", hdr+`{"i":0,"t":0,"before":[{"t":0.1}]}`+"\n"), capture.ErrUnreadable, 0},
		{"tracker events out of order", write("eo.ndjson", hdr+`{"i":0,"t":0.3,"before":[{"t":0.2},{"t":0.1}]}`+"\n"), capture.ErrUnreadable, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ts, err := record.ReadSidecar(tc.path)
			if tc.want != nil {
				if !errors.Is(err, tc.want) {
					t.Errorf("err %v, want %v", err, tc.want)
				}
				return
			}
			if err != nil || len(ts) != tc.n {
				t.Errorf("got %d times, %v; want %d", len(ts), err, tc.n)
			}
		})
	}
}

func BenchmarkWrite640(b *testing.B) {
	r, err := record.New(record.Options{Dir: b.TempDir(), FreeSpace: plenty, RotateBytes: 50 << 20})
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	m := capturetest.PatternMat(image.Pt(640, 480), 1)
	defer m.Close()
	for i := 0; i < b.N; i++ {
		r.Write(m, capture.FrameInfo{Index: i, T: time.Duration(i) * time.Second / 30})
	}
}
