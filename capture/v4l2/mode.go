package v4l2

import (
	"errors"
	"fmt"
	"image"
	"math"
	"sort"
)

// PixelFormat is a V4L2 pixel format code (a FourCC, least significant byte
// first, as in linux/videodev2.h).
type PixelFormat uint32

// The pixel formats hewline decodes.
const (
	// MJPEG: each buffer is one JPEG image (V4L2_PIX_FMT_MJPEG, "MJPG").
	MJPEG PixelFormat = 'M' | 'J'<<8 | 'P'<<16 | 'G'<<24
	// YUYV: packed 4:2:2, Y0 U Y1 V per pixel pair (V4L2_PIX_FMT_YUYV).
	YUYV PixelFormat = 'Y' | 'U'<<8 | 'Y'<<16 | 'V'<<24
)

// String returns the FourCC, e.g. "MJPG".
func (p PixelFormat) String() string {
	b := []byte{byte(p), byte(p >> 8), byte(p >> 16), byte(p >> 24)}
	for i, c := range b {
		if c < 0x20 || c > 0x7e {
			b[i] = '?'
		}
	}
	return string(b)
}

// Decodable reports whether Decode handles p.
func (p PixelFormat) Decodable() bool { return p == MJPEG || p == YUYV }

// ParsePixelFormat accepts "mjpeg", "mjpg", "yuyv" or "yuy2" in any case.
func ParsePixelFormat(s string) (PixelFormat, error) {
	switch lower(s) {
	case "mjpeg", "mjpg":
		return MJPEG, nil
	case "yuyv", "yuy2":
		return YUYV, nil
	}
	return 0, fmt.Errorf("v4l2: unknown pixel format %q (want mjpeg or yuyv)", s)
}

func lower(s string) string {
	b := []byte(s)
	for i, c := range b {
		if c >= 'A' && c <= 'Z' {
			b[i] = c + 'a' - 'A'
		}
	}
	return string(b)
}

// Format is what a raw frame holds: its pixel format and size.
type Format struct {
	Pixel PixelFormat
	Size  image.Point
}

func (f Format) String() string { return fmt.Sprintf("%v %dx%d", f.Pixel, f.Size.X, f.Size.Y) }

// Mode is one way a camera can stream: a format at a frame rate.
type Mode struct {
	Format
	// FPS is frames per second (the inverse of the V4L2 frame interval).
	FPS float64
}

func (m Mode) String() string { return fmt.Sprintf("%v @ %.4g fps", m.Format, m.FPS) }

// Preference narrows ChooseMode. Zero fields mean "no preference".
type Preference struct {
	// Pixel, when non-zero, is the only pixel format accepted.
	Pixel PixelFormat
	// Size, when non-zero, must match exactly.
	Size image.Point
	// FPS, when non-zero, must match within 0.5 fps.
	FPS float64
}

// Default limits used by ChooseMode when the preference leaves them open.
const (
	DefaultMinFPS    = 30
	DefaultMaxWidth  = 640
	DefaultMaxHeight = 480
)

// ErrNoMode: no mode of the camera satisfies the preference.
var ErrNoMode = errors.New("v4l2: no matching camera mode")

// ChooseMode picks the mode to stream. Only decodable formats (MJPEG, YUYV)
// are considered. With an empty Preference it returns the largest size not
// over 640×480 that runs at 30 fps or more; among equal sizes it prefers
// MJPEG (a quarter or less of YUYV's USB bandwidth) and then the lowest
// rate that is still ≥ 30 fps (less CPU on a small computer). If no mode
// reaches 30 fps within 640×480 it falls back to the fastest mode within
// 640×480, then to the smallest mode overall, so that a slow camera still
// works (the frame rate shows in "hewline cameras" and in the run log).
// Fields set in pref are hard requirements; ErrNoMode when nothing matches.
func ChooseMode(modes []Mode, pref Preference) (Mode, error) {
	var cand []Mode
	for _, m := range modes {
		if !m.Pixel.Decodable() || m.Size.X <= 0 || m.Size.Y <= 0 || !(m.FPS > 0) {
			continue
		}
		if pref.Pixel != 0 && m.Pixel != pref.Pixel {
			continue
		}
		if pref.Size != (image.Point{}) && m.Size != pref.Size {
			continue
		}
		if pref.FPS != 0 && math.Abs(m.FPS-pref.FPS) > 0.5 {
			continue
		}
		cand = append(cand, m)
	}
	if len(cand) == 0 {
		return Mode{}, fmt.Errorf("%w (wanted %s; camera offers %d modes)", ErrNoMode, describePref(pref), len(modes))
	}
	area := func(m Mode) int { return m.Size.X * m.Size.Y }
	fits := func(m Mode) bool { return m.Size.X <= DefaultMaxWidth && m.Size.Y <= DefaultMaxHeight }
	minFPS := float64(DefaultMinFPS)
	if pref.FPS != 0 {
		minFPS = 0 // already filtered to the wanted rate
	}
	pixRank := func(m Mode) int {
		if m.Pixel == MJPEG {
			return 0
		}
		return 1
	}
	// First choice: fits and fast enough; largest, MJPEG, lowest rate ≥ min.
	var good []Mode
	for _, m := range cand {
		if (fits(m) || pref.Size != (image.Point{})) && m.FPS >= minFPS {
			good = append(good, m)
		}
	}
	if len(good) > 0 {
		sort.SliceStable(good, func(i, j int) bool {
			a, b := good[i], good[j]
			if area(a) != area(b) {
				return area(a) > area(b)
			}
			if pixRank(a) != pixRank(b) {
				return pixRank(a) < pixRank(b)
			}
			return a.FPS < b.FPS
		})
		return good[0], nil
	}
	// Fallback 1: fastest within the size limit, then largest.
	var small []Mode
	for _, m := range cand {
		if fits(m) {
			small = append(small, m)
		}
	}
	if len(small) > 0 {
		sort.SliceStable(small, func(i, j int) bool {
			a, b := small[i], small[j]
			if a.FPS != b.FPS {
				return a.FPS > b.FPS
			}
			if area(a) != area(b) {
				return area(a) > area(b)
			}
			return pixRank(a) < pixRank(b)
		})
		return small[0], nil
	}
	// Fallback 2: the smallest mode, fastest first.
	sort.SliceStable(cand, func(i, j int) bool {
		a, b := cand[i], cand[j]
		if area(a) != area(b) {
			return area(a) < area(b)
		}
		if a.FPS != b.FPS {
			return a.FPS > b.FPS
		}
		return pixRank(a) < pixRank(b)
	})
	return cand[0], nil
}

func describePref(p Preference) string {
	s := ""
	if p.Pixel != 0 {
		s += p.Pixel.String() + " "
	} else {
		s += "MJPG/YUYV "
	}
	if p.Size != (image.Point{}) {
		s += fmt.Sprintf("%dx%d ", p.Size.X, p.Size.Y)
	}
	if p.FPS != 0 {
		s += fmt.Sprintf("@ %.4g fps", p.FPS)
	}
	return s
}
