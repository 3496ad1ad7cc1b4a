package vision

import (
	"fmt"
	"image"
	"math"

	"gocv.io/x/gocv"
)

// Frame size limits of the classical detector, in input pixels. Smaller
// frames carry too few rows to fit a line; larger ones are refused rather
// than spending unbounded time in the downscale.
const (
	MinFrameWidth, MinFrameHeight = 32, 24
	MaxFrameWidth, MaxFrameHeight = 8192, 8192
)

// Classical is the classical (hand-designed) stripe detector. Its pipeline,
// per frame:
//
//  1. downscale the frame to Config.WorkWidth (the cost then does not grow
//     with the input size) and form an evidence image: luminance, plus
//     colour evidence when a tape colour is configured; without one, a
//     chromaticity image (opponent colours over luminance) as well, so
//     that a tape of the floor's luminance but another colour (green on
//     concrete, yellow on pale tiles or on an over-exposed floor) is seen;
//  2. in horizontal bands from the bottom of the region of interest up,
//     average the band's rows into a profile and look for stripe
//     candidates with a bank of box ridge filters (a centre box against a
//     box on each side, at widths from 2 px to 22 % of the working
//     width). A candidate must stand out from BOTH sides: a shadow edge
//     or a floor-colour change, bright on one side only, does not. The
//     contrast is measured as a ratio to the side level (Weber contrast),
//     so it does not change when the light dims or a shadow falls, and
//     against the frame's measured noise. The chroma channel runs the
//     same filters on each band's distance from the floor's (median)
//     chromaticity; grey distractors (grout, cracks, tyre marks, shadows)
//     are invisible in it. Where one side of a coloured stripe is lost
//     (washed out by a lamp's glare, or beyond the side of the region)
//     and its other edge is sharp, a cut crossing is placed half the
//     remembered width in from that edge (cutedge.go);
//  3. confirm each candidate with a Sauvola local threshold over a window
//     three stripe widths wide, and measure its edges at half height for
//     a sub-pixel centre and width;
//  4. fit a centreline x = a + b·y + c·y² to the candidates with RANSAC,
//     gated by the tracker's prediction when the Hint is valid, then by
//     weighted least squares on the inliers, rejecting candidates whose
//     width disagrees with the fitted width profile or that lie above
//     the line's own horizon (where the width of its near half runs out:
//     rack uprights and people standing on the line's far end, seen by a
//     low camera); a dotted or dashed
//     line is accepted with support in a fifth of its bands when that
//     support forms at least three separate marks, and run out across a
//     gap at the vehicle that is no longer on the floor than its own gaps
//     when two estimates of the unseen stretch agree (and the prediction,
//     when there is one). Bands where the line could not have been seen
//     (the stripe or its sides clipped by glare, or off the side of the
//     frame) are missing evidence: they count neither for nor against it,
//     and a near end hidden that way is run out to the bottom of the
//     region;
//  5. choose among the channels' lines by their support summed over every
//     channel (tape that is both lighter and coloured beats a tyre mark
//     that is only darker; on a tie, the colour channel's fit), keeping
//     only lines that reach the reference row; score the result: share
//     of bands along the line that support
//     it, span, residual, contrast, and whether another line is nearly as
//     strong where the two differ (ambiguity; a line that does not narrow
//     with the chosen line's perspective, such as a rack upright above
//     the horizon, is not on the floor and does not count), or the line is
//     far from the prediction, or its near stretch ends at the reference
//     row before a missing stretch longer than the line is run out across
//     (the line is going). A line whose near half is clipped (a lamp's
//     glare streak) is discounted in the choice as in the score. Offset
//     and heading are the quadratic's at the reference row; the points
//     along the line follow the perspective image of a path on the floor
//     instead (perspFit) where the line's own horizon lies in the region
//     and that curve halves the quadratic's squared residuals or better:
//     towards a low camera's horizon a bend swings across the image.
//
// A Classical is not safe for concurrent use; use one per goroutine.
type Classical struct {
	cfg      Config
	tape     BGR
	hasTape  bool
	tapeUnit [3]float64
	work     gocv.Mat // downscaled input, same type as the input
	workSize image.Point
	workType gocv.MatType
	haveWork bool
	evidence []float32 // working-size evidence image, row-major
	grey     []uint8   // working-size luminance, for saturation tests
	cr1, cr2 []float32 // working-size chromaticity (R−G, (R+G)/2−B over luminance)
	chromaOn bool      // this frame has chromaticity (colour input, no tape colour set)
	pc1, pc2 []float64 // band profiles of cr1, cr2
	scratch  []float64 // for medians
	// medians of the bands' floor level and colour and of the chroma
	// profile's steps, each guessed from the band below (nearMedian)
	medBase, medC1, medC2, medNoise nearMedian
	chans                           []selector
	perBand                         []float64 // per-band support of the chosen and the second line
	runs                            [][2]int  // stretches of a chroma profile above the contrast threshold
	profile                         []float64
	gmax                            []float64
	prefix                          []float64
	prefix2                         []float64
	cands                           []candidate
	bandCands                       []candidate
	byBand                          [][2]int
	widths                          []int
	satPrefix                       []uint16 // per band, running count of clipped columns (recordSaturation)
	voidPrefix                      []uint16 // per band, running count of columns outside the picture
	fit                             fitter
	rng                             uint64
	hairline                        float64      // width at which a candidate counts half, working px
	mirror                          mirrorMotion // the last frame, to tell mirrored lamps by motion
	// ownHorizon: inliers above a line's own horizon drop out of its fit
	// (see nearHorizon). Off in lane mode: with a wide lens the two
	// boundaries' far widths do not follow the pinhole's (lane-fisheye at
	// 320×240 lost 3 frames with it).
	ownHorizon bool
	// tangentEnds: a refit is judged plausible over its inliers' rows
	// (plausibleOver) as well as over the whole ROI, since beyond its
	// measured stretch a stripe is run out along its end tangents. Off
	// in lane mode, which reads the boundary curves over the whole ROI
	// (lane-s-curve at 320×240 fell from 0.927 to 0.547 recall with it).
	tangentEnds bool
	dashes      dashMemory  // the last dashed line's gap, for single dashes
	widthMem    widthMemory // the last trusted line's width profile, for stripes cut by glare
	rmT, rmW    []float64   // widthFit's points (t, width), scratch
	rmS, rmS2   []float64   // repeatedMedian's slopes, scratch
	closed      bool
}

