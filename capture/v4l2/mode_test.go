package v4l2

import (
	"errors"
	"image"
	"testing"
)

func mode(p PixelFormat, w, h int, fps float64) Mode {
	return Mode{Format: Format{Pixel: p, Size: image.Pt(w, h)}, FPS: fps}
}

// A typical UVC webcam offers MJPEG up to 1280×720 at 30 fps and YUYV at
// full size only at low rates (USB 2.0 bandwidth: 640×480×2 bytes×30 fps is
// 18.4 MB/s, near the ~24 MB/s a UVC isochronous endpoint carries; common
// practice). These mode lists are invented in that shape.
func TestChooseMode(t *testing.T) {
	uvc := []Mode{
		mode(YUYV, 1280, 720, 10), mode(YUYV, 640, 480, 30), mode(YUYV, 640, 480, 15),
		mode(YUYV, 320, 240, 30), mode(MJPEG, 1280, 720, 30), mode(MJPEG, 640, 480, 60),
		mode(MJPEG, 640, 480, 30), mode(MJPEG, 320, 240, 30),
		mode(PixelFormat('H'|'2'<<8|'6'<<16|'4'<<24), 640, 480, 30),
	}
	tests := []struct {
		name  string
		modes []Mode
		pref  Preference
		want  Mode
		err   error
	}{
		{"default largest ≤640×480 at ≥30 fps, MJPEG, lowest such rate", uvc, Preference{}, mode(MJPEG, 640, 480, 30), nil},
		{"YUYV only", uvc, Preference{Pixel: YUYV}, mode(YUYV, 640, 480, 30), nil},
		{"explicit size above the default limit", uvc, Preference{Size: image.Pt(1280, 720)}, mode(MJPEG, 1280, 720, 30), nil},
		{"explicit rate", uvc, Preference{FPS: 60}, mode(MJPEG, 640, 480, 60), nil},
		{"explicit everything", uvc, Preference{Pixel: YUYV, Size: image.Pt(1280, 720), FPS: 10}, mode(YUYV, 1280, 720, 10), nil},
		{"no match", uvc, Preference{Pixel: YUYV, FPS: 60}, Mode{}, ErrNoMode},
		{"nothing decodable", []Mode{mode(PixelFormat(0x34363248), 640, 480, 30)}, Preference{}, Mode{}, ErrNoMode},
		{"empty list", nil, Preference{}, Mode{}, ErrNoMode},
		{"slow camera: fastest within 640×480", []Mode{mode(YUYV, 640, 480, 15), mode(YUYV, 320, 240, 25), mode(YUYV, 1920, 1080, 30)}, Preference{}, mode(YUYV, 320, 240, 25), nil},
		{"only large modes: smallest", []Mode{mode(MJPEG, 1920, 1080, 30), mode(MJPEG, 1280, 720, 30)}, Preference{}, mode(MJPEG, 1280, 720, 30), nil},
		{"640×360 beats 320×240", []Mode{mode(MJPEG, 320, 240, 30), mode(MJPEG, 640, 360, 30)}, Preference{}, mode(MJPEG, 640, 360, 30), nil},
		{"equal size: MJPEG over YUYV", []Mode{mode(YUYV, 640, 480, 30), mode(MJPEG, 640, 480, 30)}, Preference{}, mode(MJPEG, 640, 480, 30), nil},
		{"29.97 fps is below 30", []Mode{mode(MJPEG, 640, 480, 29.97), mode(MJPEG, 320, 240, 30)}, Preference{}, mode(MJPEG, 320, 240, 30), nil},
		{"zero rate ignored", []Mode{mode(MJPEG, 640, 480, 0), mode(MJPEG, 320, 240, 30)}, Preference{}, mode(MJPEG, 320, 240, 30), nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := ChooseMode(tc.modes, tc.pref)
			if tc.err != nil {
				if !errors.Is(err, tc.err) {
					t.Fatalf("err = %v, want %v", err, tc.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if got != tc.want {
				t.Errorf("got %v, want %v", got, tc.want)
			}
		})
	}
}

// FourCC codes as defined in linux/videodev2.h (v4l2_fourcc('M','J','P','G')
// = 0x47504A4D, v4l2_fourcc('Y','U','Y','V') = 0x56595559).
func TestPixelFormatCodes(t *testing.T) {
	if MJPEG != 0x47504A4D || MJPEG.String() != "MJPG" {
		t.Errorf("MJPEG = %#x %q", uint32(MJPEG), MJPEG)
	}
	if YUYV != 0x56595559 || YUYV.String() != "YUYV" {
		t.Errorf("YUYV = %#x %q", uint32(YUYV), YUYV)
	}
	for in, want := range map[string]PixelFormat{"mjpeg": MJPEG, "MJPG": MJPEG, "yuyv": YUYV, "YUY2": YUYV} {
		if got, err := ParsePixelFormat(in); err != nil || got != want {
			t.Errorf("ParsePixelFormat(%q) = %v, %v", in, got, err)
		}
	}
	if _, err := ParsePixelFormat("h264"); err == nil {
		t.Error("h264 accepted")
	}
}
