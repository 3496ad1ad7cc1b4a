package synth

import (
	"errors"
	"fmt"
	"image"
	"io"
	"math"
	"runtime"
	"sync"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/truth"
)

// pixel kinds in the per-frame floor buffer
const (
	kFloor    = 0
	kBackdrop = 1
	kInvalid  = 2 // outside the lens model's one-to-one range: black
	kProp     = 3 // a Prop in front of the floor or backdrop
)

// markGeom is a Mark placed in the world.
type markGeom struct {
	m Mark
	g geom
	// hw is the largest half-width anywhere along the mark (for the
	// search); hw0 is the nominal half-width WidthM/2.
	hw, hw0 float64
	from    float64
	to      float64
	seed    uint64
}

// hwAt is the mark's half-width at path position s: a patch's width, or
// the nominal width varied by WidthVar.
func (mg *markGeom) hwAt(s float64) float64 {
	for i := range mg.m.Patches {
		if p := &mg.m.Patches[i]; s >= p.FromM && s < p.ToM && p.WidthM > 0 {
			return p.WidthM / 2
		}
	}
	if mg.m.WidthVar == 0 {
		return mg.hw0
	}
	return mg.hw0 * (1 + mg.m.WidthVar*(2*valueNoise(mg.seed+3, s/0.6, 0.5)-1))
}

// colourAt is the mark's colour at path position s: a patch's colour, or
// the mark's colour faded by FadeVar (towards black when negative, towards
// a bleached off-white when positive).
func (mg *markGeom) colourAt(s float64) RGB {
	for i := range mg.m.Patches {
		if p := &mg.m.Patches[i]; s >= p.FromM && s < p.ToM {
			return p.Colour
		}
	}
	c := mg.m.Colour
	if mg.m.FadeVar == 0 {
		return c
	}
	f := mg.m.FadeVar * (2*valueNoise(mg.seed+4, s/0.9, 0.5) - 1)
	if f < 0 {
		return RGB{c.R * (1 + f), c.G * (1 + f), c.B * (1 + f)}
	}
	const bl = 0.85 // bleached paint, by eye
	return RGB{lerp(c.R, bl, f), lerp(c.G, bl, f), lerp(c.B, bl*0.95, f)}
}

// present returns the signed distance along the path (metres) from s to the
// nearest end of a marked stretch: positive inside the mark, negative in a
// gap, before FromM or after ToM.
func (mg *markGeom) present(s float64) float64 {
	d := mg.laid(s)
	if mg.m.DashM > 0 && mg.m.DashGapM > 0 {
		p := mg.m.DashM + mg.m.DashGapM
		ph := math.Mod(s-mg.from, p)
		if ph < 0 {
			ph += p
		}
		if ph < mg.m.DashM {
			d = math.Min(d, math.Min(ph, mg.m.DashM-ph))
		} else {
			d = math.Min(d, -math.Min(ph-mg.m.DashM, p-ph))
		}
	}
	return d
}

// laid is like present but ignores dashes: the signed distance to the
// nearest end of the stretch where the line exists at all (its dashes
// included), which is what truth calls visible.
func (mg *markGeom) laid(s float64) float64 {
	d := math.Min(s-mg.from, mg.to-s)
	for _, gp := range mg.m.Gaps {
		d = math.Min(d, math.Max(gp.From-s, s-gp.To))
	}
	return d
}

func newMarkGeom(m Mark, seed uint64) markGeom {
	g := newGeom(m.Path)
	mg := markGeom{m: m, g: g, hw: m.WidthM / 2, hw0: m.WidthM / 2, from: m.FromM, to: m.ToM, seed: seed}
	mg.hw *= 1 + math.Abs(m.WidthVar)
	for _, p := range m.Patches {
		mg.hw = math.Max(mg.hw, p.WidthM/2)
	}
	if mg.to <= 0 || mg.to > g.total {
		mg.to = g.total
	}
	if mg.m.Opacity == 0 {
		mg.m.Opacity = 1
	}
	if mg.m.WearScaleM <= 0 {
		mg.m.WearScaleM = 0.03
	}
	return mg
}

// Renderer draws the frames of one Scenario and gives their truth. It is
// not safe for concurrent use. It owns its buffers; Read copies into the
// caller's Mat.
type Renderer struct {
	sc     Scenario
	w, h   int
	rayA   []float64 // per-pixel undistorted normalised ray, camera frame
	rayB   []float64
	rayOK  []bool
	px, py []float64 // per-frame floor points
	kind   []uint8
	prop   []uint8 // which Prop a kProp pixel shows
	rows   []cartState
	acc    []float32 // BGR accumulator in [0, 1]
	buf    []byte    // BGR 8-bit frame
	marks  []markGeom
	stripe markGeom
	// lane holds the boundaries in lane mode (haveLane); they are drawn
	// as marks and the stripe is not drawn.
	lane     laneGeom
	haveLane bool
	tex      *texture
	// shadowBox[i] is the bounding box of Light.Shadows[i] at t = 0
	shadowBox [][4]float64
	// tubeBox[i] is the floor box of Light.Tubes[i]'s mirror image for
	// the instant being shaded (boxTubes)
	tubeBox [][4]float64
	// specMin is the half-vector cosine below which a highlight is < 1e-3
	specMin float64
	shake   [6]float64
	drift   [4][3]float64 // phases of the exposure and white-balance drift
	winSin  [][2]float64  // sines of each window's elevation limits
	next    int
	last    truth.Frame
	lastOK  bool
	workers int
	closed  bool
	err     error // from the last render's JPEG pass
}

