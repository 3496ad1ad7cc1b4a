package audio

import (
	"errors"
	"fmt"
	"math"
	"time"
)

// Cue is the decision the pipeline hands to audio for one frame. Guidance
// decides; audio only sounds it.
type Cue struct {
	// Alarm switches the fail-safe alarm on. It overrides the guidance cue.
	Alarm bool
	// Guide switches the guidance cue on. When false the cue is silent.
	Guide bool
	// Offset is the lateral error normalised to −1..1; positive means the
	// cart must steer right. Values beyond ±1 are clamped. A value that is
	// not finite mutes the guidance cue (no false cue); it does not raise
	// the alarm, which is guidance's decision.
	Offset float64
	// Heading is the heading error normalised to −1..1 (positive: steer
	// right), blended in with Mapping.HeadingWeight.
	Heading float64
}

// Mode selects how the guidance cue codes the error.
type Mode string

const (
	// ModeTone codes the error in pitch, loudness and balance.
	ModeTone Mode = "tone"
	// ModePulse codes it in pulse rate, loudness and balance at fixed pitch.
	ModePulse Mode = "pulse"
)

// Mapping describes how a Cue's error becomes the guidance sound. See the
// package documentation for the formulas.
type Mapping struct {
	Mode Mode `yaml:"mode"`
	// DeadBand is the half-width of the quiet zone around centre, in
	// normalised error (0 ≤ DeadBand < 1).
	DeadBand float64 `yaml:"dead_band"`
	// CentreGain is the linear gain (0..1) of the cue inside the dead band,
	// relative to MinLevelDBFS. 0 means silent on target.
	CentreGain float64 `yaml:"centre_gain"`
	// MinLevelDBFS is the level just past the dead band, LevelDBFS at full
	// error (peak, dB relative to full scale, ≤ 0).
	MinLevelDBFS float64 `yaml:"min_level_dbfs"`
	LevelDBFS    float64 `yaml:"level_dbfs"`
	// PanDBPerUnit is the level difference between the two channels per
	// unit of |error|, in dB (≥ 0).
	PanDBPerUnit float64 `yaml:"pan_db_per_unit"`
	// MinPitchHz and MaxPitchHz bound the cue's pitch.
	MinPitchHz float64 `yaml:"min_pitch_hz"`
	MaxPitchHz float64 `yaml:"max_pitch_hz"`
	// MinPulseHz and MaxPulseHz bound the pulse rate (pulses per second) in
	// ModePulse; PulseDuty is the on fraction of each pulse period.
	MinPulseHz float64 `yaml:"min_pulse_hz"`
	MaxPulseHz float64 `yaml:"max_pulse_hz"`
	PulseDuty  float64 `yaml:"pulse_duty"`
	// HeadingWeight blends the heading into the error (0 = offset only).
	HeadingWeight float64 `yaml:"heading_weight"`
	// Ramp is the glide time of level, balance, pitch and pulse edges,
	// which keeps the sound free of clicks.
	Ramp time.Duration `yaml:"ramp"`
}

// DefaultMapping is the tone mode mapping used unless configured otherwise:
// silent within ±5 % of centre, −30 to −12 dBFS, 18 dB of balance at full
// error, one octave 440–880 Hz, pulses 1–8 per second at 50 % duty, 5 ms
// glides.
func DefaultMapping() Mapping {
	return Mapping{
		Mode:         ModeTone,
		DeadBand:     0.05,
		CentreGain:   0,
		MinLevelDBFS: -30,
		LevelDBFS:    -12,
		PanDBPerUnit: 18,
		MinPitchHz:   440,
		MaxPitchHz:   880,
		MinPulseHz:   1,
		MaxPulseHz:   8,
		PulseDuty:    0.5,
		Ramp:         5 * time.Millisecond,
	}
}

// ErrBadConfig is wrapped by every Validate error.
var ErrBadConfig = errors.New("audio: bad configuration")

func badf(format string, a ...any) error {
	return fmt.Errorf("%w: %s", ErrBadConfig, fmt.Sprintf(format, a...))
}

