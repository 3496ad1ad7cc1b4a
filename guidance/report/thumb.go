package report

import (
	"errors"
	"fmt"
	"image"
	"os"
	"path/filepath"

	"gocv.io/x/gocv"
)

// ThumbWidth is the width in pixels of a loss thumbnail.
const ThumbWidth = 240

// FindSource returns the recording a log names, looking first at the path
// in the header and then beside the log under the same base name. It
// returns "" when neither exists (a camera run, or the clip moved away).
func FindSource(logPath, source string) string {
	if source == "" {
		return ""
	}
	cands := []string{source}
	if logPath != "" {
		cands = append(cands, filepath.Join(filepath.Dir(logPath), filepath.Base(source)))
	}
	for _, c := range cands {
		if st, err := os.Stat(c); err == nil && st.Mode().IsRegular() {
			return c
		}
	}
	return ""
}

// Thumbs reads the given frame numbers from the video at path and returns
// a JPEG of each, ThumbWidth wide, in the same order; a frame that cannot
// be read gets nil. The error is non-nil only when the video cannot be
// opened at all.
func Thumbs(path string, frames []int) ([][]byte, error) {
	vc, err := gocv.VideoCaptureFile(path)
	if err != nil {
		if vc != nil {
			vc.Close()
		}
		return nil, fmt.Errorf("report: open %s: %w", path, err)
	}
	defer vc.Close()
	if !vc.IsOpened() {
		return nil, fmt.Errorf("report: open %s: %w", path, errors.New("not a readable video"))
	}
	count := int(vc.Get(gocv.VideoCaptureFrameCount))
	frame := gocv.NewMat()
	defer frame.Close()
	small := gocv.NewMat()
	defer small.Close()
	out := make([][]byte, len(frames))
	for i, f := range frames {
		if f < 0 || (count > 0 && f >= count) {
			continue
		}
		vc.Set(gocv.VideoCapturePosFrames, float64(f))
		if !vc.Read(&frame) || frame.Empty() || frame.Cols() < 2 || frame.Rows() < 2 {
			continue
		}
		if frame.Type() != gocv.MatTypeCV8UC3 && frame.Type() != gocv.MatTypeCV8UC1 {
			continue
		}
		h := max(1, frame.Rows()*ThumbWidth/frame.Cols())
		gocv.Resize(frame, &small, image.Pt(ThumbWidth, h), 0, 0, gocv.InterpolationArea)
		if small.Empty() {
			continue
		}
		buf, err := gocv.IMEncodeWithParams(gocv.JPEGFileExt, small, []int{gocv.IMWriteJpegQuality, 80})
		if err != nil {
			continue
		}
		out[i] = append([]byte(nil), buf.GetBytes()...)
		buf.Close()
	}
	return out, nil
}