// ErrScenario marks a Scenario whose parameters cannot be rendered.
var ErrScenario = errors.New("invalid scenario")

func (sc *Scenario) check() error {
	bad := func(what string) error {
		return fmt.Errorf("synth: scenario %q: %s: %w", sc.Name, what, ErrScenario)
	}
	switch {
	case sc.Width < 8 || sc.Height < 8 || sc.Width > 4096 || sc.Height > 4096:
		return bad(fmt.Sprintf("size %dx%d", sc.Width, sc.Height))
	case !(sc.FPS > 0):
		return bad("fps must be > 0")
	case sc.Frames < 0:
		return bad("negative frame count")
	case !(sc.Camera.Fx > 0 && sc.Camera.Fy > 0):
		return bad("focal lengths must be > 0")
	case !(sc.Camera.HeightM > 0):
		return bad("camera height must be > 0")
	case sc.Camera.PitchDeg <= -30 || sc.Camera.PitchDeg >= 90:
		return bad("pitch must be in (-30, 90) degrees")
	case !(sc.Stripe.WidthM > 0):
		return bad("stripe width must be > 0")
	case sc.Stripe.Path.Length() <= 0:
		return bad("stripe path is empty")
	case sc.Light.Gain < 0:
		return bad("negative gain")
	case sc.Follow != "" && sc.Follow != FollowStripe && sc.Follow != FollowLane:
		return bad(fmt.Sprintf("follow %q: want stripe or lane", sc.Follow))
	case sc.Follow == FollowLane && !(sc.Lane.WidthM > 0 && sc.Lane.Left.WidthM > 0 && sc.Lane.Right.WidthM > 0):
		return bad("lane and boundary widths must be > 0")
	case sc.JPEGQuality < 0 || sc.JPEGQuality > 100:
		return bad(fmt.Sprintf("JPEG quality %d not in 0..100", sc.JPEGQuality))
	case sc.Light.RollingPose && !(sc.Light.LineTimeS > 0):
		return bad("rolling pose needs a line time > 0")
	case len(sc.Props) > 255:
		return bad("more than 255 props")
	}
	for _, p := range sc.Props {
		if !(p.WidthM > 0 && p.HeightM > 0) || (p.Shape != "person" && p.Shape != "post") {
			return bad(fmt.Sprintf("prop %q: shape %q, %g × %g m", p.Name, p.Shape, p.WidthM, p.HeightM))
		}
	}
	if sc.Stripe.DotPitchM > 0 && sc.Stripe.DotPitchM < sc.Stripe.WidthM {
		return bad("dots closer than their diameter")
	}
	for _, s := range sc.Light.Shadows {
		if len(s.Poly) < 3 {
			return bad("shadow polygon with fewer than 3 vertices")
		}
	}
	return nil
}

// New prepares a Renderer for sc: it checks the parameters and casts the
// per-pixel rays once.
func New(sc Scenario) (*Renderer, error) {
	if sc.Light.Gain == 0 && len(sc.Light.GainSteps) == 0 {
		sc.Light.Gain = 1
	}
	if sc.Backdrop.FarM <= 0 {
		sc.Backdrop.FarM = 30
	}
	if sc.LookaheadM <= 0 {
		sc.LookaheadM = 1
	}
	if err := sc.check(); err != nil {
		return nil, err
	}
	w, h := sc.Width, sc.Height
	n := w * h
	r := &Renderer{sc: sc, w: w, h: h,
		rayA: make([]float64, n), rayB: make([]float64, n), rayOK: make([]bool, n),
		px: make([]float64, n), py: make([]float64, n), kind: make([]uint8, n),
		acc: make([]float32, 3*n), buf: make([]byte, 3*n),
	}
	if len(sc.Props) > 0 {
		r.prop = make([]uint8, n)
	}
	cam := &r.sc.Camera
	for j := 0; j < h; j++ {
		for i := 0; i < w; i++ {
			k := j*w + i
			a, b, ok := cam.undistort((float64(i)-cam.Cx)/cam.Fx, (float64(j)-cam.Cy)/cam.Fy)
			r.rayA[k], r.rayB[k], r.rayOK[k] = a, b, ok
		}
	}
	seed := uint64(sc.Seed)
	for i, m := range sc.Marks {
		r.marks = append(r.marks, newMarkGeom(m, splitmix64(seed+uint64(i)+100)))
	}
	r.stripe = newMarkGeom(sc.Stripe, splitmix64(seed+7))
	if lg, ok := newLaneGeom(&r.sc, seed); ok {
		r.lane, r.haveLane = lg, true
		r.lane.leftIdx, r.lane.rightIdx = len(r.marks), len(r.marks)+1
		r.marks = append(r.marks, lg.left, lg.right)
	}
	if sc.Floor.Shininess > 0 {
		r.specMin = math.Exp(math.Log(1e-3) / sc.Floor.Shininess)
	}
	for _, sh := range sc.Light.Shadows {
		r.shadowBox = append(r.shadowBox, polyBox(sh.Poly))
	}
	r.tex = newTexture(splitmix64(seed+1), 256, 0.006)
	for i := range r.shake {
		r.shake[i] = 2 * math.Pi * lattice(seed, 11, int64(i))
	}
	for _, wn := range sc.Backdrop.Windows {
		r.winSin = append(r.winSin, [2]float64{math.Sin(rad(wn.El0Deg)), math.Sin(rad(wn.El1Deg))})
	}
	for c := range r.drift {
		for k := range r.drift[c] {
			r.drift[c][k] = 2 * math.Pi * lattice(seed, 12+int64(c), int64(k))
		}
	}
	r.workers = runtime.GOMAXPROCS(0)
	if r.workers > 4 {
		r.workers = 4
	}
	return r, nil
}

