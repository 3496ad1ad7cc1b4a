package cnn

import (
	"fmt"
	"image"
	"math"
	"slices"

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
	// RefRowFrac, when > 0, puts RefRow at this fraction of the frame's
	// height (the classical detector's convention, vision.Config.RefRow),
	// so that both detectors measure offset and heading at the same row.
	// It overrides RefRow.
	RefRowFrac float64
	// MinRows is the fewest anchor rows that must see the stripe
	// confidently and lie on one curve for a detection [3].
	MinRows int
	// MinRowConf is the lowest per-row confidence (Row.Conf) for a row
	// to count as seeing the stripe [0.5].
	MinRowConf float64
	// MinRowContrast is the least Row.Contrast, in the standardised
	// input's units (the frame's grey-level standard deviations), for a
	// fitted row to count as Seen [0.5]; it must also stand three robust
	// deviations out of its band (see Row.Seen).
	MinRowContrast float64
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
	// Fitted is true when the row was confident enough and lay on the
	// fitted curve (see Detector.Detect).
	Fitted bool
	// Contrast is what the image itself shows at X, valid when Present:
	// the largest deviation from the band's median of the network input's
	// column profile (the band's rows averaged, in standardised grey
	// levels) within one input pixel of X. Spread is the band profile's
	// robust standard deviation (1.4826 × its median absolute deviation).
	Contrast, Spread float64
	// Seen is true when the row is Fitted and the image shows something at
	// X: Contrast ≥ MinRowContrast and ≥ 3 Spread. The network reads rows
	// in context and carries a line on across a gap or past its end with
	// full confidence; Seen is the check that the stripe is there.
	Seen bool
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
	// Per-frame fit buffers, reused.
	xs, ys, ws []float64
	idx        []int
	prof, dev  []float64 // rowContrast's buffers, InW each
	found      bool      // the last Detect found the stripe
}