// NewClassical returns a detector for cfg, or the error from cfg.Validate.
func NewClassical(cfg Config) (*Classical, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	c := &Classical{cfg: cfg, ownHorizon: true, tangentEnds: true}
	colour, ok, _ := ParseTapeColour(cfg.TapeColour)
	if ok {
		c.tape, c.hasTape = colour, true
		m := (float64(colour.B) + float64(colour.G) + float64(colour.R)) / 3
		l := chromaLen(colour)
		c.tapeUnit = [3]float64{(float64(colour.B) - m) / l, (float64(colour.G) - m) / l, (float64(colour.R) - m) / l}
	}
	return c, nil
}

// Close releases the detector's preallocated images. Detect after Close
// returns Found=false.
func (c *Classical) Close() error {
	if c.haveWork {
		c.work.Close()
		c.haveWork = false
	}
	c.closed = true
	return nil
}

// Method is the name put in Detection.Method.
const MethodClassical = "classical"

func notFound(reason string) Detection {
	return Detection{Method: MethodClassical, Reason: reason}
}

// Detect measures the stripe in img, an 8-bit BGR (CV_8UC3) frame; grey
// (CV_8UC1) and BGRA (CV_8UC4) frames are accepted too. It does not retain
// img. An empty, closed, unsupported, too small or too large frame gives
// Found=false with the reason; OpenCV is never called on it.
//
// Detect keeps three short memories from frame to frame, all dropped on
// a frame it cannot use: the last frame's clipped pixels, to tell a
// mirrored lamp by its motion (mirror.go), the gap of the last dashed
// line chosen, so that a frame showing a single dash is bridged like the
// pattern it belongs to (dashmem.go), and the width profile of the last
// line it trusted, so that a stripe half lost in glare is placed from
// its one visible edge (cutedge.go). Use a new detector for each clip.
func (c *Classical) Detect(img gocv.Mat, hint Hint) Detection {
	fr, why := c.load(img)
	if why != "" {
		c.forgetFrames()
		return notFound(why)
	}
	return c.detect(fr, hint)
}

// forgetFrames drops what Detect remembers from earlier frames (see
// Detect), as a new clip would.
func (c *Classical) forgetFrames() {
	c.mirror.forget()
	c.dashes.forget()
	c.widthMem.forget()
}

