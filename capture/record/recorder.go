package record

import (
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"time"

	"github.com/hewline/hewline/capture"
	"github.com/rs/zerolog"
	"gocv.io/x/gocv"
)

// Sentinels kept in Err when recording stopped; test with errors.Is.
var (
	// ErrDiskFull: free space fell below Options.MinFree.
	ErrDiskFull = errors.New("not enough free disk space")
	// ErrWriteFailed: a clip or sidecar could not be created or written.
	ErrWriteFailed = errors.New("recording write failed")
)

// Options configure a Recorder. Zero values take the defaults shown.
type Options struct {
	// Dir receives the clips; created if missing.
	Dir string
	// Prefix of clip names; default "rec" (rec-0001.avi).
	Prefix string
	// FPS written into each AVI header; default 30. Players use it;
	// replay uses the sidecar's times instead.
	FPS float64
	// RotateBytes starts a new clip once the current one reaches this size
	// (approximately, within about half the limit: the writer buffers, so
	// the size is estimated from the JPEG size of a sample frame
	// every CheckEvery frames times the frame count, or the size on disk
	// when larger);
	// 0 means no size limit.
	RotateBytes int64
	// RotateEvery starts a new clip once the current one spans this much
	// source time (FrameInfo.T); 0 means no time limit.
	RotateEvery time.Duration
	// MinFree is the free space below which recording stops; default
	// 256 MiB.
	MinFree uint64
	// CheckEvery is the number of frames between free-space checks;
	// default 30 (about a second at 30 fps). A check also runs before each
	// clip.
	CheckEvery int
	// FreeSpace reports free bytes for Dir; default FreeBytes (statfs).
	FreeSpace func(dir string) (uint64, error)
	// Now is the wall clock for the sidecar; default time.Now.
	Now func() time.Time
	// Log receives rotation and stop messages; nil logs nothing.
	Log *zerolog.Logger
}

// Recorder writes frames into rotating MJPEG AVI clips with sidecars. It is
// not safe for concurrent use.
type Recorder struct {
	opt    Options
	next   int
	vw     *gocv.VideoWriter
	side   *os.File
	clip   string
	size   image.Point
	start  time.Duration
	inClip int
	// clipBytes estimates the clip's size: the AVI writer buffers, so
	// the file's size on disk lags behind (see estimateFrame).
	clipBytes int64
	frameEst  int64
	rawSum    int64   // sum of unscaled estimates in this clip
	ratio     float64 // actual/estimated size of the last finished clip
	total     int
	sinceC    int
	files     []string
	err       error
	warned    bool
}

// New prepares a Recorder in opt.Dir. It fails only when the folder cannot
// be made or the options make no sense; a disk that is already too full
// gives a Recorder that is stopped (see Err).
func New(opt Options) (*Recorder, error) {
	if opt.Dir == "" {
		return nil, fmt.Errorf("record: no output folder")
	}
	if opt.Prefix == "" {
		opt.Prefix = "rec"
	}
	if opt.FPS == 0 {
		opt.FPS = 30
	}
	if !(opt.FPS > 0 && opt.FPS <= 1000) {
		return nil, fmt.Errorf("record: bad frame rate %v", opt.FPS)
	}
	if opt.RotateBytes < 0 || opt.RotateEvery < 0 {
		return nil, fmt.Errorf("record: negative rotation limit")
	}
	if opt.MinFree == 0 {
		opt.MinFree = 256 << 20
	}
	if opt.CheckEvery <= 0 {
		opt.CheckEvery = 30
	}
	if opt.FreeSpace == nil {
		opt.FreeSpace = FreeBytes
	}
	if opt.Now == nil {
		opt.Now = time.Now
	}
	if err := os.MkdirAll(opt.Dir, 0o755); err != nil {
		return nil, fmt.Errorf("record: make %s: %w", opt.Dir, err)
	}
	next, err := nextNumber(opt.Dir, opt.Prefix)
	if err != nil {
		return nil, err
	}
	r := &Recorder{opt: opt, next: next}
	r.checkSpace()
	return r, nil
}