// Scenario returns the scenario being rendered (with defaults filled in).
func (r *Renderer) Scenario() Scenario { return r.sc }

// Header returns the truth file header for the clip.
func (r *Renderer) Header() truth.Header {
	return truth.Header{
		Format: truth.Format, Scenario: r.sc.Name, Follow: r.follow(),
		Width: r.w, Height: r.h, FPS: r.sc.FPS, Frames: r.sc.Frames,
		RefRow: r.refRow(), LookaheadM: r.sc.LookaheadM, Notes: r.sc.Notes,
	}
}

func (r *Renderer) refRow() float64 { return 0.8 * float64(r.h) }

// follow is the scenario's follow mode, FollowStripe when unset.
func (r *Renderer) follow() string {
	if r.haveLane {
		return FollowLane
	}
	return FollowStripe
}

// Info describes the renderer as a frame source.
func (r *Renderer) Info() capture.SourceInfo {
	return capture.SourceInfo{Name: "synthetic:" + r.sc.Name, Kind: "synthetic",
		Size: image.Pt(r.w, r.h), FPS: r.sc.FPS, Frames: r.sc.Frames}
}

// Truth returns the truth of the frame last returned by Read (the zero
// Frame before the first Read). Its slices are fresh for every frame and
// belong to the caller.
func (r *Renderer) Truth() truth.Frame { return r.last }

// Close releases the renderer's buffers. It owns no OpenCV memory.
func (r *Renderer) Close() error {
	r.closed = true
	r.px, r.py, r.acc, r.buf = nil, nil, nil, nil
	return nil
}

// Read renders the next frame into dst as 8-bit BGR (CV_8UC3). dst is
// reallocated only when its size or type differs; the caller owns it and
// must Close it. After Scenario.Frames frames Read returns io.EOF.
func (r *Renderer) Read(dst *gocv.Mat) (capture.FrameInfo, error) {
	if r.closed {
		return capture.FrameInfo{}, errors.New("synth: read after close")
	}
	if r.next >= r.sc.Frames {
		return capture.FrameInfo{}, io.EOF
	}
	i := r.next
	r.next++
	r.last = r.render(i)
	if r.err != nil {
		return capture.FrameInfo{}, fmt.Errorf("synth: frame %d: %w", i, r.err)
	}
	if dst.Empty() || dst.Rows() != r.h || dst.Cols() != r.w || dst.Type() != gocv.MatTypeCV8UC3 || !dst.IsContinuous() {
		dst.Close()
		*dst = gocv.NewMatWithSize(r.h, r.w, gocv.MatTypeCV8UC3)
	}
	data, err := dst.DataPtrUint8()
	if err != nil || len(data) != len(r.buf) {
		return capture.FrameInfo{}, fmt.Errorf("synth: frame %d: destination Mat not writable: %v", i, err)
	}
	copy(data, r.buf)
	return capture.FrameInfo{Index: i, T: r.frameTime(i), Size: image.Pt(r.w, r.h)}, nil
}

// Bytes returns the BGR bytes of the frame last read (row-major, 3 bytes a
// pixel). The slice is the renderer's own and is overwritten by the next
// Read: the caller must not retain it.
func (r *Renderer) Bytes() []byte { return r.buf }

func (r *Renderer) frameTime(i int) time.Duration {
	return time.Duration(float64(i) / r.sc.FPS * float64(time.Second))
}

// cartState is the cart and camera at one instant.
type cartState struct {
	t         float64
	s         float64 // path position of the cart point
	x, y, psi float64 // cart point and heading (radians CCW)
	yaw       float64 // camera's floor heading (radians CCW)
	pose      camPose
	// propBox[i] bounds Prop i in the image (min x, min y, max x, max y);
	// set by rowStates, empty when there are no props.
	propBox [][4]float64
}

// cartAt computes where the cart and camera are at time t (seconds).
func (r *Renderer) cartAt(t float64) cartState {
	mo := r.sc.Motion
	s := mo.StartM + mo.SpeedMps*t
	g := &r.stripe.g
	x, y, psi := g.at(s)
	var e, de float64
	if mo.WeaveAmpM != 0 && mo.WeaveWavelengthM > 0 {
		k := 2 * math.Pi / mo.WeaveWavelengthM
		ph := k*s + rad(mo.WeavePhaseDeg)
		e, de = mo.WeaveAmpM*math.Sin(ph), mo.WeaveAmpM*k*math.Cos(ph)
	}
	kap := g.curvatureCCW(s)
	x += -math.Sin(psi) * e
	y += math.Cos(psi) * e
	hd := psi + math.Atan2(de, 1-kap*e)
	var dp, dr float64
	if mo.ShakeDeg > 0 {
		sh := func(p0, p1, p2 float64) float64 {
			return (math.Sin(2*math.Pi*7*t+p0) + 0.6*math.Sin(2*math.Pi*13*t+p1) + 0.3*math.Sin(2*math.Pi*23*t+p2)) / 1.9
		}
		dp = rad(mo.ShakeDeg) * sh(r.shake[0], r.shake[1], r.shake[2])
		dr = rad(mo.ShakeDeg) * sh(r.shake[3], r.shake[4], r.shake[5])
	}
	pose := newCamPose(r.sc.Camera, x, y, hd, dp, dr, 0)
	return cartState{t: t, s: s, x: x, y: y, psi: hd, yaw: hd - rad(r.sc.Camera.YawDeg), pose: pose}
}

