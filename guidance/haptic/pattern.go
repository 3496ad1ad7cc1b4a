package haptic

import (
	"math"
	"time"
)

// Level is a motor's drive strength: 0 off, 255 full.
type Level uint8

// Full is the strongest level.
const Full Level = 255

// Pattern is what one motor does: pulses of On at Level, each followed by
// Off at zero, grouped in bursts of Burst pulses with an extra Gap of zero
// after each burst. Off 0 with Gap 0 means steady vibration. A pattern
// with Level 0 or On 0 is silence.
type Pattern struct {
	Level   Level
	On, Off time.Duration
	// Burst is the number of pulses per group; 0 and 1 mean a regular
	// train without groups.
	Burst int
	// Gap is the extra pause after each burst.
	Gap time.Duration
}

// Silent reports whether the pattern never drives the motor.
func (p Pattern) Silent() bool { return p.Level == 0 || p.On <= 0 }

func (p Pattern) burst() int {
	if p.Burst < 1 {
		return 1
	}
	return p.Burst
}

// slot is the length of pulse i of a burst (its On, Off, and the Gap after
// the burst's last pulse).
func (p Pattern) slot(i int) time.Duration {
	d := p.On + p.Off
	if i == p.burst()-1 {
		d += p.Gap
	}
	return d
}

// Period is the length of one burst (one pulse for a regular train).
func (p Pattern) Period() time.Duration {
	return time.Duration(p.burst())*(p.On+p.Off) + p.Gap
}

// Rate is the mean number of pulses per second; 0 for silence and for
// steady vibration.
func (p Pattern) Rate() float64 {
	if p.Silent() || (p.Off <= 0 && p.Gap <= 0) {
		return 0
	}
	return float64(p.burst()) / p.Period().Seconds()
}

// At is the motor level t after the pattern started.
func (p Pattern) At(t time.Duration) Level {
	if p.Silent() || t < 0 {
		return 0
	}
	if p.Off <= 0 && p.Gap <= 0 {
		return p.Level
	}
	t %= p.Period()
	for i := 0; i < p.burst(); i++ {
		if t < p.On {
			return p.Level
		}
		t -= p.slot(i)
		if t < 0 {
			return 0
		}
	}
	return 0
}

// Cue is what the operator should feel.
type Cue struct {
	// Offset is normalised to −1..1 (clamped); its sign is the side to
	// steer towards: positive = steer right = right motor.
	Offset float64
	// Guide: the offset comes from a trusted estimate.
	Guide bool
	// Alarm: tracking cannot be trusted; overrides Guide.
	Alarm bool
}

// Normalize scales an offset to a Cue.Offset: offset/fullScale clamped to
// −1..1 (for example OffsetPx over half the image width). A non-finite
// result stays NaN so that Map plays it as the alarm.
func Normalize(offset, fullScale float64) float64 {
	if !(fullScale > 0) {
		return math.NaN()
	}
	v := offset / fullScale
	if math.IsNaN(v) {
		return v
	}
	return math.Max(-1, math.Min(1, v))
}

// AlarmPattern is the default alarm, on both motors: bursts of three
// strong 80 ms pulses 60 ms apart, then 360 ms of rest (period 780 ms).
// Its grouping and both-sided, full-strength drive set it apart from every
// guidance pattern, which is one-sided, regular and weaker. The pulse and
// spacing lengths follow the high-priority burst of IEC 60601-1-8 (pulse
// 75–200 ms, spacing 50–125 ms; from memory, see REFERENCES.md).
var AlarmPattern = Pattern{Level: Full, On: 80 * time.Millisecond, Off: 60 * time.Millisecond, Burst: 3, Gap: 360 * time.Millisecond}

// Mapper turns cues into left and right motor patterns. Its fields may be
// set before first use; NewMapper fills in the defaults, and zero rate,
// level, duty and alarm fields take them too. It keeps the dead
// band's hysteresis state, so use one Mapper per cue stream; not safe for
// concurrent use.
type Mapper struct {
	// DeadBand: |offset| below this is quiet (on the line).
	DeadBand float64
	// Hysteresis: once quiet, the cue stays quiet until |offset| exceeds
	// DeadBand+Hysteresis, so an offset hovering at the edge does not
	// chatter between quiet and pulsing.
	Hysteresis float64
	// MinRate and MaxRate (pulses per second) at the dead band's edge and
	// at |offset| = 1.
	MinRate, MaxRate float64
	// MinLevel and MaxLevel, likewise. Keep MaxLevel below Alarm.Level.
	MinLevel, MaxLevel Level
	// Duty is the on fraction of each guidance pulse, in (0, 1).
	Duty float64
	// Alarm is played on both motors when the cue says Alarm.
	Alarm Pattern

	loud bool // outside the dead band at the last cue
}

// Default mapping (our own choice, within the coding range of REFERENCES.md).
const (
	DefaultDeadBand   = 0.08
	DefaultHysteresis = 0.04
	DefaultMinRate    = 1.0
	DefaultMaxRate    = 8.0
	DefaultMinLevel   = Level(110)
	DefaultMaxLevel   = Level(200)
	DefaultDuty       = 0.5
)

// NewMapper returns a Mapper with the default settings.
func NewMapper() *Mapper {
	return &Mapper{DeadBand: DefaultDeadBand, Hysteresis: DefaultHysteresis,
		MinRate: DefaultMinRate, MaxRate: DefaultMaxRate,
		MinLevel: DefaultMinLevel, MaxLevel: DefaultMaxLevel,
		Duty: DefaultDuty, Alarm: AlarmPattern}
}

// Map returns the patterns for c. An alarm, or a guide cue whose offset is
// not a number, gives Alarm on both motors; no guide gives silence.
func (m *Mapper) Map(c Cue) (left, right Pattern) {
	m.fill()
	if c.Alarm || (c.Guide && math.IsNaN(c.Offset)) {
		m.loud = false
		return m.Alarm, m.Alarm
	}
	if !c.Guide {
		m.loud = false
		return Pattern{}, Pattern{}
	}
	a := math.Min(1, math.Abs(c.Offset))
	edge := m.DeadBand
	if !m.loud {
		edge += m.Hysteresis
	}
	if a <= edge {
		m.loud = false
		return Pattern{}, Pattern{}
	}
	m.loud = true
	u := 0.0
	if m.DeadBand < 1 {
		u = math.Max(0, (a-m.DeadBand)/(1-m.DeadBand))
	}
	rate := m.MinRate + u*(m.MaxRate-m.MinRate)
	period := time.Duration(float64(time.Second) / rate)
	on := time.Duration(float64(period) * m.Duty)
	p := Pattern{
		Level: m.MinLevel + Level(math.Round(u*float64(m.MaxLevel-m.MinLevel))),
		On:    on,
		Off:   period - on,
	}
	if c.Offset > 0 {
		return Pattern{}, p
	}
	return p, Pattern{}
}

// fill gives unset fields their defaults.
func (m *Mapper) fill() {
	if !(m.MinRate > 0) {
		m.MinRate = DefaultMinRate
	}
	if !(m.MaxRate >= m.MinRate) {
		m.MaxRate = math.Max(DefaultMaxRate, m.MinRate)
	}
	if m.MinLevel == 0 {
		m.MinLevel = DefaultMinLevel
	}
	if m.MaxLevel < m.MinLevel {
		m.MaxLevel = m.MinLevel
	}
	if !(m.Duty > 0 && m.Duty < 1) {
		m.Duty = DefaultDuty
	}
	if m.Alarm.Silent() {
		m.Alarm = AlarmPattern
	}
}
