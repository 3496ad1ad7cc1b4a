package v4l2_test

import (
	"bytes"
	"errors"
	"image"
	"image/color"
	"image/jpeg"
	"math"
	"testing"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/capturetest"
	"github.com/hewline/hewline/capture/v4l2"
	"gocv.io/x/gocv"
)

// scene is a known image: smooth gradients with a bright stripe and a dark
// disc, the kind of content a floor camera sees.
func scene(w, h int) *image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			c := color.RGBA{uint8(40 + 150*x/w), uint8(60 + 120*y/h), uint8(90 + 60*(x+y)/(w+h)), 255}
			if x > w/2-10 && x < w/2+10 {
				c = color.RGBA{230, 200, 40, 255}
			}
			if dx, dy := x-w/4, y-h/3; dx*dx+dy*dy < (h/6)*(h/6) {
				c = color.RGBA{20, 20, 30, 255}
			}
			img.SetRGBA(x, y, c)
		}
	}
	return img
}

// bgrBytes lays img out as OpenCV's BGR bytes.
func bgrBytes(img image.Image) []byte {
	r := img.Bounds()
	out := make([]byte, 0, r.Dx()*r.Dy()*3)
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			R, G, B, _ := img.At(x, y).RGBA()
			out = append(out, byte(B>>8), byte(G>>8), byte(R>>8))
		}
	}
	return out
}

// psnr of two equal-length 8-bit buffers, in dB (peak 255).
func psnr(t *testing.T, a, b []byte) float64 {
	t.Helper()
	if len(a) != len(b) || len(a) == 0 {
		t.Fatalf("psnr: lengths %d and %d", len(a), len(b))
	}
	var se float64
	for i := range a {
		d := float64(a[i]) - float64(b[i])
		se += d * d
	}
	if se == 0 {
		return math.Inf(1)
	}
	mse := se / float64(len(a))
	return 10 * math.Log10(255*255/mse)
}

func matBytes(t *testing.T, m gocv.Mat, w, h int) []byte {
	t.Helper()
	if m.Cols() != w || m.Rows() != h || m.Type() != gocv.MatTypeCV8UC3 {
		t.Fatalf("decoded %dx%d type %v, want %dx%d CV_8UC3", m.Cols(), m.Rows(), m.Type(), w, h)
	}
	return m.ToBytes()
}

// The MJPEG path is checked against two JPEG encoders from outside the
// project (OpenCV's imencode and Go's image/jpeg) and against Go's own JPEG
// decoder. Bounds: baseline JPEG at quality 90–95 on smooth content is
// usually well above 30 dB PSNR (common practice); two conforming decoders
// of the same file differ only by IDCT rounding, so above 40 dB.
func TestDecodeMJPEGAgainstReferenceEncoders(t *testing.T) {
	const w, h = 320, 240
	img := scene(w, h)
	ref := bgrBytes(img)
	orig, err := gocv.NewMatFromBytes(h, w, gocv.MatTypeCV8UC3, ref)
	if err != nil {
		t.Fatal(err)
	}
	defer orig.Close()

	cvJPEG, err := gocv.IMEncodeWithParams(gocv.JPEGFileExt, orig, []int{gocv.IMWriteJpegQuality, 95})
	if err != nil {
		t.Fatal(err)
	}
	cvBytes := append([]byte(nil), cvJPEG.GetBytes()...)
	cvJPEG.Close()

	var goBuf bytes.Buffer
	if err := jpeg.Encode(&goBuf, img, &jpeg.Options{Quality: 90}); err != nil {
		t.Fatal(err)
	}
	goDecoded, err := jpeg.Decode(bytes.NewReader(goBuf.Bytes()))
	if err != nil {
		t.Fatal(err)
	}

	dst := gocv.NewMat()
	defer dst.Close()
	for _, tc := range []struct {
		name    string
		data    []byte
		against []byte
		minDB   float64
	}{
		{"OpenCV imencode q95 vs original", cvBytes, ref, 30},
		{"Go image/jpeg q90 vs original", goBuf.Bytes(), ref, 30},
		{"Go image/jpeg q90 vs Go's decoder", goBuf.Bytes(), bgrBytes(goDecoded), 40},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if err := v4l2.DecodeMJPEG(tc.data, &dst); err != nil {
				t.Fatal(err)
			}
			got := psnr(t, matBytes(t, dst, w, h), tc.against)
			t.Logf("PSNR %.1f dB", got)
			if got < tc.minDB {
				t.Errorf("PSNR %.1f dB < %.0f dB", got, tc.minDB)
			}
		})
	}
}

// Bad bytes must give ErrUnreadable, never reach OpenCV in a way that
// aborts the process.
func TestDecodeRejectsBadInput(t *testing.T) {
	dst := gocv.NewMat()
	defer dst.Close()
	noise := make([]byte, 2048)
	noise[0], noise[1] = 0xFF, 0xD8
	for i := 2; i < len(noise); i++ {
		noise[i] = byte(i * 131)
	}
	tests := []struct {
		name string
		f    v4l2.Format
		data []byte
	}{
		{"MJPEG nil", capturetest.MJPEG320, nil},
		{"MJPEG two bytes", capturetest.MJPEG320, []byte{0xFF, 0xD8}},
		{"MJPEG no start marker", capturetest.MJPEG320, []byte("not a jpeg at all")},
		{"MJPEG start marker then noise", capturetest.MJPEG320, noise},
		{"YUYV short", capturetest.YUYV320, make([]byte, 320*240*2-1)},
		{"YUYV long", capturetest.YUYV320, make([]byte, 320*240*2+4)},
		{"YUYV odd width", v4l2.Format{Pixel: v4l2.YUYV, Size: image.Pt(321, 240)}, make([]byte, 321*240*2)},
		{"YUYV zero size", v4l2.Format{Pixel: v4l2.YUYV}, nil},
		{"unknown pixel format", v4l2.Format{Pixel: 0x34363248, Size: image.Pt(4, 4)}, make([]byte, 32)},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := v4l2.Decode(tc.data, tc.f, &dst)
			if !errors.Is(err, capture.ErrUnreadable) {
				t.Errorf("err = %v, want ErrUnreadable", err)
			}
		})
	}
}