// gainAt is the exposure gain at time t.
func (r *Renderer) gainAt(t float64) float64 {
	g := r.sc.Light.Gain
	for _, st := range r.sc.Light.GainSteps {
		if t >= st.AtS {
			g = st.Gain
		}
	}
	if d := r.sc.Light.DriftGain; d != 0 {
		g *= 1 + d*r.driftAt(0, t)
	}
	return g
}

// driftAt is drift signal c (0 the gain, 1–3 red, green, blue) at time t,
// in [−1, 1]: three slow sinusoids and a jitter that changes every frame.
func (r *Renderer) driftAt(c int, t float64) float64 {
	ph := &r.drift[c]
	frame := int64(math.Floor(t*r.sc.FPS + 0.5))
	j := 2*lattice(uint64(r.sc.Seed), 20+int64(c), frame) - 1
	return 0.45*math.Sin(2*math.Pi*0.15*t+ph[0]) + 0.3*math.Sin(2*math.Pi*0.43*t+ph[1]) +
		0.15*math.Sin(2*math.Pi*1.1*t+ph[2]) + 0.1*j
}

// whiteBalance is the per-channel (R, G, B) gain at time t.
func (r *Renderer) whiteBalance(t float64) [3]float64 {
	wb := [3]float64{1, 1, 1}
	if d := r.sc.Light.DriftWB; d != 0 {
		for c := range wb {
			wb[c] = 1 + d*r.driftAt(1+c, t)
		}
	}
	return wb
}

// rowStates returns the cart state each row is rendered with: one state
// for all rows at time t, or with RollingPose one per row at its own
// exposure time. The slice is the renderer's own.
func (r *Renderer) rowStates(t float64) []cartState {
	r.rows = r.rows[:0]
	if !r.sc.Light.RollingPose {
		r.rows = append(r.rows, r.cartAt(t))
	} else {
		for j := 0; j < r.h; j++ {
			r.rows = append(r.rows, r.cartAt(r.rowTime(t, float64(j))))
		}
	}
	if len(r.sc.Props) > 0 {
		for k := range r.rows {
			r.rows[k].propBox = r.propBoxes(&r.rows[k], r.rows[k].propBox)
		}
	}
	return r.rows
}

// propBoxes bounds each prop in the image for the camera at st: its
// outline sampled five times an edge through the lens model, with a
// margin of 2 px for bowing between samples. A prop that cannot be
// projected whole (partly behind the camera or outside the lens model)
// gets the whole image.
func (r *Renderer) propBoxes(st *cartState, out [][4]float64) [][4]float64 {
	out = out[:0]
	c := st.pose.c
	for i := range r.sc.Props {
		pr := &r.sc.Props[i]
		px, py := pr.X+pr.VX*st.t, pr.Y+pr.VY*st.t
		nx, ny := px-c.x, py-c.y
		d := math.Sqrt(nx*nx + ny*ny)
		box := [4]float64{math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)}
		whole := d < 1e-6
		for k := 0; k <= 16 && !whole; k++ {
			// walk the rectangle's outline: bottom, right, top, left
			var u, z float64
			e, f := k/4, float64(k%4)/4
			hw := pr.WidthM / 2
			switch e {
			case 0:
				u, z = lerp(-hw, hw, f), 0
			case 1:
				u, z = hw, lerp(0, pr.HeightM, f)
			case 2:
				u, z = lerp(hw, -hw, f), pr.HeightM
			default:
				u, z = -hw, lerp(pr.HeightM, 0, f)
			}
			w := vec3{px - u*ny/d, py + u*nx/d, z}
			x, y, ok := st.pose.project(&r.sc.Camera, w)
			if !ok {
				whole = true
				break
			}
			box = [4]float64{fmin(box[0], x), fmin(box[1], y), fmax(box[2], x), fmax(box[3], y)}
		}
		if whole {
			box = [4]float64{math.Inf(-1), math.Inf(-1), math.Inf(1), math.Inf(1)}
		}
		out = append(out, [4]float64{box[0] - 2, box[1] - 2, box[2] + 2, box[3] + 2})
	}
	return out
}

// rowTime is when image row y is exposed for a frame at time t.
func (r *Renderer) rowTime(t, y float64) float64 {
	if !r.sc.Light.RollingPose {
		return t
	}
	return t + (y-float64(r.h)/2)*r.sc.Light.LineTimeS
}

// rowState picks row j's state from rowStates' result.
func rowState(sts []cartState, j int) *cartState {
	if len(sts) == 1 {
		return &sts[0]
	}
	return &sts[j]
}