// nextNumber returns one more than the highest existing clip number, so an
// earlier session's clips are never overwritten.
func nextNumber(dir, prefix string) (int, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return 0, fmt.Errorf("record: read %s: %w", dir, err)
	}
	re := regexp.MustCompile("^" + regexp.QuoteMeta(prefix) + `-(\d+)\.(avi|frames\.ndjson)$`)
	n := 0
	for _, e := range entries {
		if m := re.FindStringSubmatch(e.Name()); m != nil {
			if v, err := strconv.Atoi(m[1]); err == nil && v > n {
				n = v
			}
		}
	}
	return n + 1, nil
}

func (r *Recorder) log() *zerolog.Logger {
	if r.opt.Log == nil {
		l := zerolog.Nop()
		return &l
	}
	return r.opt.Log
}

// stop ends recording for good: the clip is finalised, the cause kept.
func (r *Recorder) stop(err error) {
	if r.err != nil {
		return
	}
	r.err = err
	r.closeClip()
	r.log().Error().Err(err).Int("frames", r.total).Msg("recording stopped; guidance goes on")
}

// checkSpace stops recording when free space is below MinFree; true while
// recording may go on.
func (r *Recorder) checkSpace() bool {
	if r.err != nil {
		return false
	}
	r.sinceC = 0
	free, err := r.opt.FreeSpace(r.opt.Dir)
	if err != nil {
		if !r.warned {
			r.warned = true
			r.log().Warn().Err(err).Msg("cannot check free space; recording on")
		}
		return true
	}
	if free < r.opt.MinFree {
		r.stop(fmt.Errorf("record: %s: %w (%d MiB free, %d MiB required)", r.opt.Dir, ErrDiskFull, free>>20, r.opt.MinFree>>20))
		return false
	}
	return true
}

func (r *Recorder) openClip(size image.Point, t time.Duration) error {
	if !r.checkSpace() {
		return nil
	}
	base := fmt.Sprintf("%s-%04d", r.opt.Prefix, r.next)
	clip := filepath.Join(r.opt.Dir, base+".avi")
	side, err := os.OpenFile(SidecarPath(clip), os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return fmt.Errorf("record: %w: %v", ErrWriteFailed, err)
	}
	vw, err := gocv.VideoWriterFile(clip, "MJPG", r.opt.FPS, size.X, size.Y, true)
	if err != nil || !vw.IsOpened() {
		if vw != nil {
			vw.Close()
		}
		side.Close()
		os.Remove(side.Name())
		return fmt.Errorf("record: %w: cannot open %s for MJPEG", ErrWriteFailed, clip)
	}
	r.next++
	r.vw, r.side, r.clip, r.size, r.start, r.inClip, r.clipBytes, r.rawSum = vw, side, clip, size, t, 0, 0, 0
	r.files = append(r.files, clip)
	hdr, _ := json.Marshal(SidecarHeader{Format: SidecarFormat, Video: base + ".avi", Width: size.X, Height: size.Y, FPS: r.opt.FPS, Start: r.opt.Now().UTC()})
	if _, err := side.Write(append(hdr, '\n')); err != nil {
		return fmt.Errorf("record: %w: %s: %v", ErrWriteFailed, side.Name(), err)
	}
	r.log().Info().Str("clip", clip).Msg("recording clip")
	return nil
}

// closeClip finalises the AVI (its index) and the sidecar.
func (r *Recorder) closeClip() {
	if r.vw != nil {
		r.vw.Close()
		r.vw = nil
		// Learn how far the estimate was off, for the next clip.
		if st, err := os.Stat(r.clip); err == nil && r.rawSum > 0 && st.Size() > 0 {
			r.ratio = float64(st.Size()) / float64(r.rawSum)
		}
	}
	if r.side != nil {
		r.side.Close()
		r.side = nil
	}
}

