package synth

import "math"

// Scenes of cheap, low, blurred and wide-angle cameras and of dashed,
// dotted and unevenly painted markings: what real footage from small
// vehicles looks like (common practice). Each is a variation of "weave";
// the warehouse is invented and its colours are chosen by eye.

func init() {
	for _, f := range []func() Scenario{
		dashed, dashedShort, dashedLong, dotted, lowCamera, blurHeavy,
		rollingShutter, exposureDrift, jpegLow, fisheyeTight, unevenPaint,
	} {
		add(f)
	}
}

func dashed() Scenario {
	sc := weave()
	sc.Name = "dashed"
	sc.Notes = "a dashed line: 300 mm dashes with 300 mm gaps (truth treats it as one continuous line)"
	sc.Stripe.DashM, sc.Stripe.DashGapM = 0.3, 0.3
	sc.Tags = []string{"dashed"}
	return sc
}

func dashedShort() Scenario {
	sc := weave()
	sc.Name = "dashed-short"
	sc.Notes = "short dashes: 100 mm dashes with 150 mm gaps, at 1.5 m/s"
	sc.Stripe.DashM, sc.Stripe.DashGapM = 0.1, 0.15
	sc.Motion.SpeedMps = 1.5
	sc.Stripe.Path.Segments = append(sc.Stripe.Path.Segments, Straight(10))
	sc.Tags = []string{"dashed"}
	return sc
}

func dashedLong() Scenario {
	sc := weave()
	sc.Name = "dashed-long"
	sc.Notes = "long dashes and longer gaps: 500 mm dashes with 700 mm gaps, so the near half often shows one dash or none"
	sc.Stripe.DashM, sc.Stripe.DashGapM = 0.5, 0.7
	sc.Tags = []string{"dashed"}
	return sc
}

func dotted() Scenario {
	sc := weave()
	sc.Name = "dotted"
	sc.Notes = "a dotted line: round 80 mm paint dots every 250 mm (truth is the line through their centres)"
	sc.Stripe.WidthM = 0.08
	sc.Stripe.DotPitchM = 0.25
	sc.Tags = []string{"dotted"}
	return sc
}

// rackUprights are posts along both sides of a path, every bay metres
// from s0 to s1, lat metres either side.
func rackUprights(p Path, s0, s1, bay, lat float64, c RGB) []Prop {
	g := newGeom(p)
	var out []Prop
	for s := s0; s < s1; s += bay {
		x, y, psi := g.at(s)
		nx, ny := -math.Sin(psi), math.Cos(psi)
		for _, side := range []float64{-1, 1} {
			out = append(out, Prop{Name: "upright", Shape: "post", X: x + side*lat*nx, Y: y + side*lat*ny,
				WidthM: 0.09, HeightM: 3, Colour: c})
		}
	}
	return out
}

func lowCamera() Scenario {
	sc := weave()
	sc.Name = "low-camera"
	sc.Notes = "a camera 5 cm above the floor looking level along it (pitched 3° up): the horizon below the middle of the frame, " +
		"bright yellow rack uprights, daylight windows and a person standing by the aisle above it; the near stripe very wide, the far stripe a pixel or two"
	sc.Camera.HeightM = 0.05
	sc.Camera.PitchDeg = -3
	sc.Motion.WeaveAmpM = 0.08
	sc.Stripe.Path.Segments = append(sc.Stripe.Path.Segments, Straight(30))
	p := sc.Stripe.Path
	// pallet-rack uprights 1.4 m either side of the tape, a bay of 2.7 m
	// (typical bay width, from memory), painted safety yellow
	sc.Props = rackUprights(p, 3, 40, 2.7, 1.4, RGB{0.95, 0.80, 0.15})
	g := newGeom(p)
	x, y, psi := g.at(9)
	// a person in dark clothes standing 0.9 m left of the tape, then
	// walking slowly along the aisle towards the cart
	v := 0.5
	sc.Props = append(sc.Props, Prop{Name: "person", Shape: "person", X: x - 0.9*math.Sin(psi), Y: y + 0.9*math.Cos(psi),
		WidthM: 0.46, HeightM: 1.75, Colour: RGB{0.10, 0.10, 0.12}, VX: -v * math.Cos(psi), VY: -v * math.Sin(psi)})
	sc.Backdrop.Upright = RGB{0.95, 0.62, 0.10} // orange beams and uprights on the far wall
	for _, az := range []float64{-25, -8, 12, 30, 160, 200} {
		sc.Backdrop.Windows = append(sc.Backdrop.Windows, Window{AzDeg: az, WidthDeg: 9, El0Deg: 1.5, El1Deg: 14,
			Pane: RGB{1.3, 1.3, 1.25}, MullionDeg: 3})
	}
	sc.Tags = []string{"grazing", "horizon", "props"}
	return sc
}