// render draws frame i into r.buf and returns its truth.
func (r *Renderer) render(i int) truth.Frame {
	t := float64(i) / r.sc.FPS
	n := r.sc.Light.BlurSamples
	if n < 1 {
		n = 1
	}
	if n > 1 {
		for k := range r.acc {
			r.acc[k] = 0
		}
	}
	for k := 0; k < n; k++ {
		tk := t
		if n > 1 {
			tk = t + r.sc.Light.ExposureS*(float64(k)/float64(n-1)-0.5)
		}
		sts := r.rowStates(tk)
		r.boxTubes(sts)
		r.parallel(func(j0, j1 int) { r.castRows(sts, j0, j1) })
		last := k == n-1
		r.parallel(func(j0, j1 int) { r.shadeRows(sts, j0, j1, n, last, i) })
	}
	if q := r.sc.JPEGQuality; q > 0 {
		r.err = r.jpeg(q)
	}
	return r.truthAt(i, r.cartAt(t))
}

// jpeg passes r.buf through OpenCV's JPEG encoder and decoder at quality
// q (1..100, checked by New; the frame's size was checked there too).
func (r *Renderer) jpeg(q int) error {
	src, err := gocv.NewMatFromBytes(r.h, r.w, gocv.MatTypeCV8UC3, r.buf)
	if err != nil {
		return fmt.Errorf("synth: jpeg: %w", err)
	}
	defer src.Close()
	enc, err := gocv.IMEncodeWithParams(gocv.JPEGFileExt, src, []int{gocv.IMWriteJpegQuality, q})
	if err != nil {
		return fmt.Errorf("synth: jpeg encode: %w", err)
	}
	defer enc.Close()
	dec, err := gocv.IMDecode(enc.GetBytes(), gocv.IMReadColor)
	if err != nil {
		return fmt.Errorf("synth: jpeg decode: %w", err)
	}
	defer dec.Close()
	data, err := dec.DataPtrUint8()
	if err != nil || dec.Rows() != r.h || dec.Cols() != r.w || len(data) != len(r.buf) {
		return fmt.Errorf("synth: jpeg decode gave %dx%d (%v)", dec.Cols(), dec.Rows(), err)
	}
	copy(r.buf, data)
	return nil
}

// parallel runs f over bands of rows on up to r.workers goroutines. Every
// pixel's value depends only on its position, so the result is the same
// for any split.
func (r *Renderer) parallel(f func(j0, j1 int)) {
	if r.workers <= 1 {
		f(0, r.h)
		return
	}
	var wg sync.WaitGroup
	band := (r.h + r.workers - 1) / r.workers
	for j0 := 0; j0 < r.h; j0 += band {
		j1 := min(j0+band, r.h)
		wg.Add(1)
		go func() { defer wg.Done(); f(j0, j1) }()
	}
	wg.Wait()
}

// castRows intersects each pixel's ray with the floor plane z = 0 and
// with the props.
func (r *Renderer) castRows(sts []cartState, j0, j1 int) {
	far := r.sc.Backdrop.FarM
	var near []int
	for j := j0; j < j1; j++ {
		st := rowState(sts, j)
		p := &st.pose
		near = near[:0]
		for pi, b := range st.propBox {
			if float64(j) >= b[1] && float64(j) <= b[3] {
				near = append(near, pi)
			}
		}
		for i := 0; i < r.w; i++ {
			k := j*r.w + i
			if !r.rayOK[k] {
				r.kind[k] = kInvalid
				continue
			}
			a, b := r.rayA[k], r.rayB[k]
			dx := a*p.ex.x + b*p.ey.x + p.ez.x
			dy := a*p.ex.y + b*p.ey.y + p.ez.y
			dz := a*p.ex.z + b*p.ey.z + p.ez.z
			tt := math.Inf(1)
			if dz < -1e-9 {
				tt = -p.c.z / dz
			}
			if len(near) > 0 {
				if pi, ok := r.propHit(st, near, float64(i), vec3{dx, dy, dz}, tt); ok {
					r.kind[k] = kProp
					r.prop[k] = uint8(pi)
					continue
				}
			}
			if math.IsInf(tt, 1) {
				r.kind[k] = kBackdrop
				continue
			}
			fx, fy := tt*dx, tt*dy
			if fx*fx+fy*fy > far*far {
				r.kind[k] = kBackdrop
				continue
			}
			r.kind[k] = kFloor
			r.px[k], r.py[k] = p.c.x+fx, p.c.y+fy
		}
	}
}

// propHit finds the nearest prop hit by the ray from the camera along d
// (camera centre + τ·d) before τ = tMax: its index, or ok false. Only the
// props listed in cands (nil: all) whose image box holds column x are
// tried.
func (r *Renderer) propHit(st *cartState, cands []int, x float64, d vec3, tMax float64) (int, bool) {
	c := st.pose.c
	best, bi := tMax, -1
	n := len(cands)
	if cands == nil {
		n = len(r.sc.Props)
	}
	for ci := 0; ci < n; ci++ {
		i := ci
		if cands != nil {
			i = cands[ci]
			if b := &st.propBox[i]; x < b[0] || x > b[2] {
				continue
			}
		}
		pr := &r.sc.Props[i]
		px, py := pr.X+pr.VX*st.t, pr.Y+pr.VY*st.t
		nx, ny := px-c.x, py-c.y
		dist := math.Sqrt(nx*nx + ny*ny)
		if dist < 1e-6 {
			continue
		}
		nx, ny = nx/dist, ny/dist
		dn := d.x*nx + d.y*ny
		if dn <= 1e-12 {
			continue
		}
		tau := dist / dn // the plane through the prop facing the camera
		if tau >= best {
			continue
		}
		hx, hy, hz := c.x+tau*d.x, c.y+tau*d.y, c.z+tau*d.z
		u := -(hx-px)*ny + (hy-py)*nx
		if pr.inside(u, hz) {
			best, bi = tau, i
		}
	}
	return bi, bi >= 0
}

