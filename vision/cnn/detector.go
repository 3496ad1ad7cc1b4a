package cnn

import (
	"fmt"
	"image"
	"math"

	"github.com/hewline/hewline/vision"
	"gocv.io/x/gocv"
)

// Method is the Detection.Method of this package's detector.
const Method = "cnn"

// Config sets up a Detector. The zero value is usable.
type Config struct {
	// ROI is the part of the frame the network looks at, in frame
	// pixels; the zero rectangle means the whole frame.
	ROI image.Rectangle
	// RefRow is the frame row where OffsetPx and HeadingDeg are
	// measured; 0 means the lowest anchor row.
	RefRow float64
	// MinRows is the fewest anchor rows with a stripe for a detection
	// [3].
	MinRows int
}

// Row is one anchor row's reading.
type Row struct {
	// Y is the anchor row in frame pixels.
	Y float64
	// Present is true when the most probable class is a column cell.
	Present bool
	// X is the centre in frame pixels: the probability-weighted mean of
	// the most probable cell and its two neighbours (as in Qin et al.,
	// ECCV 2020), valid when Present.
	X float64
	// Conf is the probability mass of those three cells when Present,
	// and the probability of "absent" otherwise.
	Conf float64
}

// Detector finds the stripe with the row-anchor network through OpenCV's
// DNN module. It holds preallocated Mats and buffers, is not safe for
// concurrent use, and never retains the frames it is given.
type Detector struct {
	cfg  Config
	net  *Net
	pre  *Preprocessor
	in   []float32
	out  []float32
	rows []Row
}

// NewDetector validates and loads modelBytes (see Load). It does not
// retain modelBytes.
func NewDetector(modelBytes []byte, cfg Config) (*Detector, error) {
	if cfg.MinRows <= 0 {
		cfg.MinRows = 3
	}
	net, err := Load(modelBytes)
	if err != nil {
		return nil, err
	}
	a := net.Model().Arch
	if cfg.MinRows > a.Rows {
		net.Close()
		return nil, fmt.Errorf("cnn: MinRows %d but the model has %d rows", cfg.MinRows, a.Rows)
	}
	return &Detector{cfg: cfg, net: net, pre: NewPreprocessor(a),
		in: make([]float32, a.InW*a.InH), out: make([]float32, a.Outputs()), rows: make([]Row, a.Rows)}, nil
}

// Arch returns the loaded model's architecture.
func (d *Detector) Arch() Arch { return d.net.Model().Arch }

// Notes returns the loaded model's metadata notes (training command,
// seed, validation accuracy). The caller must not modify the map.
func (d *Detector) Notes() map[string]string { return d.net.Model().Notes }

// Rows returns the anchor rows of the last Detect, top to bottom. The
// slice is reused by the next Detect; copy it to keep it.
func (d *Detector) Rows() []Row { return d.rows }

