package synth

import (
	"fmt"
	"sort"

	"github.com/hewline/hewline/capture"
)

// RGB is a colour: a reflectance (floor, tape) or a light colour, each
// channel in [0, 1] (1 is full white at gain 1).
type RGB struct{ R, G, B float64 }

// Tape colours used by the scenarios (reflectances chosen by eye for an
// evenly lit scene; not measured).
var (
	Yellow = RGB{0.92, 0.76, 0.10}
	White  = RGB{0.93, 0.93, 0.90}
	Blue   = RGB{0.10, 0.30, 0.75}
	Green  = RGB{0.12, 0.60, 0.25}
	Black  = RGB{0.05, 0.05, 0.06}
)

// Mark is a painted or taped line on the floor along a path: the stripe to
// follow, or a distractor (branch, crossing bar, tyre mark, joint, crack).
type Mark struct {
	Name   string
	Path   Path
	WidthM float64
	Colour RGB
	// Opacity blends the mark over the floor (1 = opaque tape, small
	// values for dirt and tyre marks).
	Opacity float64
	// FromM and ToM bound the marked part along the path (ToM 0 = to the
	// end of the path). Beyond ToM the floor is bare: the end of the line.
	FromM, ToM float64
	// Gaps are stretches along the path with no mark.
	Gaps []Span
	// DashM and DashGapM make a dashed line when both are > 0.
	DashM, DashGapM float64
	// Wear in [0, 1) removes that share of the mark in irregular chunks of
	// about WearScaleM.
	Wear, WearScaleM float64
	// DotPitchM > 0 paints the mark as round dots of diameter WidthM,
	// centred on the path every DotPitchM (from FromM + WidthM/2).
	DotPitchM float64
	// WidthVar makes the width vary smoothly along the path by up to that
	// share of WidthM either way (hand-painted lines), over stretches of
	// about 0.6 m; the centreline stays on the path.
	WidthVar float64
	// FadeVar darkens or bleaches the colour smoothly along the path by
	// up to that share (sun-faded, dirty or freshly painted stretches).
	FadeVar float64
	// Patches are stretches repainted or re-taped in another colour and
	// width, centred on the same path.
	Patches []Patch
}

// Patch is a stretch [FromM, ToM) of a mark laid again with another
// colour and width (WidthM 0 keeps the mark's width).
type Patch struct {
	FromM, ToM float64
	WidthM     float64
	Colour     RGB
}

// Motion is how the cart moves along the stripe's path: at SpeedMps from
// StartM, weaving sideways by WeaveAmpM (positive first to the left) with
// wavelength WeaveWavelengthM along the path. The cart's heading follows
// the tangent of its weaving track.
type Motion struct {
	SpeedMps         float64
	StartM           float64
	WeaveAmpM        float64
	WeaveWavelengthM float64
	WeavePhaseDeg    float64
	// ShakeDeg is the amplitude of vibration in pitch and roll (a sum of
	// three sinusoids at 7, 13 and 23 Hz with random phases).
	ShakeDeg float64
}

// Floor describes the floor's look.
type Floor struct {
	Colour RGB
	// Texture is the amplitude of the concrete-like mottling (0 = flat).
	Texture float64
	// TileM > 0 lays square tiles of that size with grout lines of
	// GroutM width and GroutColour.
	TileM, GroutM float64
	GroutColour   RGB
	// Gloss > 0 makes the floor reflect the lamps (Blinn–Phong lobe).
	Gloss, Shininess float64
}

// Shadow is a polygon on the floor (vertices in world metres, either
// order) darkening the light by Darkness in [0, 1], with a penumbra
// SoftM wide, moving at (VX, VY) m/s.
type Shadow struct {
	Poly     [][2]float64
	Darkness float64
	SoftM    float64
	VX, VY   float64
}

// Lamp is a ceiling lamp whose specular reflection shows on a glossy floor.
type Lamp struct {
	X, Y, Z  float64
	Strength float64
}

// Light describes illumination and exposure.
type Light struct {
	// Gain scales the whole image (exposure × illuminance); 1 is even,
	// well-exposed light.
	Gain float64
	// GainSteps change Gain abruptly at times (seconds from the start).
	GainSteps []GainStep
	Shadows   []Shadow
	Lamps     []Lamp
	// Tubes are ceiling luminaires mirrored by a glossy floor (see Tube).
	Tubes []Tube
	// FlickerAmp and FlickerHz modulate brightness over time; with a
	// rolling shutter (LineTimeS > 0, the time between rows) this shows as
	// horizontal bands.
	FlickerAmp, FlickerHz float64
	LineTimeS             float64
	// NoiseSD is sensor noise, standard deviation in 8-bit levels.
	NoiseSD float64
	// BlurSamples > 1 renders that many instants spread over ExposureS and
	// averages them (motion blur).
	BlurSamples int
	ExposureS   float64
	// RollingPose renders each row with the cart and camera where they are
	// when that row is exposed: row j at the frame time + (j − H/2)·
	// LineTimeS (rolling-shutter skew and wobble). Truth uses the same
	// per-row poses. Flicker bands use LineTimeS with or without it.
	RollingPose bool
	// DriftGain and DriftWB make the exposure and the white balance wander
	// from frame to frame, as a camera's automatic exposure and white
	// balance hunt: the gain is multiplied by 1 + DriftGain·d(t) and each
	// colour channel by 1 + DriftWB·d_c(t), where d are slow sums of
	// sinusoids (0.15 to 1.1 Hz, random phases) plus a small frame-to-frame
	// jitter, each within [−1, 1]. Not a model of any camera's controller.
	DriftGain, DriftWB float64
}

