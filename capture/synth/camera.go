package synth

import "math"

// Camera is a pinhole camera with optional radial distortion, mounted
// rigidly on the cart.
//
// Intrinsics are in pixels with OpenCV's conventions: pixel (i, j) has its
// centre at image coordinates (x, y) = (i, j); a camera-frame direction
// (X, Y, Z) (x right, y down, z along the optical axis) maps to normalised
// (a, b) = (X/Z, Y/Z), distorted by a' = a·(1 + K1·r² + K2·r⁴) with
// r² = a² + b², then x = Fx·a' + Cx, y = Fy·b' + Cy.
type Camera struct {
	Fx, Fy, Cx, Cy float64
	K1, K2         float64
	// HeightM is the height of the optical centre above the floor.
	HeightM float64
	// PitchDeg tilts the optical axis down from the horizontal.
	PitchDeg float64
	// RollDeg turns the camera about its optical axis; positive turns the
	// image's x axis towards its y axis (the picture rotates
	// counter-clockwise on the screen).
	RollDeg float64
	// YawDeg turns the camera about the vertical, positive to the right of
	// the cart's axis.
	YawDeg float64
	// AheadM is how far ahead of the cart's reference point the camera
	// sits (the cart point is the one that follows the weave).
	AheadM float64
}

// vec3 is a small 3-vector.
type vec3 struct{ x, y, z float64 }

func (a vec3) dot(b vec3) float64   { return a.x*b.x + a.y*b.y + a.z*b.z }
func (a vec3) add(b vec3) vec3      { return vec3{a.x + b.x, a.y + b.y, a.z + b.z} }
func (a vec3) sub(b vec3) vec3      { return vec3{a.x - b.x, a.y - b.y, a.z - b.z} }
func (a vec3) scale(k float64) vec3 { return vec3{a.x * k, a.y * k, a.z * k} }
func (a vec3) norm() float64        { return math.Sqrt(a.dot(a)) }
func (a vec3) unit() vec3           { return a.scale(1 / a.norm()) }
func deg(rad float64) float64       { return rad * 180 / math.Pi }
func rad(deg float64) float64       { return deg * math.Pi / 180 }
func lerp(a, b, t float64) float64  { return a + (b-a)*t }
func hypot2(x, y float64) float64   { return math.Sqrt(x*x + y*y) }

// camPose is the camera's placement in the world for one instant: centre C
// and the camera axes (image right, image down, optical axis) in world
// coordinates, i.e. the columns of the camera-to-world rotation.
type camPose struct {
	c          vec3
	ex, ey, ez vec3
}

// newCamPose places the camera for a cart at (x, y) with heading psi
// (radians CCW) and extra attitude offsets (radians) from vibration.
func newCamPose(cam Camera, x, y, psi, dPitch, dRoll, dYaw float64) camPose {
	yaw := psi - rad(cam.YawDeg) - dYaw // positive yaw looks right = clockwise
	f := vec3{math.Cos(yaw), math.Sin(yaw), 0}
	right := vec3{math.Sin(yaw), -math.Cos(yaw), 0}
	up := vec3{0, 0, 1}
	th := rad(cam.PitchDeg) + dPitch
	ez := f.scale(math.Cos(th)).sub(up.scale(math.Sin(th)))
	ey := up.scale(-math.Cos(th)).sub(f.scale(math.Sin(th)))
	ex := right
	ph := rad(cam.RollDeg) + dRoll
	ex2 := ex.scale(math.Cos(ph)).add(ey.scale(math.Sin(ph)))
	ey2 := ex.scale(-math.Sin(ph)).add(ey.scale(math.Cos(ph)))
	cf := vec3{math.Cos(psi), math.Sin(psi), 0}
	c := vec3{x, y, cam.HeightM}.add(cf.scale(cam.AheadM))
	return camPose{c: c, ex: ex2, ey: ey2, ez: ez}
}

// distort maps normalised undistorted (a, b) to distorted coordinates.
func (cam *Camera) distort(a, b float64) (float64, float64) {
	r2 := a*a + b*b
	k := 1 + cam.K1*r2 + cam.K2*r2*r2
	return a * k, b * k
}

// undistort inverts distort by fixed-point iteration; ok is false when it
// does not converge (outside the model's one-to-one range).
func (cam *Camera) undistort(ad, bd float64) (a, b float64, ok bool) {
	a, b = ad, bd
	if cam.K1 == 0 && cam.K2 == 0 {
		return a, b, true
	}
	for i := 0; i < 50; i++ {
		r2 := a*a + b*b
		k := 1 + cam.K1*r2 + cam.K2*r2*r2
		if k <= 0.05 {
			return 0, 0, false
		}
		a, b = ad/k, bd/k
	}
	x, y := cam.distort(a, b)
	if math.Abs(x-ad) > 1e-9 || math.Abs(y-bd) > 1e-9 || !cam.monotone(a*a+b*b) {
		return 0, 0, false
	}
	return a, b, true
}

// monotone reports whether the radial distortion is still increasing at
// undistorted radius² r2, so that projection is one-to-one there.
func (cam *Camera) monotone(r2 float64) bool {
	return 1+3*cam.K1*r2+5*cam.K2*r2*r2 > 0
}

// project maps a world point to image coordinates. ok is false behind the
// camera or where the distortion model folds over.
func (p *camPose) project(cam *Camera, w vec3) (x, y float64, ok bool) {
	d := w.sub(p.c)
	zc := d.dot(p.ez)
	if zc <= 1e-6 {
		return 0, 0, false
	}
	a, b := d.dot(p.ex)/zc, d.dot(p.ey)/zc
	if !cam.monotone(a*a + b*b) {
		return 0, 0, false
	}
	a, b = cam.distort(a, b)
	return cam.Fx*a + cam.Cx, cam.Fy*b + cam.Cy, true
}

func clamp01(v float64) float64 {
	if v < 0 {
		return 0
	}
	if v > 1 {
		return 1
	}
	return v
}

// fmin, fmax and fabs are math.Min, math.Max and math.Abs for values known
// not to be NaN; the math versions are not inlined in the hot loops.
func fmin(a, b float64) float64 {
	if a < b {
		return a
	}
	return b
}

func fmax(a, b float64) float64 {
	if a > b {
		return a
	}
	return b
}

func fabs(a float64) float64 {
	if a < 0 {
		return -a
	}
	return a
}
