package siteconfig

import (
	"image"
	"time"

	"github.com/hewline/hewline/audio"
	"github.com/hewline/hewline/calib"
	"github.com/hewline/hewline/capture/v4l2"
	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/guidance/ctlstream"
	"github.com/hewline/hewline/vision"
)

// Site is one site's configuration. The yaml tags are the field names in
// the file; see example.yaml (printed by "hewline config example") for
// every field with its meaning.
type Site struct {
	Camera Camera `yaml:"camera"`
	// Follow is what the vehicle follows: "stripe" (one taped or painted
	// line) or "lane" (the centre of the space between two lines).
	Follow      string      `yaml:"follow"`
	Lane        Lane        `yaml:"lane"`
	Detector    Detector    `yaml:"detector"`
	Alarm       Alarm       `yaml:"alarm"`
	Track       Tracker     `yaml:"tracker"`
	Cues        Cues        `yaml:"cues"`
	Outputs     Outputs     `yaml:"outputs"`
	Calibration Calibration `yaml:"calibration"`

	// file is the path the site was loaded from ("" for Default).
	file string
	// lines holds the line of each field path set in the file.
	lines map[string]int
	// flags holds the flag that set each field path, when one did.
	flags map[string]string
}

// Lane holds the lane mode's settings (follow: lane).
type Lane struct {
	// WidthMM is the lane's width on the floor, centre to centre of its
	// two lines; it needs a calibration. 0: learned while both lines are
	// seen.
	WidthMM calib.Millimetres `yaml:"width_mm"`
	// WidthPx is the lane's width in image pixels along the reference row
	// with the vehicle straight in the lane, for a camera without a
	// calibration. 0: learned.
	WidthPx float64 `yaml:"width_px"`
}

// Camera selects the camera and, optionally, its mode. Zero values mean
// "let hewline choose" (see v4l2.ChooseMode).
type Camera struct {
	// Device is /dev/videoN or a stable /dev/v4l/by-id/... name.
	Device string `yaml:"device"`
	// PixelFormat is "mjpeg", "yuyv" or "" (either).
	PixelFormat string  `yaml:"pixel_format"`
	Width       int     `yaml:"width"`
	Height      int     `yaml:"height"`
	FPS         float64 `yaml:"fps"`
}

// Region is a rectangle as fractions of the frame's width (left, right)
// and height (top, bottom).
type Region struct {
	Left   float64 `yaml:"left"`
	Top    float64 `yaml:"top"`
	Right  float64 `yaml:"right"`
	Bottom float64 `yaml:"bottom"`
}

// Detector holds the stripe detector's settings (see vision.Config).
type Detector struct {
	ROI Region `yaml:"roi"`
	// Polarity is "auto", "light" or "dark".
	Polarity string `yaml:"polarity"`
	// TapeColour is "", "none", a name (yellow, orange, red, green, blue)
	// or "bgr:B,G,R" (see vision.ParseTapeColour).
	TapeColour string `yaml:"tape_colour"`
	// TapeWidthMM is the tape's width on the floor; 0 means unknown. It
	// becomes a width hint in pixels only through a calibration.
	TapeWidthMM calib.Millimetres `yaml:"tape_width_mm"`
	// RefRow is the measuring row as a fraction of the height from the top.
	RefRow      float64 `yaml:"ref_row"`
	MinContrast float64 `yaml:"min_contrast"`
	MinSNR      float64 `yaml:"min_snr"`
	SauvolaK    float64 `yaml:"sauvola_k"`
	SauvolaR    float64 `yaml:"sauvola_r"`
	WorkWidth   int     `yaml:"work_width"`
	Iterations  int     `yaml:"iterations"`
	MinSpan     float64 `yaml:"min_span"`
}