// bt601 converts video-range Y'CbCr to 8-bit R'G'B' by hand from the ITU-R
// BT.601 luma coefficients Kr = 0.299, Kb = 0.114 (Kg = 1 − Kr − Kb) and
// the video ranges Y' 16–235, Cb/Cr 16–240 (ITU-R BT.601-7, section 2.5):
// E'R = Y + 2(1−Kr)·Cr, E'B = Y + 2(1−Kb)·Cb,
// E'G = Y − 2Kb(1−Kb)/Kg·Cb − 2Kr(1−Kr)/Kg·Cr.
func bt601(y, cb, cr byte) (r, g, b float64) {
	const kr, kb = 0.299, 0.114
	const kg = 1 - kr - kb
	Y := (float64(y) - 16) / 219
	Cb := (float64(cb) - 128) / 224
	Cr := (float64(cr) - 128) / 224
	R := Y + 2*(1-kr)*Cr
	B := Y + 2*(1-kb)*Cb
	G := Y - 2*kb*(1-kb)/kg*Cb - 2*kr*(1-kr)/kg*Cr
	clamp := func(v float64) float64 { return math.Max(0, math.Min(255, v*255)) }
	return clamp(R), clamp(G), clamp(B)
}

// OpenCV's YUY2 conversion (used by DecodeYUYV) agrees with the hand-made
// BT.601 conversion within 2 levels over the whole legal range.
func TestDecodeYUYVMatchesBT601(t *testing.T) {
	const w, h = 64, 48
	raw := make([]byte, w*h*2)
	x := uint32(12345)
	rnd := func(lo, hi int) byte {
		x = x*1664525 + 1013904223 // Numerical Recipes LCG
		return byte(lo + int(x>>8)%(hi-lo+1))
	}
	for i := 0; i < len(raw); i += 4 {
		raw[i], raw[i+1], raw[i+2], raw[i+3] = rnd(16, 235), rnd(16, 240), rnd(16, 235), rnd(16, 240)
	}
	// Corners of the legal range, explicitly.
	copy(raw, []byte{16, 128, 235, 128, 16, 16, 235, 240, 128, 240, 128, 16})

	dst := gocv.NewMat()
	defer dst.Close()
	if err := v4l2.DecodeYUYV(raw, image.Pt(w, h), &dst); err != nil {
		t.Fatal(err)
	}
	got := matBytes(t, dst, w, h)
	worst := 0.0
	for p := 0; p < w*h; p++ {
		pair := (p / 2) * 4
		y := raw[pair+(p%2)*2]
		r, g, b := bt601(y, raw[pair+1], raw[pair+3])
		for c, want := range []float64{b, g, r} {
			d := math.Abs(float64(got[p*3+c]) - want)
			worst = math.Max(worst, d)
			if d > 2 {
				t.Fatalf("pixel %d channel %d: OpenCV %d, BT.601 %.2f (Y %d Cb %d Cr %d)", p, c, got[p*3+c], want, y, raw[pair+1], raw[pair+3])
			}
		}
	}
	t.Logf("worst difference %.2f levels", worst)
}

// A frame encoded to YUYV by capturetest (BT.601 forward) comes back
// within a few levels where chroma does not change inside a pixel pair.
func TestDecodeYUYVRoundTrip(t *testing.T) {
	size := image.Pt(320, 240)
	img := capturetest.Pattern(size, 7)
	dst := gocv.NewMat()
	defer dst.Close()
	if err := v4l2.DecodeYUYV(capturetest.EncodeYUYV(img), size, &dst); err != nil {
		t.Fatal(err)
	}
	got := matBytes(t, dst, size.X, size.Y)
	if p := psnr(t, got, bgrBytes(img)); p < 40 {
		t.Errorf("round trip PSNR %.1f dB < 40", p)
	}
	if k, ok := capturetest.FrameNumber(dst); !ok || k != 7 {
		t.Errorf("frame number %d %v, want 7", k, ok)
	}
}

func BenchmarkDecodeMJPEG640(b *testing.B) {
	data := capturetest.PatternBytes(capturetest.MJPEG640, 3)
	dst := gocv.NewMat()
	defer dst.Close()
	b.SetBytes(int64(len(data)))
	for i := 0; i < b.N; i++ {
		if err := v4l2.DecodeMJPEG(data, &dst); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkDecodeYUYV640(b *testing.B) {
	data := capturetest.PatternBytes(capturetest.YUYV640, 3)
	dst := gocv.NewMat()
	defer dst.Close()
	b.SetBytes(int64(len(data)))
	for i := 0; i < b.N; i++ {
		if err := v4l2.DecodeYUYV(data, capturetest.YUYV640.Size, &dst); err != nil {
			b.Fatal(err)
		}
	}
}
