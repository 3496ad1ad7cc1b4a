package vision

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Polarity says whether the stripe is lighter or darker than the floor.
type Polarity int

const (
	// PolarityAuto tries both and keeps the better-supported line.
	PolarityAuto Polarity = iota
	// PolarityLight: the stripe is lighter than the floor (white or yellow
	// tape on concrete).
	PolarityLight
	// PolarityDark: the stripe is darker than the floor (black tape on a
	// pale epoxy floor).
	PolarityDark
)

// String returns "auto", "light" or "dark".
func (p Polarity) String() string {
	switch p {
	case PolarityAuto:
		return "auto"
	case PolarityLight:
		return "light"
	case PolarityDark:
		return "dark"
	}
	return fmt.Sprintf("Polarity(%d)", int(p))
}

// ParsePolarity reads "auto", "light" or "dark".
func ParsePolarity(s string) (Polarity, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "", "auto":
		return PolarityAuto, nil
	case "light":
		return PolarityLight, nil
	case "dark":
		return PolarityDark, nil
	}
	return PolarityAuto, fmt.Errorf("vision: polarity %q: want auto, light or dark", s)
}

// Region is a rectangle given as fractions of the frame's width (Left,
// Right) and height (Top, Bottom), 0 ≤ Left < Right ≤ 1, 0 ≤ Top < Bottom ≤ 1.
type Region struct {
	Left, Top, Right, Bottom float64
}

// BGR is an 8-bit colour in OpenCV's channel order.
type BGR struct{ B, G, R uint8 }

// Named tape colours accepted by ParseTapeColour. The values are nominal
// sRGB colours of the usual floor-marking tapes (common practice: yellow
// for aisles, white, blue, red, green for zones); only their hue direction
// matters to the detector, not their brightness.
var tapeColours = map[string]BGR{
	"yellow": {B: 0, G: 200, R: 240},
	"orange": {B: 0, G: 120, R: 240},
	"red":    {B: 40, G: 30, R: 200},
	"green":  {B: 60, G: 160, R: 30},
	"blue":   {B: 190, G: 90, R: 20},
}

// ParseTapeColour reads a tape colour: "" or "none" (no colour evidence),
// a name (yellow, orange, red, green, blue) or "bgr:B,G,R" with 0..255
// components. White, grey and black tapes carry no hue: leave the colour
// empty and use Polarity instead.
func ParseTapeColour(s string) (colour BGR, ok bool, err error) {
	s = strings.ToLower(strings.TrimSpace(s))
	if s == "" || s == "none" {
		return BGR{}, false, nil
	}
	if c, found := tapeColours[s]; found {
		return c, true, nil
	}
	if rest, found := strings.CutPrefix(s, "bgr:"); found {
		parts := strings.Split(rest, ",")
		if len(parts) == 3 {
			var v [3]uint8
			for i, p := range parts {
				n, perr := strconv.Atoi(strings.TrimSpace(p))
				if perr != nil || n < 0 || n > 255 {
					return BGR{}, false, fmt.Errorf("vision: tape colour %q: component %q is not 0..255", s, p)
				}
				v[i] = uint8(n)
			}
			c := BGR{B: v[0], G: v[1], R: v[2]}
			if chromaLen(c) < 20 {
				return BGR{}, false, fmt.Errorf("vision: tape colour %q has almost no hue; leave it empty and set the polarity", s)
			}
			return c, true, nil
		}
	}
	return BGR{}, false, fmt.Errorf("vision: tape colour %q: want yellow, orange, red, green, blue or bgr:B,G,R", s)
}

// Config sets up a Classical detector. Start from DefaultConfig and change
// what the site needs; every size is a fraction of the frame or in pixels
// of the input frame, never pixels of some assumed resolution.
type Config struct {
	// RefRow is the row at which offset, heading and width are measured,
	// as a fraction of the frame height from the top (default 0.8).
	RefRow float64
	// ROI is the part of the frame searched for the stripe (fractions).
	// The default is the whole frame; set Top from the calibrated horizon
	// when there is one so that walls and racks are not searched.
	ROI Region
	// Polarity of the stripe against the floor (default auto).
	Polarity Polarity
	// TapeColour, when set (see ParseTapeColour), adds colour evidence:
	// pixels whose hue lies in the tape's direction count as lighter, and
	// the polarity is taken as light.
	TapeColour string
	// WidthHintPx is the expected stripe width at RefRow in input-frame
	// pixels; WidthHintFrac the same as a fraction of the frame width. Set
	// at most one; zero means unknown (every plausible width is tried).
	WidthHintPx, WidthHintFrac float64
	// MinContrast is the smallest accepted Weber contrast of the stripe
	// against both of its sides, (stripe − side)/side (default 0.05).
	MinContrast float64
	// MinSNR is the smallest accepted contrast in units of the image
	// noise estimated for the frame (default 4).
	MinSNR float64
	// SauvolaK and SauvolaR are the parameters of the Sauvola local
	// threshold T = m·(1 + k·(s/R − 1)) used to confirm each candidate
	// (Sauvola & Pietikäinen 2000; defaults k 0.2, R 128).
	SauvolaK, SauvolaR float64
	// WorkWidth is the width in pixels of the downscaled image the
	// detector works on; frames narrower are used as they are (default
	// 320). Cost per frame depends on it, not on the input size.
	WorkWidth int
	// Iterations of the robust (RANSAC) fit (default 160).
	Iterations int
	// MinSpan is the shortest accepted line as a fraction of the ROI
	// height (default 0.2).
	MinSpan float64
}