// GainStep sets Light.Gain from time AtS on.
type GainStep struct{ AtS, Gain float64 }

// Backdrop is what rays above the horizon (or beyond FarM on the floor)
// see: a distant wall with rack uprights and windows, by direction only
// (at infinity: no parallax).
type Backdrop struct {
	Wall, Upright RGB
	FarM          float64
	// Windows are bright panes in the wall.
	Windows []Window
}

// Window is a rectangle of the backdrop between world azimuths AzDeg ±
// WidthDeg/2 (counter-clockwise from +X) and elevations El0Deg to El1Deg
// above the horizontal, of colour Pane (values above 1 saturate: daylight),
// divided by dark mullions every MullionDeg of azimuth (0 = none).
type Window struct {
	AzDeg, WidthDeg float64
	El0Deg, El1Deg  float64
	Pane            RGB
	MullionDeg      float64
}

// Prop is an upright object standing on the floor at (X, Y) and moving at
// (VX, VY) m/s: drawn as a flat cut-out facing the camera (a billboard), so
// it hides the floor and the backdrop behind it and, in the truth, the
// stripe it stands in front of. Its edges are not anti-aliased.
type Prop struct {
	Name string
	// Shape is "person" (head, body and legs; WidthM is the shoulder
	// width) or "post" (a rectangle: a rack upright, a column).
	Shape           string
	X, Y            float64
	WidthM, HeightM float64
	Colour          RGB
	VX, VY          float64
}

// Scenario is a complete synthetic clip: scene, camera, motion and length.
type Scenario struct {
	Name, Notes   string
	Width, Height int
	FPS           float64
	Frames        int
	Seed          int64

	Camera Camera
	// Stripe is the line to follow; the cart drives along Stripe.Path.
	Stripe Mark
	// Marks are other marks on the floor (drawn before the stripe).
	Marks []Mark
	// Props stand on the floor (people, rack uprights).
	Props    []Prop
	Motion   Motion
	Floor    Floor
	Light    Light
	Backdrop Backdrop
	// LookaheadM is where OffsetM is measured, ahead of the camera.
	LookaheadM float64
	// Tags are written into every truth frame ("shadow", "glare", ...).
	Tags []string
	// Follow is the mode the scene is made for: FollowStripe ("" means
	// the same) or FollowLane, in which Stripe.Path is the lane's centre
	// (not drawn) and Lane gives the two boundary lines. It goes into the
	// truth header, so that replays and scores pick the mode up.
	Follow string
	Lane   Lane
	// JPEGQuality in 1..100 passes every frame through OpenCV's JPEG
	// encoder and decoder at that quality (blocking of a cheap camera's
	// low-bitrate stream); 0 leaves frames as rendered.
	JPEGQuality int
}

// Resized returns sc for a w×h image, as the same camera with a sensor of
// another resolution would see it: the horizontal field of view is kept,
// both focal lengths scale with the width (so pixels keep their aspect)
// and the principal point keeps its place relative to the frame. At the
// same aspect ratio the camera sees the same scene; at another (16:9 from
// 4:3) the top and bottom are cropped or extended, as on a real sensor.
// A rolling shutter reads all rows out in the same time.
func (sc Scenario) Resized(w, h int) Scenario {
	if sc.Width <= 0 || sc.Height <= 0 {
		return sc
	}
	kx, ky := float64(w)/float64(sc.Width), float64(h)/float64(sc.Height)
	sc.Camera.Fx *= kx
	sc.Camera.Cx *= kx
	sc.Camera.Fy *= kx
	sc.Camera.Cy *= ky
	// the rows are read out in the same time
	sc.Light.LineTimeS /= ky
	sc.Width, sc.Height = w, h
	return sc
}

var registry = map[string]func() Scenario{}

func add(f func() Scenario) {
	sc := f()
	registry[sc.Name] = f
}

// Names returns the names of the built-in scenarios, sorted.
func Names() []string {
	var n []string
	for k := range registry {
		n = append(n, k)
	}
	sort.Strings(n)
	return n
}

// Lookup returns the built-in scenario called name. An unknown name gives
// an error wrapping capture.ErrNotFound.
func Lookup(name string) (Scenario, error) {
	f, ok := registry[name]
	if !ok {
		return Scenario{}, fmt.Errorf("synth: scenario %q (have %v): %w", name, Names(), capture.ErrNotFound)
	}
	return f(), nil
}
