package v4l2

import (
	"fmt"
	"image"

	"github.com/hewline/hewline/capture"
	"gocv.io/x/gocv"
)

// MaxFrameSide bounds the width and height Decode accepts, so that a
// corrupt format never makes OpenCV allocate an absurd image.
const MaxFrameSide = 8192

// Decode turns one raw frame of format f into 8-bit BGR (CV_8UC3) in dst.
// dst is owned by the caller, who must have created it (gocv.NewMat) and
// closes it; Decode reallocates it as needed. Decode does not retain b.
// Errors wrap capture.ErrUnreadable.
func Decode(b []byte, f Format, dst *gocv.Mat) error {
	switch f.Pixel {
	case MJPEG:
		return DecodeMJPEG(b, dst)
	case YUYV:
		return DecodeYUYV(b, f.Size, dst)
	}
	return fmt.Errorf("v4l2: decode %v: pixel format not supported: %w", f.Pixel, capture.ErrUnreadable)
}

// DecodeMJPEG decodes one JPEG image (an MJPEG frame) with OpenCV's decoder
// into dst as BGR. The bytes must start with the JPEG SOI marker FF D8
// (ITU-T T.81, table B.1); anything else is refused before OpenCV sees it.
// dst is caller-owned; b is not retained.
func DecodeMJPEG(b []byte, dst *gocv.Mat) error {
	if dst == nil {
		return fmt.Errorf("v4l2: decode MJPEG: nil destination")
	}
	if len(b) < 4 || b[0] != 0xFF || b[1] != 0xD8 {
		return fmt.Errorf("v4l2: decode MJPEG: %d bytes without a JPEG start marker: %w", len(b), capture.ErrUnreadable)
	}
	m, err := gocv.IMDecode(b, gocv.IMReadColor)
	if err != nil {
		return fmt.Errorf("v4l2: decode MJPEG: %v: %w", err, capture.ErrUnreadable)
	}
	defer m.Close()
	if m.Empty() || m.Type() != gocv.MatTypeCV8UC3 {
		return fmt.Errorf("v4l2: decode MJPEG: %d bytes are not a decodable JPEG: %w", len(b), capture.ErrUnreadable)
	}
	if m.Cols() > MaxFrameSide || m.Rows() > MaxFrameSide {
		return fmt.Errorf("v4l2: decode MJPEG: %dx%d is too large: %w", m.Cols(), m.Rows(), capture.ErrUnreadable)
	}
	m.CopyTo(dst)
	return nil
}

// DecodeYUYV converts packed YUYV 4:2:2 bytes of the given size into BGR in
// dst with OpenCV's colour conversion (COLOR_YUV2BGR_YUY2, BT.601 video
// range). len(b) must be exactly width·height·2 and the width even. dst is
// caller-owned; b is not retained.
func DecodeYUYV(b []byte, size image.Point, dst *gocv.Mat) error {
	if dst == nil {
		return fmt.Errorf("v4l2: decode YUYV: nil destination")
	}
	if size.X <= 0 || size.Y <= 0 || size.X%2 != 0 || size.X > MaxFrameSide || size.Y > MaxFrameSide {
		return fmt.Errorf("v4l2: decode YUYV: bad size %dx%d: %w", size.X, size.Y, capture.ErrUnreadable)
	}
	if want := size.X * size.Y * 2; len(b) != want {
		return fmt.Errorf("v4l2: decode YUYV %dx%d: got %d bytes, want %d: %w", size.X, size.Y, len(b), want, capture.ErrUnreadable)
	}
	src, err := gocv.NewMatFromBytes(size.Y, size.X, gocv.MatTypeCV8UC2, b)
	if err != nil {
		return fmt.Errorf("v4l2: decode YUYV: %v: %w", err, capture.ErrUnreadable)
	}
	defer src.Close()
	gocv.CvtColor(src, dst, gocv.ColorYUVToBGRYUY2)
	return nil
}