// DefaultConfig returns the settings described on each Config field.
func DefaultConfig() Config {
	return Config{
		RefRow:      0.8,
		ROI:         Region{Left: 0, Top: 0, Right: 1, Bottom: 1},
		Polarity:    PolarityAuto,
		MinContrast: 0.05,
		MinSNR:      4,
		SauvolaK:    0.2,
		SauvolaR:    128,
		WorkWidth:   320,
		Iterations:  160,
		MinSpan:     0.2,
	}
}

// Validate reports the first setting that cannot work.
func (c Config) Validate() error {
	var errs []error
	bad := func(format string, a ...any) { errs = append(errs, fmt.Errorf("vision: "+format, a...)) }
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	if !finite(c.RefRow) || c.RefRow <= 0 || c.RefRow >= 1 {
		bad("ref row %v: want a fraction of the height in (0, 1)", c.RefRow)
	}
	r := c.ROI
	if !finite(r.Left) || !finite(r.Right) || !finite(r.Top) || !finite(r.Bottom) ||
		r.Left < 0 || r.Top < 0 || r.Right > 1 || r.Bottom > 1 ||
		r.Right-r.Left < 0.1 || r.Bottom-r.Top < 0.1 {
		bad("region of interest %+v: want fractions with 0 ≤ left < right ≤ 1, 0 ≤ top < bottom ≤ 1, each side at least 0.1", r)
	}
	if c.Polarity < PolarityAuto || c.Polarity > PolarityDark {
		bad("polarity %d: want auto, light or dark", int(c.Polarity))
	}
	if _, _, err := ParseTapeColour(c.TapeColour); err != nil {
		errs = append(errs, err)
	}
	if c.WidthHintPx != 0 && c.WidthHintFrac != 0 {
		bad("width hint: set pixels or fraction, not both")
	}
	if !finite(c.WidthHintPx) || c.WidthHintPx < 0 {
		bad("width hint %v px: want ≥ 0", c.WidthHintPx)
	}
	if !finite(c.WidthHintFrac) || c.WidthHintFrac < 0 || c.WidthHintFrac > 0.5 {
		bad("width hint %v: want a fraction of the width in [0, 0.5]", c.WidthHintFrac)
	}
	if !finite(c.MinContrast) || c.MinContrast <= 0 || c.MinContrast >= 1 {
		bad("min contrast %v: want (0, 1)", c.MinContrast)
	}
	if !finite(c.MinSNR) || c.MinSNR < 1 || c.MinSNR > 50 {
		bad("min SNR %v: want [1, 50]", c.MinSNR)
	}
	if !finite(c.SauvolaK) || c.SauvolaK <= 0 || c.SauvolaK >= 1 {
		bad("Sauvola k %v: want (0, 1)", c.SauvolaK)
	}
	if !finite(c.SauvolaR) || c.SauvolaR <= 0 || c.SauvolaR > 255 {
		bad("Sauvola R %v: want (0, 255]", c.SauvolaR)
	}
	if c.WorkWidth < 64 || c.WorkWidth > 1280 {
		bad("work width %d: want 64..1280", c.WorkWidth)
	}
	if c.Iterations < 10 || c.Iterations > 10000 {
		bad("iterations %d: want 10..10000", c.Iterations)
	}
	if !finite(c.MinSpan) || c.MinSpan <= 0 || c.MinSpan > 1 {
		bad("min span %v: want (0, 1]", c.MinSpan)
	}
	return errors.Join(errs...)
}

func chromaLen(c BGR) float64 {
	b, g, r := float64(c.B), float64(c.G), float64(c.R)
	m := (b + g + r) / 3
	return math.Sqrt((b-m)*(b-m) + (g-m)*(g-m) + (r-m)*(r-m))
}
