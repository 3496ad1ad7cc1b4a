package reffollow

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"

	"gocv.io/x/gocv"
)

// Line is what the follower found in one frame.
type Line struct {
	// Found is false when there is no blob large enough; Reason says why.
	Found  bool
	Reason string
	// Points are the band centroids, near (bottom) end first, padded with
	// the last one to at least 8 (what the pipeline expects).
	Points [][2]float64
	// RefRow, OffsetPx and HeadingDeg as in package vision: the fitted
	// line at RefRow, x − W/2, and its angle from image-up, positive when
	// it leans right.
	RefRow, OffsetPx, HeadingDeg float64
}

// ErrInput marks a frame the follower cannot take (empty, wrong type,
// smaller than 16×16).
var ErrInput = errors.New("reffollow: unusable frame")

// Follower holds the working Mats, reused from frame to frame. It is not
// safe for concurrent use; Close releases the Mats.
type Follower struct {
	// Dark is true for a stripe darker than the floor.
	Dark                                bool
	grey, bin, labels, stats, centroids gocv.Mat
}

// New returns a follower for a light (dark false) or dark stripe.
func New(dark bool) *Follower {
	return &Follower{Dark: dark, grey: gocv.NewMat(), bin: gocv.NewMat(),
		labels: gocv.NewMat(), stats: gocv.NewMat(), centroids: gocv.NewMat()}
}

// Close releases the follower's Mats.
func (f *Follower) Close() error {
	for _, m := range []*gocv.Mat{&f.grey, &f.bin, &f.labels, &f.stats, &f.centroids} {
		m.Close()
	}
	return nil
}

// Find looks for the stripe in img (8-bit BGR or grey; not kept) and
// reports the fitted line at row refRow. A frame it cannot take gives
// Found false with an ErrInput reason.
func (f *Follower) Find(img gocv.Mat, refRow float64) Line {
	w, h := img.Cols(), img.Rows()
	switch {
	case img.Empty() || w < 16 || h < 16:
		return Line{Reason: fmt.Sprintf("%v: %dx%d", ErrInput, w, h)}
	case img.Type() == gocv.MatTypeCV8UC3:
		gocv.CvtColor(img, &f.grey, gocv.ColorBGRToGray)
	case img.Type() == gocv.MatTypeCV8UC1:
		img.CopyTo(&f.grey)
	default:
		return Line{Reason: fmt.Sprintf("%v: Mat type %v", ErrInput, img.Type())}
	}
	if f.Dark {
		gocv.BitwiseNot(f.grey, &f.grey)
	}
	block := max(3, w/10) | 1
	gocv.AdaptiveThreshold(f.grey, &f.bin, 255, gocv.AdaptiveThresholdMean, gocv.ThresholdBinary, block, -10)
	n := gocv.ConnectedComponentsWithStats(f.bin, &f.labels, &f.stats, &f.centroids)
	best, bestArea := -1, 0
	for i := 1; i < n; i++ {
		top, height := int(f.stats.GetIntAt(i, 1)), int(f.stats.GetIntAt(i, 3))
		area := int(f.stats.GetIntAt(i, 4))
		if top+height > h/2 && area > bestArea {
			best, bestArea = i, area
		}
	}
	if best < 0 || bestArea < w*h/2000 {
		return Line{Reason: "no blob"}
	}
	lab, err := f.labels.DataPtrUint8() // CV_32S, continuous, native order
	if err != nil || len(lab) != 4*w*h {
		return Line{Reason: fmt.Sprintf("labels not readable: %v", err)}
	}
	const bands = 16
	var sy, sx, syy, sxy, cnt float64
	var pts [][2]float64
	for b := bands - 1; b >= 0; b-- {
		y0, y1 := b*h/bands, (b+1)*h/bands
		var xs, k float64
		for y := y0; y < y1; y++ {
			row := lab[4*y*w : 4*(y+1)*w]
			for x := 0; x < w; x++ {
				if int(int32(binary.NativeEndian.Uint32(row[4*x:]))) == best {
					xs += float64(x)
					k++
				}
			}
		}
		if k == 0 {
			continue
		}
		x, y := xs/k, float64(y0+y1-1)/2
		pts = append(pts, [2]float64{x, y})
		sy += y
		sx += x
		syy += y * y
		sxy += x * y
		cnt++
	}
	if cnt < 2 {
		return Line{Reason: "too few bands"}
	}
	slope := (cnt*sxy - sx*sy) / (cnt*syy - sy*sy)
	icpt := (sx - slope*sy) / cnt
	for len(pts) < 8 {
		pts = append(pts, pts[len(pts)-1])
	}
	return Line{
		Found: true, Points: pts, RefRow: refRow,
		OffsetPx:   icpt + slope*refRow - float64(w)/2,
		HeadingDeg: math.Atan(-slope) * 180 / math.Pi,
	}
}