func blurHeavy() Scenario {
	sc := weave()
	sc.Name = "blur-heavy"
	sc.Notes = "heavy motion blur: 200 mm dashes with 250 mm gaps at 2 m/s over a 1/20 s exposure (100 mm of smear), with vibration: the dashes are soft blobs"
	sc.Stripe.DashM, sc.Stripe.DashGapM = 0.2, 0.25
	sc.Stripe.Path.Segments = append(sc.Stripe.Path.Segments, Straight(10))
	sc.Motion.SpeedMps = 2
	sc.Motion.WeaveWavelengthM = 8
	sc.Motion.ShakeDeg = 0.8
	sc.Light.BlurSamples = 7
	sc.Light.ExposureS = 1.0 / 20
	sc.Tags = []string{"dashed", "blur", "shake"}
	return sc
}

func rollingShutter() Scenario {
	sc := weave()
	sc.Name = "rolling-shutter"
	sc.Notes = "rolling shutter: rows read out over 32 ms while the cart weaves hard at 2 m/s and vibrates ±2°: the stripe is skewed and wobbles (jello)"
	sc.Stripe.Path.Segments = append(sc.Stripe.Path.Segments, Straight(10))
	sc.Motion.SpeedMps = 2
	sc.Motion.WeaveAmpM = 0.15
	sc.Motion.WeaveWavelengthM = 3
	sc.Motion.ShakeDeg = 2
	sc.Light.LineTimeS = 1.0 / (30 * 500) // 480 rows in 32 ms
	sc.Light.RollingPose = true
	sc.Tags = []string{"rolling-shutter", "shake"}
	return sc
}

func exposureDrift() Scenario {
	sc := weave()
	sc.Name = "exposure-drift"
	sc.Notes = "automatic exposure and white balance hunting: gain wandering ±40 % and each colour channel ±20 % from frame to frame"
	sc.Light.DriftGain = 0.4
	sc.Light.DriftWB = 0.2
	sc.Light.NoiseSD = 2
	sc.Tags = []string{"exposure", "white-balance"}
	return sc
}

func jpegLow() Scenario {
	sc := weave()
	sc.Name = "jpeg-low"
	sc.Notes = "a cheap camera's low-bitrate stream: sensor noise, then JPEG at quality 10 (8×8 blocking, colour smear)"
	sc.Light.NoiseSD = 3
	sc.JPEGQuality = 10
	sc.Tags = []string{"jpeg", "noise"}
	return sc
}

func fisheyeTight() Scenario {
	sc := weave()
	sc.Name = "fisheye-tight"
	sc.Notes = "wide-angle lens with strong barrel distortion (fx 250 px, k1 −0.32, k2 0.09) on a long cart (camera 0.9 m ahead of the steering point) " +
		"through bends of 0.9–1.0 m radius: the stripe leaves the frame at the side in the tightest parts"
	sc.Camera.Fx, sc.Camera.Fy = 250, 250
	sc.Camera.K1, sc.Camera.K2 = -0.32, 0.09
	sc.Camera.AheadM = 0.9
	sc.Stripe.Path = Path{Segments: []Segment{Straight(2), Arc(1.0, 90), Straight(1), Arc(1.0, -120), Straight(1.5), Arc(0.9, 90), Straight(8)}}
	sc.Motion = Motion{SpeedMps: 0.8, StartM: 0.5, WeaveAmpM: 0.03, WeaveWavelengthM: 3}
	sc.Frames = 360
	sc.Tags = []string{"distortion", "curve"}
	return sc
}

func unevenPaint() Scenario {
	sc := weave()
	sc.Name = "uneven-paint"
	sc.Notes = "hand-painted line of uneven width (±30 %) and faded colour, with repainted and re-taped stretches of other widths and shades"
	sc.Stripe.WidthVar = 0.3
	sc.Stripe.FadeVar = 0.5
	sc.Stripe.Patches = []Patch{
		{FromM: 3, ToM: 4.2, WidthM: 0.07, Colour: RGB{0.98, 0.85, 0.15}},  // fresh repaint, wider
		{FromM: 6.5, ToM: 7.1, WidthM: 0.045, Colour: RGB{0.9, 0.9, 0.86}}, // patched with white tape
		{FromM: 9, ToM: 10.5, WidthM: 0.06, Colour: RGB{0.92, 0.58, 0.10}}, // orange-yellow paint
		{FromM: 13, ToM: 13.4, Colour: RGB{0.62, 0.56, 0.30}},              // dirty, old tape
	}
	sc.Tags = []string{"uneven"}
	return sc
}