// inside reports whether the point u metres to the side of the prop's
// axis and z metres above the floor is part of it.
func (p *Prop) inside(u, z float64) bool {
	if z < 0 || z > p.HeightM {
		return false
	}
	au := fabs(u)
	if p.Shape != "person" {
		return au <= p.WidthM/2
	}
	// a standing person, proportions by eye for 1.75 m: head, body
	// tapering from the shoulders to the hips, two legs
	k := p.HeightM / 1.75
	sw := p.WidthM / 2
	zz := z / k
	switch {
	case hypot2(u/k, zz-1.62) < 0.11:
		return true
	case zz >= 0.85 && zz <= 1.50:
		return au < sw*(0.8+0.2*(zz-0.85)/0.65)
	case zz < 0.85:
		return fabs(au-0.45*sw) < 0.3*sw
	}
	return false
}

// neighbour differences: the floor displacement for one pixel step in x
// and in y, from whichever neighbour is floor.
func (r *Renderer) jacobian(i, j, k int) (ux, uy, vx, vy float64) {
	big := r.sc.Backdrop.FarM
	switch {
	case i+1 < r.w && r.kind[k+1] == kFloor:
		ux, uy = r.px[k+1]-r.px[k], r.py[k+1]-r.py[k]
	case i > 0 && r.kind[k-1] == kFloor:
		ux, uy = r.px[k]-r.px[k-1], r.py[k]-r.py[k-1]
	default:
		ux = big
	}
	switch {
	case j+1 < r.h && r.kind[k+r.w] == kFloor:
		vx, vy = r.px[k+r.w]-r.px[k], r.py[k+r.w]-r.py[k]
	case j > 0 && r.kind[k-r.w] == kFloor:
		vx, vy = r.px[k]-r.px[k-r.w], r.py[k]-r.py[k-r.w]
	default:
		vy = big
	}
	return
}

// rowCands lists, for one row, the segments of a mark near that row's
// floor points.
func rowCands(mg *markGeom, minX, minY, maxX, maxY float64, out []int) []int {
	out = out[:0]
	m := mg.hw + 0.05
	for si := range mg.g.segs {
		sg := &mg.g.segs[si]
		if sg.maxX+m < minX || sg.minX-m > maxX || sg.maxY+m < minY || sg.minY-m > maxY {
			continue
		}
		out = append(out, si)
	}
	return out
}

// coverage is the share of the pixel at floor point (x, y) covered by the
// mark, with an analytic one-pixel ramp across every edge so that the
// rendered width equals the true width, and the path position s of the
// nearest centreline point (for the colour there).
func (mg *markGeom) coverage(cands []int, x, y, ux, uy, vx, vy, fp float64) (c, s float64) {
	best := math.Inf(1)
	var bs, btx, bty, blat float64
	for _, si := range cands {
		s, lat, tx, ty, ok := mg.g.segs[si].nearest(x, y, mg.hw+fp)
		if ok && fabs(lat) < best {
			best, bs, btx, bty, blat = fabs(lat), s, tx, ty, lat
		}
	}
	if best > 1e300 {
		return 0, 0
	}
	nx, ny := -bty, btx
	if mg.m.DotPitchM > 0 {
		c = mg.dot(bs, blat, btx, bty, ux, uy, vx, vy)
	} else {
		gl := hypot2(nx*ux+ny*uy, nx*vx+ny*vy) // metres across the line per pixel
		c = clamp01(0.5 + (mg.hwAt(bs)-best)/gl)
		if c == 0 {
			return 0, bs
		}
		gs := hypot2(btx*ux+bty*uy, btx*vx+bty*vy) // metres along the line per pixel
		c *= clamp01(0.5 + mg.present(bs)/gs)
	}
	if mg.m.Wear > 0 && c > 0 {
		sc := mg.m.WearScaleM
		nz := 0.65*valueNoise(mg.seed, bs/sc, blat/sc) + 0.35*valueNoise(mg.seed+1, bs/sc*3, blat/sc*3)
		c *= clamp01((nz-mg.m.Wear)*25 + 0.5)
	}
	return c, bs
}

// dot is the coverage of a dotted mark's nearest dot for a pixel at path
// position s, lateral offset lat (tangent (tx, ty)), with a one-pixel ramp
// across the dot's rim measured along the radius. Dots lie where the line
// is laid (gaps and ends apply to their centres).
func (mg *markGeom) dot(s, lat, tx, ty, ux, uy, vx, vy float64) float64 {
	p := mg.m.DotPitchM
	r := mg.hw0
	k := math.Round((s - mg.from - r) / p)
	sc := mg.from + r + k*p
	if mg.laid(sc) < 0 || sc > mg.to-r {
		return 0
	}
	ds := s - sc
	d := hypot2(ds, lat)
	if d < 1e-9 {
		return 1
	}
	// unit vector from the dot's centre to the pixel, on the floor
	ex, ey := (ds*tx-lat*ty)/d, (ds*ty+lat*tx)/d
	g := hypot2(ex*ux+ey*uy, ex*vx+ey*vy)
	return clamp01(0.5 + (r-d)/g)
}