// load checks img and prepares the working images from it (see Detect);
// a non-empty reason says why the frame cannot be used.
func (c *Classical) load(img gocv.Mat) (fr frameGeom, reason string) {
	if c.closed {
		return fr, "detector closed"
	}
	if img.Ptr() == nil || img.Empty() {
		return fr, "empty frame"
	}
	t := img.Type()
	if t != gocv.MatTypeCV8UC3 && t != gocv.MatTypeCV8UC1 && t != gocv.MatTypeCV8UC4 {
		return fr, fmt.Sprintf("unsupported pixel type %v (want 8-bit BGR, grey or BGRA)", t)
	}
	w, h := img.Cols(), img.Rows()
	if w < MinFrameWidth || h < MinFrameHeight {
		return fr, fmt.Sprintf("frame too small (%d×%d; need at least %d×%d)", w, h, MinFrameWidth, MinFrameHeight)
	}
	if w > MaxFrameWidth || h > MaxFrameHeight {
		return fr, fmt.Sprintf("frame too large (%d×%d; at most %d×%d)", w, h, MaxFrameWidth, MaxFrameHeight)
	}
	ww := min(w, c.cfg.WorkWidth)
	wh := max(int(math.Round(float64(h)*float64(ww)/float64(w))), MinFrameHeight/2)
	if err := c.prepare(img, image.Pt(ww, wh)); err != nil {
		return fr, err.Error()
	}
	return frameGeom{
		inW: float64(w), inH: float64(h),
		sx: float64(ww) / float64(w), sy: float64(wh) / float64(h),
		ww: ww, wh: wh,
	}, ""
}

// prepare fills c.work, c.evidence and c.grey from img at working size sz.
func (c *Classical) prepare(img gocv.Mat, sz image.Point) error {
	t := img.Type()
	if !c.haveWork || c.workSize != sz || c.workType != t {
		if c.haveWork {
			c.work.Close()
		}
		c.work = gocv.NewMatWithSize(sz.Y, sz.X, t)
		c.workSize, c.workType, c.haveWork = sz, t, true
		n := sz.X * sz.Y
		c.evidence = make([]float32, n)
		c.grey = make([]uint8, n)
		c.cr1 = make([]float32, n)
		c.cr2 = make([]float32, n)
		c.pc1 = make([]float64, sz.X)
		c.pc2 = make([]float64, sz.X)
		c.scratch = make([]float64, 0, sz.X)
		c.profile = make([]float64, sz.X)
		c.gmax = make([]float64, sz.X)
		c.prefix = make([]float64, sz.X+1)
		c.prefix2 = make([]float64, sz.X+1)
	}
	if img.Cols() == sz.X && img.Rows() == sz.Y {
		img.CopyTo(&c.work)
	} else {
		gocv.Resize(img, &c.work, sz, 0, 0, gocv.InterpolationArea)
	}
	if c.work.Empty() || c.work.Cols() != sz.X || c.work.Rows() != sz.Y || !c.work.IsContinuous() {
		return fmt.Errorf("could not downscale the frame")
	}
	data, err := c.work.DataPtrUint8()
	if err != nil {
		return fmt.Errorf("could not read the frame: %v", err)
	}
	ch := c.work.Channels()
	n := sz.X * sz.Y
	if len(data) < n*ch {
		return fmt.Errorf("could not read the frame: short buffer")
	}
	ev, gr := c.evidence, c.grey
	// Without a configured tape colour, chroma is a channel of its own.
	c.chromaOn = ch >= 3 && !c.hasTape
	if ch == 1 {
		for i := 0; i < n; i++ {
			ev[i] = float32(data[i])
			gr[i] = data[i]
		}
		return nil
	}
	u := c.tapeUnit
	for i, j := 0, 0; i < n; i, j = i+1, j+ch {
		b, g, r := float64(data[j]), float64(data[j+1]), float64(data[j+2])
		// Luminance with the ITU-R BT.601 weights (as OpenCV's BGR2GRAY).
		y := 0.114*b + 0.587*g + 0.299*r
		gr[i] = uint8(y + 0.5)
		if c.chromaOn {
			// Chromaticity: the two opponent colour axes divided by the
			// luminance, so that a shadow or an exposure change leaves it
			// as it is (+16 keeps the noise of dark pixels bounded).
			k := 1 / (y + 16)
			c.cr1[i] = float32((r - g) * k)
			c.cr2[i] = float32(((r+g)/2 - b) * k)
		}
		if c.hasTape {
			m := (b + g + r) / 3
			// Colour evidence: the pixel's chroma projected on the tape's
			// hue direction; only the matching hue counts, and it counts
			// twice so that a yellow tape stands out of a grey floor of the
			// same luminance.
			if p := (b-m)*u[0] + (g-m)*u[1] + (r-m)*u[2]; p > 0 {
				y += 2 * p
			}
		}
		ev[i] = float32(y)
	}
	return nil
}

// frameGeom maps between input and working pixels. Continuous coordinates:
// pixel i covers [i, i+1); reported points put pixel centres on integers.
type frameGeom struct {
	inW, inH float64
	sx, sy   float64
	ww, wh   int
}

func (g frameGeom) toInX(xw float64) float64  { return xw/g.sx - 0.5 }
func (g frameGeom) toInY(yw float64) float64  { return yw/g.sy - 0.5 }
func (g frameGeom) toWorkX(x float64) float64 { return (x + 0.5) * g.sx }
func (g frameGeom) toWorkY(y float64) float64 { return (y + 0.5) * g.sy }
