package audio

import (
	"fmt"
	"math"
	"sync"
)

// Synth renders cues as interleaved stereo float32 PCM. Set and Fill may be
// called from different goroutines; Fill must not be called concurrently
// with itself.
type Synth struct {
	rate float64
	m    Mapping
	a    AlarmPattern

	mu  sync.Mutex
	cue Cue // the latest cue, read at the start of each Fill

	// guidance state
	target       guideParams
	gainL, gainR float64 // smoothed linear gains
	freq         float64 // smoothed pitch, Hz
	phase        float64 // tone phase, cycles in [0, 1)
	pulsePhase   float64 // pulse phase, cycles in [0, 1)
	gate         float64 // pulse envelope 0..1
	smooth       float64 // one-pole coefficient per sample
	slew         float64 // linear ramp step per sample

	// alarm state
	alarmOn     bool // the cue asks for the alarm
	alarmActive bool // the alarm is sounding (or fading out)
	alarmT      int  // samples since the alarm started, modulo the burst period
	alarmGate   float64
	alarmPhase  float64 // fundamental phase, cycles
	alarmScale  float64
	starts      []int // sample where each pulse of a burst starts rising
	period      int   // burst period in samples
	riseN       int   // rise (and fall) in samples
	holdN       int   // from rise start to fall start, in samples
}

// NewSynth returns a Synth at rate samples per second (8000–192000) that
// starts silent, with no alarm.
func NewSynth(rate int, m Mapping, a AlarmPattern) (*Synth, error) {
	if rate < 8000 || rate > 192000 {
		return nil, badf("sample rate %d: want 8000..192000", rate)
	}
	if err := m.Validate(); err != nil {
		return nil, err
	}
	if err := a.Validate(); err != nil {
		return nil, err
	}
	if top := float64(len(a.Harmonics)) * a.FundamentalHz; top >= float64(rate)/2 {
		return nil, badf("alarm component at %g Hz is above half the sample rate %d", top, rate)
	}
	if m.MaxPitchHz >= float64(rate)/2 {
		return nil, badf("pitch %g Hz is above half the sample rate %d", m.MaxPitchHz, rate)
	}
	s := &Synth{rate: float64(rate), m: m, a: a}
	s.a.Harmonics = append([]float64(nil), a.Harmonics...)
	s.a.Groups = append([]int(nil), a.Groups...)
	s.freq = m.MinPitchHz
	s.smooth, s.slew = 1, 1
	if rn := m.Ramp.Seconds() * s.rate; rn >= 1 {
		s.smooth = 1 - math.Exp(-5/rn) // 99 % of a step within Ramp
		s.slew = 1 / rn
	}
	sum := 0.0
	for _, h := range a.Harmonics {
		sum += h
	}
	s.alarmScale = dbToGain(a.LevelDBFS) / sum
	samples := func(d interface{ Seconds() float64 }) int { return int(math.Round(d.Seconds() * s.rate)) }
	onsets, period := a.Onsets()
	s.riseN = samples(a.Rise)
	s.holdN = samples(a.Pulse)
	s.period = samples(period)
	for _, o := range onsets {
		s.starts = append(s.starts, samples(o-a.Rise/2))
	}
	if s.riseN < 1 || s.period <= 0 {
		return nil, fmt.Errorf("%w: alarm timing too short for %d samples/s", ErrBadConfig, rate)
	}
	return s, nil
}

// Rate returns the sample rate in samples per second.
func (s *Synth) Rate() int { return int(s.rate) }

// Set hands the synth a new cue; it takes effect at the first sample of
// the next Fill.
func (s *Synth) Set(c Cue) {
	s.mu.Lock()
	s.cue = c
	s.mu.Unlock()
}

// Cue returns the cue last given to Set.
func (s *Synth) Cue() Cue {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.cue
}