// Detect measures the stripe in img (8-bit BGR). hint is not used: the
// network always searches the whole region. WidthPx is always 0: the
// network does not measure the stripe's width.
//
// Confidence is the mean, over the rows where the stripe was found, of
// each row's probability mass near its peak, times min(1, found rows /
// half the rows) (a stripe seen on few rows is less trusted), times
// 1/(1 + (rms/cell)²) where rms is the scatter of the rows about the
// fitted curve and cell the width of one column cell.
func (d *Detector) Detect(img gocv.Mat, hint vision.Hint) vision.Detection {
	_ = hint
	det := vision.Detection{Method: Method}
	a := d.net.Model().Arch
	roi := d.cfg.ROI
	if roi.Empty() {
		roi = image.Rect(0, 0, img.Cols(), img.Rows())
	}
	if err := d.pre.Run(img, roi, d.in); err != nil {
		det.Reason = err.Error()
		return det
	}
	if err := d.net.Forward(d.in, d.out); err != nil {
		det.Reason = err.Error()
		return det
	}
	cellW := float64(roi.Dx()) / float64(a.Cells)
	k := a.Classes()
	var xs, ys, ws []float64
	var confSum float64
	for r := 0; r < a.Rows; r++ {
		p := d.out[r*k : (r+1)*k]
		row := Row{Y: anchorY(a, roi, r)}
		am := argmax(p)
		if am == a.Absent() {
			row.Conf = float64(p[am])
		} else {
			var s, m float64
			for i := max(0, am-1); i <= min(a.Cells-1, am+1); i++ {
				s += float64(p[i])
				m += float64(p[i]) * (float64(i) + 0.5)
			}
			row.Present, row.Conf = true, s
			row.X = float64(roi.Min.X) + m/s*cellW
			xs, ys, ws = append(xs, row.X), append(ys, row.Y), append(ws, s)
			confSum += s
		}
		d.rows[r] = row
	}
	n := len(xs)
	if n < d.cfg.MinRows {
		det.Reason = fmt.Sprintf("stripe on %d of %d rows", n, a.Rows)
		return det
	}
	ref := d.cfg.RefRow
	if ref == 0 {
		ref = anchorY(a, roi, a.Rows-1)
	}
	deg := 1
	if n >= 5 {
		deg = 2
	}
	c, ok := fitPoly(ys, xs, ws, ref, deg)
	if !ok {
		det.Reason = "rows do not fit a curve"
		return det
	}
	var rss, wsum float64
	for i := range xs {
		t := ys[i] - ref
		e := xs[i] - (c[0] + c[1]*t + c[2]*t*t)
		rss += ws[i] * e * e
		wsum += ws[i]
	}
	rms := math.Sqrt(rss / wsum)
	cover := math.Min(1, float64(n)/(float64(a.Rows)/2))
	fit := 1 / (1 + (rms/cellW)*(rms/cellW))
	det.Found = true
	det.Confidence = confSum / float64(n) * cover * fit
	if fit < 0.5 {
		det.Reason = "rows scatter about the fit"
	}
	det.RefRow = ref
	det.OffsetPx = c[0] - float64(img.Cols())/2
	det.HeadingDeg = math.Atan(-c[1]) * 180 / math.Pi
	yTop, yBot := ys[0], ys[n-1]
	np := max(8, n)
	det.Points = make([]vision.Point, np)
	for i := range det.Points {
		y := yBot + (yTop-yBot)*float64(i)/float64(np-1)
		t := y - ref
		det.Points[i] = vision.Point{X: c[0] + c[1]*t + c[2]*t*t, Y: y}
	}
	return det
}

// fitPoly fits x = c0 + c1·t + c2·t² (c2 = 0 when deg is 1), t = y − ref,
// by weighted least squares through the normal equations.
func fitPoly(ys, xs, ws []float64, ref float64, deg int) ([3]float64, bool) {
	m := deg + 1
	var A [3][4]float64
	for i := range ys {
		t := ys[i] - ref
		pw := [3]float64{1, t, t * t}
		for r := 0; r < m; r++ {
			for c := 0; c < m; c++ {
				A[r][c] += ws[i] * pw[r] * pw[c]
			}
			A[r][3] += ws[i] * pw[r] * xs[i]
		}
	}
	// Gauss–Jordan elimination with partial pivoting.
	for col := 0; col < m; col++ {
		piv := col
		for r := col + 1; r < m; r++ {
			if math.Abs(A[r][col]) > math.Abs(A[piv][col]) {
				piv = r
			}
		}
		if math.Abs(A[piv][col]) < 1e-12 {
			return [3]float64{}, false
		}
		A[col], A[piv] = A[piv], A[col]
		for r := 0; r < m; r++ {
			if r == col {
				continue
			}
			f := A[r][col] / A[col][col]
			for c := col; c < 4; c++ {
				A[r][c] -= f * A[col][c]
			}
		}
	}
	var c [3]float64 // the right-hand side is column 3 whatever m is
	for r := 0; r < m; r++ {
		c[r] = A[r][3] / A[r][r]
	}
	return c, true
}

// Close frees the network and Mats.
func (d *Detector) Close() error {
	d.pre.Close()
	return d.net.Close()
}
