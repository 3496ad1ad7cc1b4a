package cnn

import (
	"fmt"
	"image"
	"math"

	"github.com/hewline/hewline/vision"
	"gocv.io/x/gocv"
)

func imagePt(x, y int) image.Point { return image.Point{X: x, Y: y} }

// Preprocessor turns a BGR frame's region of interest into the network's
// input: grey, resized to InW×InH with area averaging, then standardised
// to zero mean and unit standard deviation (so that dim and bright frames
// look alike; the deviation is floored at 2 grey levels so that a blank
// frame does not blow up its noise). It owns two Mats; Close them.
type Preprocessor struct {
	a           Arch
	grey, small gocv.Mat
}

// NewPreprocessor makes a Preprocessor for architecture a.
func NewPreprocessor(a Arch) *Preprocessor {
	return &Preprocessor{a: a, grey: gocv.NewMat(), small: gocv.NewMat()}
}

// Run writes the input for the part roi of img into dst (InH×InW values).
// A zero roi means the whole frame. It does not retain img or dst.
func (p *Preprocessor) Run(img gocv.Mat, roi image.Rectangle, dst []float32) error {
	if img.Empty() || img.Type() != gocv.MatTypeCV8UC3 {
		return fmt.Errorf("cnn: input must be a non-empty 8-bit BGR Mat")
	}
	if len(dst) != p.a.InW*p.a.InH {
		return fmt.Errorf("cnn: input buffer of %d values, want %d", len(dst), p.a.InW*p.a.InH)
	}
	full := image.Rect(0, 0, img.Cols(), img.Rows())
	if roi.Empty() {
		roi = full
	}
	if !roi.In(full) || roi.Dx() < 2 || roi.Dy() < 2 {
		return fmt.Errorf("cnn: region %v not inside the %dx%d frame", roi, img.Cols(), img.Rows())
	}
	region := img.Region(roi)
	gocv.CvtColor(region, &p.grey, gocv.ColorBGRToGray)
	region.Close()
	gocv.Resize(p.grey, &p.small, imagePt(p.a.InW, p.a.InH), 0, 0, gocv.InterpolationArea)
	px, err := p.small.DataPtrUint8()
	if err != nil {
		return fmt.Errorf("cnn: resize: %w", err)
	}
	var sum, sq float64
	for _, v := range px {
		sum += float64(v)
		sq += float64(v) * float64(v)
	}
	n := float64(len(px))
	mean := sum / n
	sd := math.Max(math.Sqrt(math.Max(sq/n-mean*mean, 0)), 2)
	for i, v := range px {
		dst[i] = float32((float64(v) - mean) / sd)
	}
	return nil
}

// Close frees the Mats.
func (p *Preprocessor) Close() error {
	p.grey.Close()
	return p.small.Close()
}

// anchorY returns the frame row of anchor row r inside roi: the centre of
// the r-th of Rows equal bands, from the top.
func anchorY(a Arch, roi image.Rectangle, r int) float64 {
	return float64(roi.Min.Y) + (float64(r)+0.5)*float64(roi.Dy())/float64(a.Rows)
}

// Labels returns, for each anchor row of roi (top to bottom), the column
// cell holding the centreline pts (frame pixels, in order along the line)
// or Absent when the line does not cross that row inside roi. The x at an
// anchor row is interpolated between the two points that bracket it.
func Labels(a Arch, roi image.Rectangle, pts []vision.Point) []uint8 {
	lab := make([]uint8, a.Rows)
	for r := range lab {
		lab[r] = uint8(a.Absent())
		y := anchorY(a, roi, r)
		for i := 1; i < len(pts); i++ {
			p, q := pts[i-1], pts[i]
			if (y-p.Y)*(y-q.Y) > 0 || p.Y == q.Y {
				continue
			}
			x := p.X + (q.X-p.X)*(y-p.Y)/(q.Y-p.Y)
			c := int(math.Floor((x - float64(roi.Min.X)) / float64(roi.Dx()) * float64(a.Cells)))
			if c >= 0 && c < a.Cells {
				lab[r] = uint8(c)
			}
			break
		}
	}
	return lab
}
