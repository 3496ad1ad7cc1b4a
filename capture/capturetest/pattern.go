package capturetest

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"image/jpeg"

	"github.com/hewline/hewline/capture/v4l2"
	"gocv.io/x/gocv"
)

// Formats used often in tests.
var (
	MJPEG640 = v4l2.Format{Pixel: v4l2.MJPEG, Size: image.Pt(640, 480)}
	YUYV640  = v4l2.Format{Pixel: v4l2.YUYV, Size: image.Pt(640, 480)}
	MJPEG320 = v4l2.Format{Pixel: v4l2.MJPEG, Size: image.Pt(320, 240)}
	YUYV320  = v4l2.Format{Pixel: v4l2.YUYV, Size: image.Pt(320, 240)}
)

// Pattern layout: frame numbers are written as 16 bits, most significant
// first, in 16×16 squares along the top row (white = 1). Squares aligned to
// 16 pixels survive JPEG's 8×8 blocks and 4:2:2 chroma.
const (
	bitSquare = 16
	bitCount  = 16
)

// Pattern draws test frame k of the given size: a dark floor, a yellow
// vertical stripe 24 px wide whose centre walks ±40 px around the middle
// as k grows (centre = W/2 + 4·((k mod 21) − 10)), and k written in binary
// along the top row (see FrameNumber). Widths below 256 px get fewer bits.
func Pattern(size image.Point, k int) *image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, size.X, size.Y))
	floor := color.RGBA{60, 60, 60, 255}
	stripe := color.RGBA{230, 200, 40, 255} // RGB: yellow tape
	cx := StripeCentre(size, k)
	for y := 0; y < size.Y; y++ {
		for x := 0; x < size.X; x++ {
			c := floor
			if x >= cx-12 && x < cx+12 {
				c = stripe
			}
			img.SetRGBA(x, y, c)
		}
	}
	for b := 0; b < bitCount && (b+1)*bitSquare <= size.X && bitSquare <= size.Y; b++ {
		on := k>>(bitCount-1-b)&1 == 1
		c := color.RGBA{0, 0, 0, 255}
		if on {
			c = color.RGBA{255, 255, 255, 255}
		}
		for y := 0; y < bitSquare; y++ {
			for x := b * bitSquare; x < (b+1)*bitSquare; x++ {
				img.SetRGBA(x, y, c)
			}
		}
	}
	return img
}

// StripeCentre is the x of the stripe's centre in Pattern(size, k).
func StripeCentre(size image.Point, k int) int { return size.X/2 + 4*((k%21)-10) }

// FrameNumber reads the number Pattern wrote into a decoded BGR frame;
// ok is false when m is too small or not 8-bit BGR.
func FrameNumber(m gocv.Mat) (k int, ok bool) {
	if m.Empty() || m.Type() != gocv.MatTypeCV8UC3 || m.Cols() < bitCount*bitSquare || m.Rows() < bitSquare {
		return 0, false
	}
	for b := 0; b < bitCount; b++ {
		v := m.GetVecbAt(bitSquare/2, b*bitSquare+bitSquare/2)
		k <<= 1
		if int(v[0])+int(v[1])+int(v[2]) > 3*128 {
			k |= 1
		}
	}
	return k, true
}

// EncodeMJPEG encodes img as one MJPEG frame (a baseline JPEG, quality 90)
// with Go's standard encoder.
func EncodeMJPEG(img image.Image) []byte {
	var b bytes.Buffer
	if err := jpeg.Encode(&b, img, &jpeg.Options{Quality: 90}); err != nil {
		panic(fmt.Sprintf("capturetest: jpeg encode: %v", err)) // cannot fail for in-memory RGBA
	}
	return b.Bytes()
}

// EncodeYUYV converts img (even width) to packed YUYV 4:2:2 with the ITU-R
// BT.601 luma coefficients (Kr = 0.299, Kb = 0.114) in video range (Y 16–235,
// Cb/Cr 16–240), chroma averaged over each pixel pair.
func EncodeYUYV(img image.Image) []byte {
	r := img.Bounds()
	w, h := r.Dx(), r.Dy()
	out := make([]byte, 0, w*h*2)
	clamp := func(v float64) byte {
		v += 0.5
		if v < 0 {
			return 0
		}
		if v > 255 {
			return 255
		}
		return byte(v)
	}
	for y := 0; y < h; y++ {
		for x := 0; x+1 < w; x += 2 {
			var ys [2]float64
			var cb, cr float64
			for i := 0; i < 2; i++ {
				R, G, B, _ := img.At(r.Min.X+x+i, r.Min.Y+y).RGBA()
				fr, fg, fb := float64(R>>8), float64(G>>8), float64(B>>8)
				luma := 0.299*fr + 0.587*fg + 0.114*fb
				ys[i] = 16 + 219*luma/255
				// Cb = (B' − Y')/(2(1 − Kb)), Cr = (R' − Y')/(2(1 − Kr)).
				cb += (fb - luma) / 1.772 / 2
				cr += (fr - luma) / 1.402 / 2
			}
			cb = 128 + 224*cb/255
			cr = 128 + 224*cr/255
			out = append(out, clamp(ys[0]), clamp(cb), clamp(ys[1]), clamp(cr))
		}
	}
	return out
}

// PatternBytes returns frame k of Pattern encoded in format f.
func PatternBytes(f v4l2.Format, k int) []byte {
	img := Pattern(f.Size, k)
	if f.Pixel == v4l2.YUYV {
		return EncodeYUYV(img)
	}
	return EncodeMJPEG(img)
}

// PatternMat returns Pattern(size, k) as a new 8-bit BGR Mat; the caller
// owns it and must Close it.
func PatternMat(size image.Point, k int) gocv.Mat {
	img := Pattern(size, k)
	b := make([]byte, 0, size.X*size.Y*3)
	for i := 0; i < len(img.Pix); i += 4 {
		b = append(b, img.Pix[i+2], img.Pix[i+1], img.Pix[i])
	}
	m, err := gocv.NewMatFromBytes(size.Y, size.X, gocv.MatTypeCV8UC3, b)
	if err != nil {
		panic(fmt.Sprintf("capturetest: pattern Mat: %v", err)) // sizes are ours
	}
	defer m.Close()
	return m.Clone()
}