// shadowLight returns the light factor (1 = unshadowed) at floor point
// (x, y) at time t for pixel footprint fp.
func (r *Renderer) shadowLight(x, y, t, fp float64) float64 {
	l := 1.0
	for si := range r.sc.Light.Shadows {
		sh := &r.sc.Light.Shadows[si]
		qx, qy := x-sh.VX*t, y-sh.VY*t
		soft := math.Max(sh.SoftM, fp)
		b := &r.shadowBox[si]
		if qx < b[0]-soft || qx > b[2]+soft || qy < b[1]-soft || qy > b[3]+soft {
			continue
		}
		d := polySignedDist(sh.Poly, qx, qy)
		if d <= -soft {
			continue
		}
		l *= 1 - sh.Darkness*clamp01(0.5+d/soft)
	}
	return l
}

// polyBox is the bounding box of a polygon: min x, min y, max x, max y.
func polyBox(poly [][2]float64) [4]float64 {
	b := [4]float64{math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)}
	for _, v := range poly {
		b[0], b[2] = math.Min(b[0], v[0]), math.Max(b[2], v[0])
		b[1], b[3] = math.Min(b[1], v[1]), math.Max(b[3], v[1])
	}
	return b
}

// polySignedDist is the distance from (x, y) to the polygon's boundary,
// positive inside.
func polySignedDist(poly [][2]float64, x, y float64) float64 {
	inside := false
	best := math.Inf(1)
	n := len(poly)
	for a := 0; a < n; a++ {
		p, q := poly[a], poly[(a+1)%n]
		if (p[1] > y) != (q[1] > y) && x < (q[0]-p[0])*(y-p[1])/(q[1]-p[1])+p[0] {
			inside = !inside
		}
		ex, ey := q[0]-p[0], q[1]-p[1]
		tt := clamp01(((x-p[0])*ex + (y-p[1])*ey) / (ex*ex + ey*ey))
		dx, dy := x-p[0]-tt*ex, y-p[1]-tt*ey
		best = fmin(best, dx*dx+dy*dy)
	}
	if inside {
		return math.Sqrt(best)
	}
	return -math.Sqrt(best)
}

// shadeRows computes each pixel's colour. With n = 1 it goes straight to
// r.buf; otherwise 1/n of it is added to r.acc, and the last of the n
// instants writes the average to r.buf.
func (r *Renderer) shadeRows(sts []cartState, j0, j1 int, n int, last bool, frame int) {
	weight := float32(1 / float64(n))
	sd := r.sc.Light.NoiseSD
	key := splitmix64(uint64(r.sc.Seed)^0x5bd1e995) + uint64(frame)*0x9e3779b97f4a7c15
	sc := &r.sc
	fl := &sc.Floor
	li := &sc.Light
	cands := make([][]int, len(r.marks)+1)
	for j := j0; j < j1; j++ {
		st := rowState(sts, j)
		wb := r.whiteBalance(st.t)
		rowGain := r.gainAt(st.t)
		if li.FlickerAmp > 0 {
			rowGain *= 1 + li.FlickerAmp*math.Sin(2*math.Pi*li.FlickerHz*(st.t+float64(j)*li.LineTimeS))
		}
		// floor bounding box of this row (with the next, for neighbours)
		minX, minY, maxX, maxY := math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)
		for i := 0; i < r.w; i++ {
			k := j*r.w + i
			if r.kind[k] == kFloor {
				minX, maxX = fmin(minX, r.px[k]), fmax(maxX, r.px[k])
				minY, maxY = fmin(minY, r.py[k]), fmax(maxY, r.py[k])
			}
		}
		for mi := range r.marks {
			cands[mi] = rowCands(&r.marks[mi], minX, minY, maxX, maxY, cands[mi])
		}
		cands[len(r.marks)] = rowCands(&r.stripe, minX, minY, maxX, maxY, cands[len(r.marks)])
		for i := 0; i < r.w; i++ {
			k := j*r.w + i
			var cr, cg, cb float64
			switch r.kind[k] {
			case kInvalid:
				// black outside the lens model
			case kBackdrop:
				cr, cg, cb = r.backdrop(st, k)
				cr, cg, cb = cr*rowGain, cg*rowGain, cb*rowGain
			case kProp:
				c := sc.Props[r.prop[k]].Colour
				cr, cg, cb = c.R*rowGain, c.G*rowGain, c.B*rowGain
			default:
				x, y := r.px[k], r.py[k]
				ux, uy, vx, vy := r.jacobian(i, j, k)
				fp := fmax(fabs(ux)+fabs(uy), fabs(vx)+fabs(vy))
				tx := 1 + 2*fl.Texture*r.tex.at(x, y, fp)
				cr, cg, cb = fl.Colour.R*tx, fl.Colour.G*tx, fl.Colour.B*tx
				if fl.TileM > 0 {
					c := gridCoverage(x, y, ux, vx, uy, vy, fl.TileM, fl.GroutM)
					cr, cg, cb = lerp(cr, fl.GroutColour.R, c), lerp(cg, fl.GroutColour.G, c), lerp(cb, fl.GroutColour.B, c)
				}
				for mi := range r.marks {
					mg := &r.marks[mi]
					if c, s := mg.coverage(cands[mi], x, y, ux, uy, vx, vy, fp); c > 0 {
						c *= mg.m.Opacity
						mc := mg.colourAt(s)
						cr, cg, cb = lerp(cr, mc.R, c), lerp(cg, mc.G, c), lerp(cb, mc.B, c)
					}
				}
				if c, s := r.stripe.coverage(cands[len(r.marks)], x, y, ux, uy, vx, vy, fp); c > 0 && !r.haveLane {
					mc := r.stripe.colourAt(s)
					ts := 1 + fl.Texture*0.3*r.tex.at(y*3, x*3, fp*3)
					c *= r.stripe.m.Opacity
					cr, cg, cb = lerp(cr, mc.R*ts, c), lerp(cg, mc.G*ts, c), lerp(cb, mc.B*ts, c)
				}
				l := 1.0
				if len(li.Shadows) > 0 {
					l = r.shadowLight(x, y, st.t, fp)
				}
				spec := 0.0
				if fl.Gloss > 0 {
					spec = r.specular(st, x, y) + r.tubeGlow(st, x, y, fp)
				}
				f := l * rowGain
				sp := spec * rowGain
				cr, cg, cb = cr*f+sp, cg*f+sp, cb*f+sp
			}
			cr, cg, cb = cr*wb[0], cg*wb[1], cb*wb[2]
			if n > 1 {
				r.acc[3*k] += weight * float32(cb)
				r.acc[3*k+1] += weight * float32(cg)
				r.acc[3*k+2] += weight * float32(cr)
				if !last {
					continue
				}
				cb, cg, cr = float64(r.acc[3*k]), float64(r.acc[3*k+1]), float64(r.acc[3*k+2])
			}
			r.buf[3*k] = quant(cb, sd, key+uint64(3*k))
			r.buf[3*k+1] = quant(cg, sd, key+uint64(3*k+1))
			r.buf[3*k+2] = quant(cr, sd, key+uint64(3*k+2))
		}
	}
}