func finite(vs ...float64) bool {
	for _, v := range vs {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return true
}

// Validate reports the first field out of range.
func (m Mapping) Validate() error {
	switch {
	case m.Mode != ModeTone && m.Mode != ModePulse:
		return badf("mode %q: want %q or %q", m.Mode, ModeTone, ModePulse)
	case !finite(m.DeadBand, m.CentreGain, m.MinLevelDBFS, m.LevelDBFS, m.PanDBPerUnit,
		m.MinPitchHz, m.MaxPitchHz, m.MinPulseHz, m.MaxPulseHz, m.PulseDuty, m.HeadingWeight):
		return badf("mapping has a value that is not finite")
	case m.DeadBand < 0 || m.DeadBand >= 1:
		return badf("dead band %g: want 0 ≤ d < 1", m.DeadBand)
	case m.CentreGain < 0 || m.CentreGain > 1:
		return badf("centre gain %g: want 0..1", m.CentreGain)
	case m.LevelDBFS > 0 || m.MinLevelDBFS > m.LevelDBFS || m.MinLevelDBFS < -90:
		return badf("levels %g..%g dBFS: want −90 ≤ min ≤ max ≤ 0", m.MinLevelDBFS, m.LevelDBFS)
	case m.PanDBPerUnit < 0 || m.PanDBPerUnit > 60:
		return badf("pan %g dB per unit: want 0..60", m.PanDBPerUnit)
	case m.MinPitchHz < 50 || m.MaxPitchHz < m.MinPitchHz || m.MaxPitchHz > 8000:
		return badf("pitch %g..%g Hz: want 50 ≤ min ≤ max ≤ 8000", m.MinPitchHz, m.MaxPitchHz)
	case m.MinPulseHz <= 0 || m.MaxPulseHz < m.MinPulseHz || m.MaxPulseHz > 20:
		return badf("pulse rate %g..%g /s: want 0 < min ≤ max ≤ 20", m.MinPulseHz, m.MaxPulseHz)
	case m.PulseDuty <= 0 || m.PulseDuty >= 1:
		return badf("pulse duty %g: want 0 < duty < 1", m.PulseDuty)
	case m.Ramp < 0 || m.Ramp > 50*time.Millisecond:
		return badf("ramp %v: want 0..50ms", m.Ramp)
	}
	return nil
}

// guideParams is what a mapping makes of one cue.
type guideParams struct {
	gainL, gainR float64 // linear peak gains
	freqHz       float64
	pulseHz      float64 // 0 = steady
}

// params maps a cue to the guidance sound. Alarm and Guide are not looked
// at here.
func (m Mapping) params(c Cue) guideParams {
	e := c.Offset
	if m.HeadingWeight != 0 { // an unused heading, even NaN, changes nothing
		e += m.HeadingWeight * c.Heading
	}
	if !finite(e) {
		return guideParams{freqHz: m.MinPitchHz}
	}
	e = math.Max(-1, math.Min(1, e))
	a := math.Abs(e)
	if a <= m.DeadBand {
		g := m.CentreGain * dbToGain(m.MinLevelDBFS)
		return guideParams{gainL: g, gainR: g, freqHz: m.MinPitchHz}
	}
	u := (a - m.DeadBand) / (1 - m.DeadBand)
	near := dbToGain(m.MinLevelDBFS + (m.LevelDBFS-m.MinLevelDBFS)*u)
	far := near * dbToGain(-m.PanDBPerUnit*a)
	p := guideParams{gainL: near, gainR: far, freqHz: m.MinPitchHz}
	if e > 0 {
		p.gainL, p.gainR = far, near
	}
	if m.Mode == ModeTone {
		p.freqHz = m.MinPitchHz * math.Pow(m.MaxPitchHz/m.MinPitchHz, u)
	} else {
		p.pulseHz = m.MinPulseHz + (m.MaxPulseHz-m.MinPulseHz)*u
	}
	return p
}

// Expected returns, for documentation and tests, what the mapping makes of
// a cue: the peak level in dBFS of the left and right channel (−Inf when
// silent), the pitch in Hz and the pulse rate per second (0 = steady).
func (m Mapping) Expected(c Cue) (leftDBFS, rightDBFS, pitchHz, pulseHz float64) {
	p := m.params(c)
	if !c.Guide || c.Alarm {
		p.gainL, p.gainR = 0, 0
	}
	return gainToDB(p.gainL), gainToDB(p.gainR), p.freqHz, p.pulseHz
}

func dbToGain(db float64) float64 { return math.Pow(10, db/20) }

func gainToDB(g float64) float64 {
	if g <= 0 {
		return math.Inf(-1)
	}
	return 20 * math.Log10(g)
}

// AlarmPattern describes the fail-safe alarm sound.
type AlarmPattern struct {
	// FundamentalHz is the lowest component; component k (1-based) sits at
	// k·FundamentalHz with linear amplitude Harmonics[k−1].
	FundamentalHz float64   `yaml:"fundamental_hz"`
	Harmonics     []float64 `yaml:"harmonics"`
	// Pulse is a pulse's duration between its half-amplitude points, Rise
	// its rise (and fall) time, Spacing the gap between the half-amplitude
	// points of two pulses in a group.
	Pulse   time.Duration `yaml:"pulse"`
	Rise    time.Duration `yaml:"rise"`
	Spacing time.Duration `yaml:"spacing"`
	// Groups lists how many pulses each group of a burst has; GroupGap
	// replaces Spacing between groups and BurstGap after the last pulse of
	// a burst, before the burst repeats.
	Groups   []int         `yaml:"groups"`
	GroupGap time.Duration `yaml:"group_gap"`
	BurstGap time.Duration `yaml:"burst_gap"`
	// LevelDBFS is the peak level of the summed components (≤ 0).
	LevelDBFS float64 `yaml:"level_dbfs"`
	// BandLowHz and BandHighHz are the band every component must lie in.
	BandLowHz  float64 `yaml:"band_low_hz"`
	BandHighHz float64 `yaml:"band_high_hz"`
}

// DefaultAlarm is the fail-safe alarm: components at 510, 1020, 1530 and
// 2040 Hz (all inside 500–2500 Hz, ISO 7731's band for danger signals, with
// most energy in 500–1500 Hz, which ISO 7731 favours for listeners with
// hearing loss — from memory), pulses of 150 ms with 20 ms rise (13 %),
// 100 ms apart, grouped 3+2+3+2 = 10 pulses a burst with 300 ms between
// groups, and 1 s between bursts.
//
// The pulse figures follow IEC 60601-1-8's high-priority alarm, from
// memory: 10 pulses per burst, pulse 75–200 ms, spacing 50–125 ms, rise
// 10–20 % of the pulse, at least 4 harmonic components. The gap between
// bursts is kept short on purpose (that standard allows several seconds):
// a cart that has lost its line must not go quiet for long.
func DefaultAlarm() AlarmPattern {
	return AlarmPattern{
		FundamentalHz: 510,
		Harmonics:     []float64{1, 0.7, 0.5, 0.35},
		Pulse:         150 * time.Millisecond,
		Rise:          20 * time.Millisecond,
		Spacing:       100 * time.Millisecond,
		Groups:        []int{3, 2, 3, 2},
		GroupGap:      300 * time.Millisecond,
		BurstGap:      time.Second,
		LevelDBFS:     -1,
		BandLowHz:     500,
		BandHighHz:    2500,
	}
}

// Validate reports the first field out of range. Every component must lie
// inside [BandLowHz, BandHighHz].
func (a AlarmPattern) Validate() error {
	switch {
	case !finite(a.FundamentalHz, a.LevelDBFS, a.BandLowHz, a.BandHighHz):
		return badf("alarm has a value that is not finite")
	case a.FundamentalHz <= 0:
		return badf("alarm fundamental %g Hz: want > 0", a.FundamentalHz)
	case len(a.Harmonics) == 0:
		return badf("alarm has no components")
	case a.BandLowHz <= 0 || a.BandHighHz <= a.BandLowHz:
		return badf("alarm band %g..%g Hz", a.BandLowHz, a.BandHighHz)
	case a.LevelDBFS > 0 || a.LevelDBFS < -40:
		return badf("alarm level %g dBFS: want −40..0 (it must stay loud)", a.LevelDBFS)
	case a.Rise <= 0 || a.Pulse <= a.Rise:
		return badf("alarm pulse %v with rise %v: want 0 < rise < pulse", a.Pulse, a.Rise)
	case a.Spacing <= a.Rise || a.GroupGap < a.Spacing || a.BurstGap < a.Spacing:
		return badf("alarm gaps %v/%v/%v: want rise < spacing ≤ group gap, burst gap", a.Spacing, a.GroupGap, a.BurstGap)
	case len(a.Groups) == 0:
		return badf("alarm has no pulse groups")
	}
	for k, h := range a.Harmonics {
		f := float64(k+1) * a.FundamentalHz
		if !finite(h) || h < 0 || h > 1 {
			return badf("alarm component %d amplitude %g: want 0..1", k+1, h)
		}
		if h > 0 && (f < a.BandLowHz || f > a.BandHighHz) {
			return badf("alarm component %d at %g Hz lies outside %g..%g Hz", k+1, f, a.BandLowHz, a.BandHighHz)
		}
	}
	for _, n := range a.Groups {
		if n <= 0 {
			return badf("alarm group of %d pulses", n)
		}
	}
	return nil
}

// Onsets returns, for documentation and tests, the half-amplitude rise
// times of the pulses of one burst relative to the alarm's start, and the
// burst period.
func (a AlarmPattern) Onsets() (onsets []time.Duration, period time.Duration) {
	t := a.Rise / 2
	for g, n := range a.Groups {
		for i := 0; i < n; i++ {
			onsets = append(onsets, t)
			t += a.Pulse
			switch {
			case i < n-1:
				t += a.Spacing
			case g < len(a.Groups)-1:
				t += a.GroupGap
			default:
				t += a.BurstGap
			}
		}
	}
	return onsets, t
}