// Write appends frame (8-bit BGR; not retained) with its source info.
// Write returns nil after recording has stopped (see Err and Stopped): a
// recording problem must never stop guidance. It returns an error only for
// a frame that is not 8-bit BGR.
func (r *Recorder) Write(frame gocv.Mat, info capture.FrameInfo) error {
	if frame.Empty() || frame.Type() != gocv.MatTypeCV8UC3 {
		return fmt.Errorf("record: frame %d is not 8-bit BGR", info.Index)
	}
	if r.err != nil {
		return nil
	}
	size := image.Pt(frame.Cols(), frame.Rows())
	if r.vw != nil {
		rotate := size != r.size
		if r.opt.RotateEvery > 0 && info.T-r.start >= r.opt.RotateEvery {
			rotate = true
		}
		if r.opt.RotateBytes > 0 {
			sz := r.clipBytes
			if st, err := os.Stat(r.clip); err == nil && st.Size() > sz {
				sz = st.Size()
			}
			if sz >= r.opt.RotateBytes {
				rotate = true
			}
		}
		if rotate {
			r.closeClip()
		}
	}
	if r.sinceC >= r.opt.CheckEvery && !r.checkSpace() {
		return nil
	}
	if r.vw == nil {
		if err := r.openClip(size, info.T); err != nil {
			r.stop(err)
			return nil
		}
		if r.err != nil {
			return nil
		}
	}
	if r.opt.RotateBytes > 0 && (r.inClip%r.opt.CheckEvery == 0 || r.frameEst == 0) {
		r.frameEst = estimateFrame(frame)
	}
	ratio := r.ratio
	if ratio <= 0 {
		ratio = 1
	}
	r.clipBytes += int64(float64(r.frameEst) * ratio)
	r.rawSum += r.frameEst
	if err := r.vw.Write(frame); err != nil {
		r.stop(fmt.Errorf("record: %w: %s: %v", ErrWriteFailed, r.clip, err))
		return nil
	}
	sf := SidecarFrame{I: r.inClip, Src: info.Index, T: info.T.Seconds(), Wall: r.opt.Now().UTC()}
	for _, e := range info.Before {
		sf.Before = append(sf.Before, SidecarEvent{T: e.T.Seconds(), Fault: e.Fault})
	}
	line, _ := json.Marshal(sf)
	if _, err := r.side.Write(append(line, '\n')); err != nil {
		r.stop(fmt.Errorf("record: %w: %s: %v", ErrWriteFailed, r.side.Name(), err))
		return nil
	}
	r.inClip++
	r.total++
	r.sinceC++
	return nil
}

// estimateFrame is the size of frame as one JPEG at quality 95 (OpenCV's
// MJPEG writer's default quality), plus the 8-byte AVI chunk header and
// 16-byte index entry; 0 if it cannot be encoded.
func estimateFrame(frame gocv.Mat) int64 {
	buf, err := gocv.IMEncodeWithParams(gocv.JPEGFileExt, frame, []int{gocv.IMWriteJpegQuality, 95})
	if err != nil {
		return 0
	}
	defer buf.Close()
	return int64(buf.Len()) + 24
}

// Stopped reports whether recording has stopped (Err says why).
func (r *Recorder) Stopped() bool { return r.err != nil }

// Err is why recording stopped, or nil while it goes on.
func (r *Recorder) Err() error { return r.err }

// Files lists the clips written so far (paths of the .avi files).
func (r *Recorder) Files() []string { return append([]string(nil), r.files...) }

// Frames is the number of frames recorded.
func (r *Recorder) Frames() int { return r.total }

// Close finalises the current clip so that players can open it. It
// returns Err (nil when recording never stopped).
func (r *Recorder) Close() error {
	r.closeClip()
	return r.err
}
