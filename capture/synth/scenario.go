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
}

// GainStep sets Light.Gain from time AtS on.
type GainStep struct{ AtS, Gain float64 }

// Backdrop is what rays above the horizon (or beyond FarM on the floor)
// see: a wall with rack uprights.
type Backdrop struct {
	Wall, Upright RGB
	FarM          float64
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
	Marks    []Mark
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
}

// Resized returns sc for a w×h image: the intrinsics scale with the image
// so the camera sees the same scene.
func (sc Scenario) Resized(w, h int) Scenario {
	if sc.Width <= 0 || sc.Height <= 0 {
		return sc
	}
	kx, ky := float64(w)/float64(sc.Width), float64(h)/float64(sc.Height)
	sc.Camera.Fx *= kx
	sc.Camera.Cx *= kx
	sc.Camera.Fy *= ky
	sc.Camera.Cy *= ky
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