// Tracker holds the tracker's settings other than the alarm timing (see
// guidance.Config for their meaning). The pixel settings are at a 640 px
// wide frame and scale with the frames' width.
type Tracker struct {
	MaxFrameGap       time.Duration `yaml:"max_frame_gap"`
	MinConfidence     float64       `yaml:"min_confidence"`
	HoldConfidence    float64       `yaml:"hold_confidence"`
	GateProbability   float64       `yaml:"gate_probability"`
	StepConfirmFrames int           `yaml:"step_confirm_frames"`
	OffsetNoisePx     float64       `yaml:"offset_noise_px"`
	HeadingNoiseDeg   float64       `yaml:"heading_noise_deg"`
	OffsetAccel       float64       `yaml:"offset_accel"`
	HeadingAccel      float64       `yaml:"heading_accel"`
	OffsetRateSigma   float64       `yaml:"offset_rate_sigma"`
	HeadingRateSigma  float64       `yaml:"heading_rate_sigma"`
}

// Alarm holds the fail-safe timing.
type Alarm struct {
	// FailSafeAfter: the alarm sounds when no trusted measurement came
	// for this long.
	FailSafeAfter time.Duration `yaml:"fail_safe_after"`
	// ReacquireFor: after a loss the line must be seen this long before
	// guidance resumes.
	ReacquireFor time.Duration `yaml:"reacquire_for"`
}

// Cues holds the operator's cues: the sound mapping and where cues go.
type Cues struct {
	// Speaker sounds cues and the alarm on the ALSA default device.
	Speaker bool `yaml:"speaker"`
	// RequireAlarm makes the run stop (exit 3) when no alarm channel works.
	RequireAlarm bool `yaml:"require_alarm"`
	// VibrateSerial is a motor driver's serial port ("" = none).
	VibrateSerial string `yaml:"vibrate_serial"`
	// VibrateGPIO is "LEFT,RIGHT" GPIO line numbers ("" = none).
	VibrateGPIO string `yaml:"vibrate_gpio"`
	// Sound is the guidance sound mapping (see audio.Mapping).
	Sound audio.Mapping `yaml:"sound"`
}

// Outputs says where results go.
type Outputs struct {
	// Stream is the controller stream's UDP "HOST:PORT" ("" = none).
	Stream string `yaml:"stream"`
	// Heartbeat and StaleAfter tune the stream (see ctlstream.Options).
	Heartbeat  time.Duration `yaml:"heartbeat"`
	StaleAfter time.Duration `yaml:"stale_after"`
	// TrackDir is the folder for track logs ("" = the current folder).
	TrackDir string `yaml:"track_dir"`
	// RecordDir is the folder for recorded video ("" = do not record).
	RecordDir string `yaml:"record_dir"`
}

// Calibration names the calibration file (hewline calib).
type Calibration struct {
	// File is the calibration file ("" = none: offsets in pixels only).
	File string `yaml:"file"`
	// LookaheadMM is the distance ahead at which the floor offset is
	// reported; 0 means the calibration file's own value.
	LookaheadMM calib.Millimetres `yaml:"lookahead_mm"`
}