// gridCoverage is the anti-aliased coverage of square-grid grout lines.
func gridCoverage(x, y, ux, vx, uy, vy, tile, grout float64) float64 {
	dx := math.Abs(x - tile*math.Round(x/tile))
	dy := math.Abs(y - tile*math.Round(y/tile))
	gx := math.Max(hypot2(ux, vx), 1e-6) // metres of x per pixel
	gy := math.Max(hypot2(uy, vy), 1e-6)
	cx := clamp01(0.5 + (grout/2-dx)/gx)
	cy := clamp01(0.5 + (grout/2-dy)/gy)
	return 1 - (1-cx)*(1-cy)
}

// specular is the Blinn–Phong reflection of the lamps at floor point
// (x, y) seen from the camera: it moves with the camera, not the floor.
func (r *Renderer) specular(st *cartState, x, y float64) float64 {
	fl := &r.sc.Floor
	c := st.pose.c
	vx, vy, vz := c.x-x, c.y-y, c.z
	vn := math.Sqrt(vx*vx + vy*vy + vz*vz)
	vx, vy, vz = vx/vn, vy/vn, vz/vn
	var s float64
	for _, lp := range r.sc.Light.Lamps {
		lx, ly, lz := lp.X-x, lp.Y-y, lp.Z
		ln := math.Sqrt(lx*lx + ly*ly + lz*lz)
		hx, hy, hz := lx/ln+vx, ly/ln+vy, lz/ln+vz
		hz /= math.Sqrt(hx*hx + hy*hy + hz*hz)
		if hz > r.specMin {
			s += lp.Strength * math.Exp(fl.Shininess*math.Log(hz))
		}
	}
	return fl.Gloss * s
}

// backdrop shades a ray that misses the floor: a wall with rack uprights
// and shelf beams, by direction.
func (r *Renderer) backdrop(st *cartState, k int) (float64, float64, float64) {
	bd := &r.sc.Backdrop
	p := &st.pose
	a, b := r.rayA[k], r.rayB[k]
	dx := a*p.ex.x + b*p.ey.x + p.ez.x
	dy := a*p.ex.y + b*p.ey.y + p.ez.y
	dz := a*p.ex.z + b*p.ey.z + p.ez.z
	az := math.Atan2(dy, dx)
	el := dz / math.Sqrt(dx*dx+dy*dy+dz*dz)
	for wi := range bd.Windows {
		wn := &bd.Windows[wi]
		if el < r.winSin[wi][0] || el > r.winSin[wi][1] {
			continue
		}
		da := frac((deg(az)-wn.AzDeg)/360+0.5)*360 - 180
		if fabs(da) > wn.WidthDeg/2 {
			continue
		}
		if m := wn.MullionDeg; m > 0 {
			if u := frac((da + wn.WidthDeg/2) / m); u < 0.1 {
				return 0.12, 0.12, 0.13 // dark frame
			}
		}
		return wn.Pane.R, wn.Pane.G, wn.Pane.B
	}
	c := bd.Wall
	if u := frac(az * 12 / math.Pi); u < 0.12 {
		c = bd.Upright
	}
	if u := frac(el * 6); u < 0.08 && el > 0 {
		c = bd.Upright
	}
	return c.R, c.G, c.B
}

// frac is x − ⌊x⌋, in [0, 1) (math.Mod is slow in the per-pixel loop).
func frac(x float64) float64 { return x - math.Floor(x) }

// quant converts a channel value in [0, 1] to 8 bits, adding sensor noise
// of sd levels drawn from key.
func quant(c, sd float64, key uint64) uint8 {
	v := c*255 + 0.5
	if sd > 0 {
		v += sd * gauss(key)
	}
	switch {
	case v <= 0:
		return 0
	case v >= 255:
		return 255
	}
	return uint8(v)
}