// Fill renders len(buf)/2 stereo frames into buf (left, right, left, ...),
// continuing the waveform of the previous call. Fill does not retain buf.
func (s *Synth) Fill(buf []float32) {
	s.mu.Lock()
	c := s.cue
	s.mu.Unlock()
	s.apply(c)
	for i := 0; i+1 < len(buf); i += 2 {
		l, r := s.guideSample()
		if s.alarmActive {
			v := s.alarmSample()
			l += v
			r += v
		}
		buf[i] = clip(l)
		buf[i+1] = clip(r)
	}
}

func clip(v float64) float32 {
	return float32(math.Max(-1, math.Min(1, v)))
}

func (s *Synth) apply(c Cue) {
	p := s.m.params(c)
	if c.Alarm || !c.Guide {
		p.gainL, p.gainR = 0, 0
	}
	if p.pulseHz == 0 {
		s.pulsePhase = 0 // the next pulse train starts with a pulse
	}
	s.target = p
	if c.Alarm && !s.alarmActive {
		// The pulse envelope starts at 0, so the gate can open at once.
		s.alarmActive, s.alarmT, s.alarmPhase, s.alarmGate = true, 0, 0, 1
	}
	s.alarmOn = c.Alarm
}

func (s *Synth) guideSample() (l, r float64) {
	t := &s.target
	s.gainL = glide(s.gainL, t.gainL, s.smooth)
	s.gainR = glide(s.gainR, t.gainR, s.smooth)
	s.freq = glide(s.freq, t.freqHz, s.smooth)
	on := 1.0
	if t.pulseHz > 0 {
		if s.pulsePhase >= s.m.PulseDuty {
			on = 0
		}
		s.pulsePhase += t.pulseHz / s.rate
		s.pulsePhase -= math.Floor(s.pulsePhase)
	}
	s.gate = slewTo(s.gate, on, s.slew)
	v := math.Sin(2*math.Pi*s.phase) * s.gate
	s.phase += s.freq / s.rate
	s.phase -= math.Floor(s.phase)
	return v * s.gainL, v * s.gainR
}

// glide moves v a share k of the way to target, and lands on it once
// within 1e-7 (−140 dB of full scale), so a silenced cue ends in true
// digital silence within about 15 ms instead of decaying for ever.
func glide(v, target, k float64) float64 {
	v += (target - v) * k
	if math.Abs(target-v) < 1e-7 {
		return target
	}
	return v
}

func slewTo(v, target, step float64) float64 {
	switch {
	case v < target:
		return math.Min(target, v+step)
	case v > target:
		return math.Max(target, v-step)
	}
	return v
}

func (s *Synth) alarmSample() float64 {
	want := 0.0
	if s.alarmOn {
		want = 1
	}
	s.alarmGate = slewTo(s.alarmGate, want, 1/float64(s.riseN))
	if s.alarmGate == 0 && !s.alarmOn {
		s.alarmActive = false
		return 0
	}
	env := s.envelope(s.alarmT)
	v := 0.0
	if env > 0 {
		for k, h := range s.a.Harmonics {
			v += h * math.Sin(2*math.Pi*float64(k+1)*s.alarmPhase)
		}
	}
	s.alarmPhase += s.a.FundamentalHz / s.rate
	s.alarmPhase -= math.Floor(s.alarmPhase)
	s.alarmT++
	if s.alarmT >= s.period {
		s.alarmT = 0
	}
	return v * env * s.alarmGate * s.alarmScale
}

// envelope is the alarm's pulse envelope at sample t of a burst: a
// trapezoid per pulse, linear rise over riseN, fall starting holdN after
// the rise began.
func (s *Synth) envelope(t int) float64 {
	for _, st := range s.starts {
		d := t - st
		switch {
		case d < 0:
			return 0
		case d < s.riseN:
			return float64(d) / float64(s.riseN)
		case d < s.holdN:
			return 1
		case d < s.holdN+s.riseN:
			return 1 - float64(d-s.holdN)/float64(s.riseN)
		}
	}
	return 0
}
