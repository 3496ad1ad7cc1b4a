package capture

import (
	"errors"
	"fmt"
	"image"
	"io"
	"math"
	"os"
	"time"

	"gocv.io/x/gocv"
)

// VideoFile reads frames from a video file (MJPEG AVI, MP4 and whatever
// else OpenCV's FFmpeg backend decodes).
//
// Timestamps come from the container (the decoder's position in
// milliseconds) when it gives increasing values, otherwise from Index/FPS.
// A file that ends before the frame count its header declares is reported
// as truncated: Read returns an error wrapping ErrUnreadable instead of
// io.EOF, after every readable frame has been delivered.
type VideoFile struct {
	path     string
	vc       *gocv.VideoCapture
	info     SourceInfo
	next     int
	lastT    time.Duration
	useIndex bool // container timestamps were unusable: use Index/FPS
	tmp      gocv.Mat
	done     error
	// timestamps, when set, override both (a recording's sidecar).
	timestamps []time.Duration
	before     [][]TrackerEvent // UseEvents
}

// OpenVideo opens a video file. It checks the file in Go first (missing,
// a folder, empty) so that OpenCV is never handed something it may abort
// on, and reads nothing until the first Read.
func OpenVideo(path string) (*VideoFile, error) {
	st, err := os.Stat(path)
	switch {
	case errors.Is(err, os.ErrNotExist):
		return nil, fmt.Errorf("capture: open %s: %w", path, ErrNotFound)
	case err != nil:
		return nil, fmt.Errorf("capture: open %s: %v: %w", path, err, ErrUnreadable)
	case st.IsDir():
		return nil, fmt.Errorf("capture: open %s: is a folder, not a video (use it as an image folder): %w", path, ErrUnreadable)
	case st.Size() == 0:
		return nil, fmt.Errorf("capture: open %s: empty file: %w", path, ErrUnreadable)
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("capture: open %s: %v: %w", path, err, ErrUnreadable)
	}
	f.Close()

	vc, err := gocv.VideoCaptureFileWithAPI(path, gocv.VideoCaptureFFmpeg)
	if err != nil {
		if vc != nil {
			vc.Close()
		}
		return nil, fmt.Errorf("capture: open %s: not a readable video: %w", path, ErrUnreadable)
	}
	w := int(vc.Get(gocv.VideoCaptureFrameWidth))
	h := int(vc.Get(gocv.VideoCaptureFrameHeight))
	fps := vc.Get(gocv.VideoCaptureFPS)
	n := vc.Get(gocv.VideoCaptureFrameCount)
	if w <= 0 || h <= 0 {
		vc.Close()
		return nil, fmt.Errorf("capture: open %s: no video stream: %w", path, ErrUnreadable)
	}
	if math.IsNaN(fps) || fps <= 0 || fps > 1000 {
		fps = 0
	}
	frames := -1
	if n > 0 && n < 1e9 {
		frames = int(n)
	}
	return &VideoFile{
		path: path,
		vc:   vc,
		info: SourceInfo{Name: path, Kind: "video", Size: image.Pt(w, h), FPS: fps, Frames: frames},
		tmp:  gocv.NewMat(),
	}, nil
}

// UseTimestamps makes Read report ts[i] as the time of frame i (for
// instance the per-frame times of a recording's sidecar), so that a replay
// sees the same times as the live run. Frames beyond len(ts) are an error.
func (v *VideoFile) UseTimestamps(ts []time.Duration) { v.timestamps = ts }

// UseEvents makes Read report before[i] as FrameInfo.Before of frame i (a
// recording's tracker events, from its sidecar). The slices are shared
// with the caller and must not be changed while v is read.
func (v *VideoFile) UseEvents(before [][]TrackerEvent) { v.before = before }

// Info describes the file.
func (v *VideoFile) Info() SourceInfo { return v.info }

// Read decodes the next frame into dst as 8-bit BGR, reallocating dst when
// its size or type differs. dst is owned by the caller; VideoFile keeps no
// reference to it. Read returns io.EOF after the last frame.
func (v *VideoFile) Read(dst *gocv.Mat) (FrameInfo, error) {
	if v.done != nil {
		return FrameInfo{}, v.done
	}
	if v.vc == nil {
		return FrameInfo{}, fmt.Errorf("capture: read %s: closed", v.path)
	}
	if !v.vc.Read(&v.tmp) || v.tmp.Empty() {
		v.done = v.endError()
		return FrameInfo{}, v.done
	}
	posMs := v.vc.Get(gocv.VideoCapturePosMsec)
	if err := toBGR(v.tmp, dst); err != nil {
		v.done = fmt.Errorf("capture: read %s: frame %d: %w", v.path, v.next, err)
		return FrameInfo{}, v.done
	}
	fi := FrameInfo{Index: v.next, Size: image.Pt(dst.Cols(), dst.Rows())}
	fi.T = v.timestamp(posMs)
	if v.timestamps != nil {
		if v.next >= len(v.timestamps) {
			v.done = fmt.Errorf("capture: read %s: frame %d has no timestamp in the sidecar (%d listed): %w", v.path, v.next, len(v.timestamps), ErrUnreadable)
			return FrameInfo{}, v.done
		}
		fi.T = v.timestamps[v.next]
	}
	if v.next < len(v.before) {
		fi.Before = v.before[v.next]
	}
	v.next++
	return fi, nil
}

// timestamp picks the container's time when it is usable.
func (v *VideoFile) timestamp(posMs float64) time.Duration {
	byIndex := time.Duration(0)
	if v.info.FPS > 0 {
		byIndex = time.Duration(float64(v.next) / v.info.FPS * float64(time.Second))
	}
	if v.useIndex || math.IsNaN(posMs) || posMs < 0 {
		v.useIndex = true
		return byIndex
	}
	t := time.Duration(posMs * float64(time.Millisecond))
	if v.next > 0 && t <= v.lastT {
		// Not increasing: the container has no usable times.
		v.useIndex = true
		return byIndex
	}
	v.lastT = t
	return t
}

func (v *VideoFile) endError() error {
	if v.next == 0 {
		return fmt.Errorf("capture: read %s: no frame could be decoded: %w", v.path, ErrUnreadable)
	}
	if v.info.Frames > 0 && v.next < v.info.Frames {
		return fmt.Errorf("capture: read %s: ended after %d of the %d frames its header declares (truncated file?): %w",
			v.path, v.next, v.info.Frames, ErrUnreadable)
	}
	return io.EOF
}

// Close releases the decoder.
func (v *VideoFile) Close() error {
	if v.vc != nil {
		v.vc.Close()
		v.vc = nil
		v.tmp.Close()
	}
	return nil
}

// toBGR copies src into dst as CV_8UC3, converting grey and BGRA.
func toBGR(src gocv.Mat, dst *gocv.Mat) error {
	if src.Empty() {
		return fmt.Errorf("empty frame: %w", ErrUnreadable)
	}
	switch src.Type() {
	case gocv.MatTypeCV8UC3:
		src.CopyTo(dst)
	case gocv.MatTypeCV8UC1:
		gocv.CvtColor(src, dst, gocv.ColorGrayToBGR)
	case gocv.MatTypeCV8UC4:
		gocv.CvtColor(src, dst, gocv.ColorBGRAToBGR)
	default:
		return fmt.Errorf("unsupported pixel type %v (want 8-bit grey, BGR or BGRA): %w", src.Type(), ErrUnreadable)
	}
	return nil
}