// NewDetector validates and loads modelBytes (see Load). It does not
// retain modelBytes.
func NewDetector(modelBytes []byte, cfg Config) (*Detector, error) {
	if cfg.MinRows <= 0 {
		cfg.MinRows = 3
	}
	if cfg.MinRowConf <= 0 {
		cfg.MinRowConf = 0.5
	}
	if cfg.MinRowContrast <= 0 {
		cfg.MinRowContrast = 0.5
	}
	if cfg.MinRowConf >= 1 || cfg.RefRowFrac < 0 || cfg.RefRowFrac >= 1 {
		return nil, fmt.Errorf("cnn: MinRowConf %v and RefRowFrac %v must be in [0, 1)", cfg.MinRowConf, cfg.RefRowFrac)
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
		in: make([]float32, a.InW*a.InH), out: make([]float32, a.Outputs()), rows: make([]Row, a.Rows),
		xs: make([]float64, 0, a.Rows), ys: make([]float64, 0, a.Rows), ws: make([]float64, 0, a.Rows), idx: make([]int, 0, a.Rows),
		prof: make([]float64, a.InW), dev: make([]float64, a.InW)}, nil
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
// network always searches the whole region (the caller, pipeline.Fused,
// checks the result against the tracker's prediction). WidthPx is always
// 0: the network does not measure the stripe's width.
//
// A row counts when its most probable class is a cell with a confidence
// (Row.Conf) of at least MinRowConf. The rows are fitted robustly: after
// each weighted least-squares fit the row farthest from the curve is
// dropped while it lies more than one cell away, and the frame is refused
// when fewer than MinRows rows remain on the curve, or when they do not
// lie on both sides of the reference row (the offset would be an
// extrapolation, or read off the last rows of a line that ends there).
//
// Confidence is the mean, over the fitted rows, of each row's
// probability mass near its peak, times min(1, fitted rows / half the
// rows) (a stripe seen on few rows is less trusted), times
// 1/(1 + (rms/cell)²) where rms is the scatter of the rows about the
// curve and cell the width of one column cell.
func (d *Detector) Detect(img gocv.Mat, hint vision.Hint) vision.Detection {
	_ = hint
	d.found = false
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
	xs, ys, ws, idx := d.xs[:0], d.ys[:0], d.ws[:0], d.idx[:0]
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
			row.Contrast, row.Spread = d.rowContrast(r, (row.X-float64(roi.Min.X))/float64(roi.Dx())*float64(a.InW))
			if s >= d.cfg.MinRowConf {
				xs, ys, ws, idx = append(xs, row.X), append(ys, row.Y), append(ws, s), append(idx, r)
			}
		}
		d.rows[r] = row
	}
	if len(xs) < d.cfg.MinRows {
		det.Reason = fmt.Sprintf("stripe seen confidently on %d of %d rows", len(xs), a.Rows)
		return det
	}
	ref := d.cfg.RefRow
	switch {
	case d.cfg.RefRowFrac > 0:
		ref = d.cfg.RefRowFrac * float64(img.Rows())
	case ref == 0:
		ref = anchorY(a, roi, a.Rows-1)
	}
	// Robust fit: fit the rows, drop the one farthest from the curve
	// while it is more than one cell away, fit again. A stripe is a
	// smooth curve; rows that do not lie on one are not a stripe.
	var c [3]float64
	for {
		deg := 1
		if len(xs) >= 5 {
			deg = 2
		}
		var ok bool
		if c, ok = fitPoly(ys, xs, ws, ref, deg); !ok {
			det.Reason = "rows do not fit a curve"
			return det
		}
		worst, we := -1, 0.0
		for i := range xs {
			t := ys[i] - ref
			if e := math.Abs(xs[i] - (c[0] + c[1]*t + c[2]*t*t)); e > we {
				worst, we = i, e
			}
		}
		if we <= cellW {
			break
		}
		if len(xs) <= d.cfg.MinRows {
			det.Reason = fmt.Sprintf("rows do not lie on one curve (a row %.0f px off it)", we)
			return det
		}
		xs = append(xs[:worst], xs[worst+1:]...)
		ys = append(ys[:worst], ys[worst+1:]...)
		ws = append(ws[:worst], ws[worst+1:]...)
		idx = append(idx[:worst], idx[worst+1:]...)
	}
	for _, r := range idx {
		row := &d.rows[r]
		row.Fitted = true
		row.Seen = row.Contrast >= d.cfg.MinRowContrast && row.Contrast >= 3*row.Spread
	}
	n := len(xs)
	// The offset is read at the reference row: the stripe must cross it,
	// seen on fitted rows above and below it, so that the offset is
	// neither extrapolated from far rows nor read off the last rows of a
	// line that is ending.
	if ys[0] > ref || ys[n-1] < ref {
		det.Reason = fmt.Sprintf("stripe seen on rows %.0f–%.0f, not across the reference row %.0f", ys[0], ys[n-1], ref)
		return det
	}
	var rss, wsum, confSum float64
	for i := range xs {
		t := ys[i] - ref
		e := xs[i] - (c[0] + c[1]*t + c[2]*t*t)
		rss += ws[i] * e * e
		wsum += ws[i]
		confSum += ws[i]
	}
	rms := math.Sqrt(rss / wsum)
	cover := math.Min(1, float64(n)/(float64(a.Rows)/2))
	fit := 1 / (1 + (rms/cellW)*(rms/cellW))
	det.Found, d.found = true, true
	det.Confidence = confSum / float64(n) * cover * fit
	det.RefRow = ref
	det.OffsetPx = c[0] - float64(img.Cols())/2
	det.HeadingDeg = math.Atan(-c[1]) * 180 / math.Pi
	// The points run from the top fitted row to the bottom one, and on to
	// the region's bottom edge (half a band) when the lowest anchor row
	// is among them.
	yTop, yBot := ys[0], ys[n-1]
	if idx[n-1] == a.Rows-1 {
		yBot = float64(roi.Max.Y - 1)
	}
	np := max(8, n)
	det.Points = make([]vision.Point, np)
	for i := range det.Points {
		y := yBot + (yTop-yBot)*float64(i)/float64(np-1)
		t := y - ref
		det.Points[i] = vision.Point{X: c[0] + c[1]*t + c[2]*t*t, Y: y}
	}
	return det
}

// Coverage is the share of the last Detect's anchor rows between frame
// rows y0 and y1 (y0 ≤ Y < y1) that are Seen: fitted and showing the
// stripe in the image. It is 0 when no anchor row lies there or nothing
// was found. pipeline.Fused uses it to keep the network from carrying a
// track over rows where the line has ended.
func (d *Detector) Coverage(y0, y1 float64) float64 {
	if !d.found {
		return 0
	}
	n, seen := 0, 0
	for _, r := range d.rows {
		if r.Y >= y0 && r.Y < y1 {
			n++
			if r.Seen {
				seen++
			}
		}
	}
	if n == 0 {
		return 0
	}
	return float64(seen) / float64(n)
}

// rowContrast measures anchor row r's band of the network input at input
// column xi (pixel centres at i+0.5): see Row.Contrast.
func (d *Detector) rowContrast(r int, xi float64) (contrast, spread float64) {
	a := d.net.Model().Arch
	y0, y1 := r*a.InH/a.Rows, (r+1)*a.InH/a.Rows
	if y1 <= y0 {
		y1 = y0 + 1
	}
	p, dev := d.prof[:a.InW], d.dev[:a.InW]
	for x := range p {
		var s float64
		for y := y0; y < y1; y++ {
			s += float64(d.in[y*a.InW+x])
		}
		p[x] = s / float64(y1-y0)
	}
	copy(dev, p)
	slices.Sort(dev)
	med := dev[len(dev)/2]
	for i, v := range p {
		dev[i] = math.Abs(v - med)
	}
	slices.Sort(dev)
	spread = 1.4826 * dev[len(dev)/2]
	c := int(math.Floor(xi))
	for x := max(0, c-1); x <= min(a.InW-1, c+1); x++ {
		contrast = math.Max(contrast, math.Abs(p[x]-med))
	}
	return contrast, spread
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
