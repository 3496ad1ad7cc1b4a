package guidance

import (
	"fmt"
	"math"
	"strings"
	"time"
)

// Config tunes a Tracker. Start from DefaultConfig and change what you
// need; Validate says what is wrong with a Config.
type Config struct {
	// FailSafeAfter: the alarm turns on when no trusted measurement has
	// arrived for this long (also since start before the first lock).
	FailSafeAfter time.Duration `yaml:"fail_safe_after"`
	// ReacquireFor: after a loss (and at start) the line must be seen
	// continuously for this long before guidance resumes.
	ReacquireFor time.Duration `yaml:"reacquire_for"`
	// MaxFrameGap: a gap between frames longer than this breaks the
	// "continuously seen" run of Regaining/Seeking, and a Tick this long
	// after the last trusted measurement marks the track as Coasting.
	MaxFrameGap time.Duration `yaml:"max_frame_gap"`

	// MinConfidence: a measurement needs at least this confidence to
	// start or extend a (re)acquisition.
	MinConfidence float64 `yaml:"min_confidence"`
	// HoldConfidence (≤ MinConfidence): once locked, measurements down
	// to this confidence are still used. The gap between the two is the
	// hysteresis that stops a confidence hovering near one threshold
	// from flipping the state every frame.
	HoldConfidence float64 `yaml:"hold_confidence"`

	// GateProbability: a measurement is accepted when its normalised
	// innovation squared is below the chi-square quantile of this
	// probability with 2 degrees of freedom (offset and heading).
	GateProbability float64 `yaml:"gate_probability"`
	// StepConfirmFrames: this many consecutive gate-rejected
	// measurements that agree with each other are taken as a real move
	// of the line, and the track jumps to them. One unusable frame (no
	// line, or one below HoldConfidence) may fall between two of them;
	// two in a row start the count again.
	StepConfirmFrames int `yaml:"step_confirm_frames"`

	// The pixel settings below (OffsetNoisePx, OffsetAccel,
	// OffsetRateSigma) are at a 640 px wide frame (RefWidthPx); the
	// tracker scales them to the frames it is given (SetFrameWidth).
	//
	// OffsetNoisePx and HeadingNoiseDeg: 1-sigma measurement noise.
	OffsetNoisePx   float64 `yaml:"offset_noise_px"`
	HeadingNoiseDeg float64 `yaml:"heading_noise_deg"`
	// OffsetAccel (px/s²) and HeadingAccel (deg/s²): 1-sigma process
	// noise of the constant-velocity model (white-noise acceleration).
	OffsetAccel  float64 `yaml:"offset_accel"`
	HeadingAccel float64 `yaml:"heading_accel"`
	// OffsetRateSigma (px/s) and HeadingRateSigma (deg/s): 1-sigma
	// uncertainty of the rates when a track starts.
	OffsetRateSigma  float64 `yaml:"offset_rate_sigma"`
	HeadingRateSigma float64 `yaml:"heading_rate_sigma"`
}

// DefaultConfig returns the settings used when none are given.
func DefaultConfig() Config {
	return Config{
		FailSafeAfter:     300 * time.Millisecond,
		ReacquireFor:      200 * time.Millisecond,
		MaxFrameGap:       150 * time.Millisecond,
		MinConfidence:     0.5,
		HoldConfidence:    0.4,
		GateProbability:   0.99,
		StepConfirmFrames: 3,
		OffsetNoisePx:     4,
		HeadingNoiseDeg:   1.5,
		OffsetAccel:       200,
		HeadingAccel:      60,
		OffsetRateSigma:   200,
		HeadingRateSigma:  60,
	}
}

// Validate returns an error naming every bad field, or nil.
func (c Config) Validate() error {
	var errs []string
	bad := func(format string, a ...any) { errs = append(errs, fmt.Sprintf(format, a...)) }
	if c.FailSafeAfter <= 0 {
		bad("fail_safe_after must be > 0, got %v", c.FailSafeAfter)
	}
	if c.ReacquireFor < 0 {
		bad("reacquire_for must be ≥ 0, got %v", c.ReacquireFor)
	}
	if c.MaxFrameGap <= 0 {
		bad("max_frame_gap must be > 0, got %v", c.MaxFrameGap)
	}
	if !(c.MinConfidence >= 0 && c.MinConfidence <= 1) {
		bad("min_confidence must be in [0, 1], got %v", c.MinConfidence)
	}
	if !(c.HoldConfidence >= 0 && c.HoldConfidence <= c.MinConfidence) {
		bad("hold_confidence must be in [0, min_confidence=%v], got %v", c.MinConfidence, c.HoldConfidence)
	}
	if !(c.GateProbability > 0 && c.GateProbability < 1) {
		bad("gate_probability must be in (0, 1), got %v", c.GateProbability)
	}
	if c.StepConfirmFrames < 1 {
		bad("step_confirm_frames must be ≥ 1, got %d", c.StepConfirmFrames)
	}
	for _, f := range []struct {
		name string
		v    float64
	}{
		{"offset_noise_px", c.OffsetNoisePx}, {"heading_noise_deg", c.HeadingNoiseDeg},
		{"offset_accel", c.OffsetAccel}, {"heading_accel", c.HeadingAccel},
		{"offset_rate_sigma", c.OffsetRateSigma}, {"heading_rate_sigma", c.HeadingRateSigma},
	} {
		if !(f.v > 0) || math.IsInf(f.v, 0) {
			bad("%s must be a positive number, got %v", f.name, f.v)
		}
	}
	if len(errs) > 0 {
		// One line, so the command can print it as a single message.
		return fmt.Errorf("guidance: config: %s", strings.Join(errs, "; "))
	}
	return nil
}

// String summarises the settings in force on one line, for the log.
func (c Config) String() string {
	return fmt.Sprintf("fail_safe_after=%v reacquire_for=%v max_frame_gap=%v min_confidence=%.2f hold_confidence=%.2f gate_probability=%.3f step_confirm_frames=%d offset_noise_px=%g heading_noise_deg=%g offset_accel=%g heading_accel=%g",
		c.FailSafeAfter, c.ReacquireFor, c.MaxFrameGap, c.MinConfidence, c.HoldConfidence,
		c.GateProbability, c.StepConfirmFrames, c.OffsetNoisePx, c.HeadingNoiseDeg, c.OffsetAccel, c.HeadingAccel)
}