// Default returns the built-in settings: the defaults of vision, guidance,
// audio and ctlstream, stripe mode, speaker on, alarm required.
func Default() *Site {
	v := vision.DefaultConfig()
	g := guidance.DefaultConfig()
	return &Site{
		Follow: "stripe",
		Detector: Detector{
			ROI:         Region{Left: v.ROI.Left, Top: v.ROI.Top, Right: v.ROI.Right, Bottom: v.ROI.Bottom},
			Polarity:    v.Polarity.String(),
			TapeColour:  v.TapeColour,
			RefRow:      v.RefRow,
			MinContrast: v.MinContrast,
			MinSNR:      v.MinSNR,
			SauvolaK:    v.SauvolaK,
			SauvolaR:    v.SauvolaR,
			WorkWidth:   v.WorkWidth,
			Iterations:  v.Iterations,
			MinSpan:     v.MinSpan,
		},
		Track: Tracker{
			MaxFrameGap:       g.MaxFrameGap,
			MinConfidence:     g.MinConfidence,
			HoldConfidence:    g.HoldConfidence,
			GateProbability:   g.GateProbability,
			StepConfirmFrames: g.StepConfirmFrames,
			OffsetNoisePx:     g.OffsetNoisePx,
			HeadingNoiseDeg:   g.HeadingNoiseDeg,
			OffsetAccel:       g.OffsetAccel,
			HeadingAccel:      g.HeadingAccel,
			OffsetRateSigma:   g.OffsetRateSigma,
			HeadingRateSigma:  g.HeadingRateSigma,
		},
		Alarm:   Alarm{FailSafeAfter: g.FailSafeAfter, ReacquireFor: g.ReacquireFor},
		Cues:    Cues{Speaker: true, RequireAlarm: true, Sound: audio.DefaultMapping()},
		Outputs: Outputs{Heartbeat: ctlstream.DefaultHeartbeat, StaleAfter: ctlstream.DefaultStaleAfter},
		lines:   map[string]int{},
		flags:   map[string]string{},
	}
}

// File returns the path the site was loaded from, "" for Default.
func (s *Site) File() string { return s.file }

// Vision returns the detector configuration. The tape width stays in
// Detector.TapeWidthMM: it needs a calibration to become pixels.
func (s *Site) Vision() vision.Config {
	c := vision.DefaultConfig()
	d := s.Detector
	c.RefRow = d.RefRow
	c.ROI = vision.Region{Left: d.ROI.Left, Top: d.ROI.Top, Right: d.ROI.Right, Bottom: d.ROI.Bottom}
	c.Polarity, _ = vision.ParsePolarity(d.Polarity) // checked by Load and Override
	c.TapeColour = d.TapeColour
	c.MinContrast, c.MinSNR = d.MinContrast, d.MinSNR
	c.SauvolaK, c.SauvolaR = d.SauvolaK, d.SauvolaR
	c.WorkWidth, c.Iterations, c.MinSpan = d.WorkWidth, d.Iterations, d.MinSpan
	return c
}

// Tracker returns the tracker configuration, alarm timing included.
func (s *Site) Tracker() guidance.Config {
	t := s.Track
	return guidance.Config{
		FailSafeAfter:     s.Alarm.FailSafeAfter,
		ReacquireFor:      s.Alarm.ReacquireFor,
		MaxFrameGap:       t.MaxFrameGap,
		MinConfidence:     t.MinConfidence,
		HoldConfidence:    t.HoldConfidence,
		GateProbability:   t.GateProbability,
		StepConfirmFrames: t.StepConfirmFrames,
		OffsetNoisePx:     t.OffsetNoisePx,
		HeadingNoiseDeg:   t.HeadingNoiseDeg,
		OffsetAccel:       t.OffsetAccel,
		HeadingAccel:      t.HeadingAccel,
		OffsetRateSigma:   t.OffsetRateSigma,
		HeadingRateSigma:  t.HeadingRateSigma,
	}
}

// Audio returns the guidance sound mapping.
func (s *Site) Audio() audio.Mapping { return s.Cues.Sound }

// CameraPreference returns the camera mode preference (zero fields: no
// preference).
func (s *Site) CameraPreference() v4l2.Preference {
	var p v4l2.Preference
	if s.Camera.PixelFormat != "" {
		p.Pixel, _ = v4l2.ParsePixelFormat(s.Camera.PixelFormat) // checked by Load
	}
	if s.Camera.Width > 0 && s.Camera.Height > 0 {
		p.Size = image.Pt(s.Camera.Width, s.Camera.Height)
	}
	p.FPS = s.Camera.FPS
	return p
}

// StreamOptions returns the controller stream's options (heartbeat and
// staleness; broadcast is never allowed from a site file).
func (s *Site) StreamOptions() ctlstream.Options {
	return ctlstream.Options{Heartbeat: s.Outputs.Heartbeat, StaleAfter: s.Outputs.StaleAfter}
}
