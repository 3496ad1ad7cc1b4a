package audio

import (
	"errors"
	"math"
	"testing"
	"time"

	"gopkg.in/yaml.v3"
)

// Tolerances from the issue, grounded in REFERENCES.md "Alarms and cues":
// pitch within 1 % (the pitch JND is about 0.6 % above 1 kHz, published
// textbook summaries), balance within 0.5 dB (the interaural level JND is
// 0.5–1 dB, same source), pulse timing within 5 ms.
const (
	pitchTol = 0.01
	levelTol = 0.5 // dB
	timeTol  = 0.005
)

// documented restates the package documentation's formulas for a cue
// outside the dead band, independently of mapping.go: the louder channel's
// level, the quieter one's, and the pitch.
func documented(m Mapping, c Cue) (leftDB, rightDB, pitchHz float64) {
	e := math.Max(-1, math.Min(1, c.Offset+m.HeadingWeight*c.Heading))
	u := (math.Abs(e) - m.DeadBand) / (1 - m.DeadBand)
	near := m.MinLevelDBFS + (m.LevelDBFS-m.MinLevelDBFS)*u
	far := near - m.PanDBPerUnit*math.Abs(e)
	pitchHz = m.MinPitchHz * math.Pow(m.MaxPitchHz/m.MinPitchHz, u)
	if e > 0 {
		return far, near, pitchHz
	}
	return near, far, pitchHz
}

func TestToneMapping(t *testing.T) {
	m := DefaultMapping()
	m.HeadingWeight = 0.5
	cases := map[string]Cue{
		"full left":          {Guide: true, Offset: -1},
		"half left":          {Guide: true, Offset: -0.5},
		"slightly right":     {Guide: true, Offset: 0.2},
		"half right":         {Guide: true, Offset: 0.5},
		"most right":         {Guide: true, Offset: 0.8},
		"beyond full right":  {Guide: true, Offset: 3},
		"heading adds right": {Guide: true, Offset: 0.2, Heading: 0.4},
	}
	for name, c := range cases {
		t.Run(name, func(t *testing.T) {
			s := newTestSynth(t, m, DefaultAlarm())
			s.Set(c)
			render(s, 50*time.Millisecond) // past the 5 ms glide
			l, r := render(s, 500*time.Millisecond)
			wantL, wantR, wantHz := documented(m, c)
			if l, r, hz, _ := m.Expected(c); math.Abs(l-wantL)+math.Abs(r-wantR)+math.Abs(hz-wantHz) > 1e-9 {
				t.Errorf("Expected() = %g, %g dBFS, %g Hz; documented formulas give %g, %g, %g", l, r, hz, wantL, wantR, wantHz)
			}
			for ch, x := range map[string][]float64{"left": l, "right": r} {
				if got := peakHz(x, testRate); math.Abs(got/wantHz-1) > pitchTol {
					t.Errorf("%s pitch %.2f Hz, mapping says %.2f Hz", ch, got, wantHz)
				}
			}
			gotL, gotR := peakDBOfSine(l), peakDBOfSine(r)
			if d := (gotL - gotR) - (wantL - wantR); math.Abs(d) > levelTol {
				t.Errorf("L−R %.2f dB, mapping says %.2f dB", gotL-gotR, wantL-wantR)
			}
			if math.Abs(gotL-wantL) > levelTol || math.Abs(gotR-wantR) > levelTol {
				t.Errorf("levels L %.2f R %.2f dBFS, mapping says %.2f %.2f", gotL, gotR, wantL, wantR)
			}
			// The louder side is the side the cart must go.
			if e := c.Offset + m.HeadingWeight*c.Heading; (e > 0) != (gotR > gotL) {
				t.Errorf("error %g but left %.1f dB, right %.1f dB", e, gotL, gotR)
			}
		})
	}
}

func TestMappingFormulas(t *testing.T) {
	// Worked values of the documented formulas for the default mapping:
	// u = (|e| − 0.05)/0.95; level = −30 + 18u dBFS; pan 18|e| dB;
	// pitch 440·2^u Hz.
	m := DefaultMapping()
	cases := map[string]struct {
		e                float64
		near, far, pitch float64
	}{
		"edge of dead band": {0.05, -30, -30 - 0.9, 440},
		"half":              {0.525, -21, -21 - 9.45, 440 * math.Sqrt2},
		"full":              {1, -12, -30, 880},
	}
	for name, tc := range cases {
		t.Run(name, func(t *testing.T) {
			l, r, hz, _ := m.Expected(Cue{Guide: true, Offset: tc.e + 1e-12})
			if math.Abs(r-tc.near) > 1e-6 || math.Abs(l-tc.far) > 1e-6 || math.Abs(hz-tc.pitch) > 1e-6 {
				t.Errorf("got L %.4f R %.4f dBFS %.4f Hz, want %.4f %.4f %.4f", l, r, hz, tc.far, tc.near, tc.pitch)
			}
		})
	}
}

func TestDeadBand(t *testing.T) {
	t.Run("silent by default", func(t *testing.T) {
		s := newTestSynth(t, DefaultMapping(), DefaultAlarm())
		s.Set(Cue{Guide: true, Offset: 0.5})
		render(s, 100*time.Millisecond)
		s.Set(Cue{Guide: true, Offset: -0.04})
		render(s, 50*time.Millisecond)
		l, r := render(s, 200*time.Millisecond)
		if maxAbs(l) != 0 || maxAbs(r) != 0 {
			t.Errorf("inside the dead band peaks are %g, %g; want digital silence", maxAbs(l), maxAbs(r))
		}
	})
	t.Run("soft centre", func(t *testing.T) {
		m := DefaultMapping()
		m.CentreGain = 0.5 // −6.02 dB below MinLevelDBFS
		s := newTestSynth(t, m, DefaultAlarm())
		s.Set(Cue{Guide: true, Offset: 0.01})
		render(s, 50*time.Millisecond)
		l, r := render(s, 500*time.Millisecond)
		want := m.MinLevelDBFS + 20*math.Log10(0.5)
		for ch, x := range map[string][]float64{"left": l, "right": r} {
			if got := peakDBOfSine(x); math.Abs(got-want) > levelTol {
				t.Errorf("%s %.2f dBFS, want %.2f", ch, got, want)
			}
			if got := peakHz(x, testRate); math.Abs(got/m.MinPitchHz-1) > pitchTol {
				t.Errorf("%s pitch %.2f Hz, want %.2f", ch, got, m.MinPitchHz)
			}
		}
	})
}

func TestMuting(t *testing.T) {
	cases := map[string]Cue{
		"guide off":        {Guide: false, Offset: 0.8},
		"offset not a num": {Guide: true, Offset: math.NaN()},
		"offset infinite":  {Guide: true, Offset: math.Inf(1)},
	}
	for name, c := range cases {
		t.Run(name, func(t *testing.T) {
			s := newTestSynth(t, DefaultMapping(), DefaultAlarm())
			s.Set(c)
			l, r := render(s, 100*time.Millisecond)
			if maxAbs(l) != 0 || maxAbs(r) != 0 {
				t.Errorf("peaks %g, %g; want silence", maxAbs(l), maxAbs(r))
			}
		})
	}
}

func TestUnusedHeadingIsIgnored(t *testing.T) {
	m := DefaultMapping() // HeadingWeight 0
	l, r, _, _ := m.Expected(Cue{Guide: true, Offset: 0.5, Heading: math.NaN()})
	wl, wr, _ := documented(m, Cue{Guide: true, Offset: 0.5})
	if l != wl || r != wr {
		t.Errorf("NaN heading with weight 0: %g, %g dBFS, want %g, %g", l, r, wl, wr)
	}
	m.HeadingWeight = 0.5
	if l, r, _, _ := m.Expected(Cue{Guide: true, Offset: 0.5, Heading: math.NaN()}); !math.IsInf(l, -1) || !math.IsInf(r, -1) {
		t.Errorf("NaN heading in use: %g, %g dBFS, want the cue muted", l, r)
	}
}

func TestPulseMode(t *testing.T) {
	m := DefaultMapping()
	m.Mode = ModePulse
	cases := map[string]float64{"edge: 1 per s": 0.05 + 1e-9, "middle": 0.5, "full: 8 per s": 1}
	for name, e := range cases {
		t.Run(name, func(t *testing.T) {
			c := Cue{Guide: true, Offset: -e}
			_, _, hz, rate := m.Expected(c)
			wantRate := m.MinPulseHz + (m.MaxPulseHz-m.MinPulseHz)*(e-m.DeadBand)/(1-m.DeadBand)
			if math.Abs(rate-wantRate) > 1e-6 {
				t.Fatalf("mapping gives %g pulses/s, formula %g", rate, wantRate)
			}
			s := newTestSynth(t, m, DefaultAlarm())
			s.Set(c)
			l, _ := render(s, 3*time.Second+500*time.Millisecond)
			env := envelope(l, testRate, hz)
			rises, falls := edges(env, testRate, 0.5*maxAbs(env))
			if len(rises) < 3 || len(falls) < 3 {
				t.Fatalf("found %d rises, %d falls", len(rises), len(falls))
			}
			on, off := m.PulseDuty/rate, (1-m.PulseDuty)/rate
			// The train starts with a pulse at once: first rise at half the ramp.
			if d := rises[0] - m.Ramp.Seconds()/2; math.Abs(d) > timeTol {
				t.Errorf("first pulse rises at %v, want %v", ms(rises[0]), m.Ramp/2)
			}
			for i := 0; i+1 < len(rises) && i < len(falls); i++ {
				gotOn, gotOff := falls[i]-rises[i], rises[i+1]-falls[i]
				if math.Abs(gotOn-on) > timeTol || math.Abs(gotOff-off) > timeTol {
					t.Errorf("pulse %d on %v off %v, want %v and %v", i, ms(gotOn), ms(gotOff), ms(on), ms(off))
				}
			}
			if got := peakHz(l[:testRate], testRate); math.Abs(got/m.MinPitchHz-1) > pitchTol {
				t.Errorf("pitch %.2f Hz, want %.2f", got, m.MinPitchHz)
			}
		})
	}
}

func TestAlarmSpectrum(t *testing.T) {
	a := DefaultAlarm()
	s := newTestSynth(t, DefaultMapping(), a)
	s.Set(Cue{Alarm: true, Guide: true, Offset: 0.9}) // the guidance cue must be muted
	_, period := a.Onsets()
	l, r := render(s, period)
	// ISO 7731: danger-signal components in 500–2500 Hz (REFERENCES.md).
	if got := bandEnergy(l, testRate, 500, 2500); got < 0.95 {
		t.Errorf("%.1f %% of the alarm's energy lies in 500–2500 Hz, want ≥ 95 %%", 100*got)
	}
	// IEC 60601-1-8 (from memory): at least 4 harmonic components. Each
	// must hold at least 1 % of the energy within ±20 Hz of k·f0.
	p, bin := spectrum(l, testRate)
	total := 0.0
	for _, v := range p {
		total += v
	}
	present := 0
	for k := 1; float64(k)*a.FundamentalHz < testRate/2; k++ {
		f, e := float64(k)*a.FundamentalHz, 0.0
		for i := int((f - 20) / bin); float64(i)*bin <= f+20; i++ {
			e += p[i]
		}
		if e/total >= 0.01 {
			present++
		}
	}
	if present < 4 {
		t.Errorf("%d harmonic components present, want ≥ 4", present)
	}
	if got := peakHz(l, testRate); math.Abs(got/a.FundamentalHz-1) > pitchTol {
		t.Errorf("strongest component %.1f Hz, want the fundamental %.1f Hz", got, a.FundamentalHz)
	}
	// Both channels carry the alarm alike; loud: peak near −1 dBFS.
	for i := range l {
		if l[i] != r[i] {
			t.Fatalf("channels differ at sample %d", i)
		}
	}
	if got := 20 * math.Log10(maxAbs(l)); got > a.LevelDBFS+0.01 || got < a.LevelDBFS-3 {
		t.Errorf("alarm peak %.2f dBFS, want within 3 dB below %.1f", got, a.LevelDBFS)
	}
}

func TestAlarmBurstTiming(t *testing.T) {
	a := DefaultAlarm()
	s := newTestSynth(t, DefaultMapping(), a)
	onsets, period := a.Onsets()
	if len(onsets) != 10 {
		t.Fatalf("%d pulses per burst, want 10 (IEC 60601-1-8 high priority, from memory)", len(onsets))
	}
	// Pulses 75–200 ms, spacing 50–125 ms, rise 10–20 % of the pulse
	// (IEC 60601-1-8, from memory).
	if a.Pulse < 75*time.Millisecond || a.Pulse > 200*time.Millisecond ||
		a.Spacing < 50*time.Millisecond || a.Spacing > 125*time.Millisecond ||
		a.Rise*10 < a.Pulse || a.Rise*5 > a.Pulse {
		t.Errorf("default pattern %v pulse, %v spacing, %v rise is outside the cited ranges", a.Pulse, a.Spacing, a.Rise)
	}
	lead := 300 * time.Millisecond // silence before the alarm is raised
	s.Set(Cue{})
	render(s, lead)
	s.Set(Cue{Alarm: true})
	l, _ := render(s, 2*period)
	env := envelope(l, testRate, a.FundamentalHz)
	rises, falls := edges(env, testRate, 0.5*maxAbs(env))
	if len(rises) != 20 || len(falls) != 20 {
		t.Fatalf("found %d rises and %d falls in two bursts, want 20 each", len(rises), len(falls))
	}
	for i := range rises {
		want := onsets[i%10] + time.Duration(i/10)*period
		if d := rises[i] - want.Seconds(); math.Abs(d) > timeTol {
			t.Errorf("pulse %d rises at %v, want %v", i, ms(rises[i]), want)
		}
		if d := falls[i] - rises[i] - a.Pulse.Seconds(); math.Abs(d) > timeTol {
			t.Errorf("pulse %d lasts %v, want %v", i, ms(falls[i]-rises[i]), a.Pulse)
		}
	}
	// Inside a group the gap is Spacing.
	if d := rises[1] - falls[0] - a.Spacing.Seconds(); math.Abs(d) > timeTol {
		t.Errorf("spacing %v, want %v", ms(rises[1]-falls[0]), a.Spacing)
	}
}

func TestAlarmStopsAndRestarts(t *testing.T) {
	a := DefaultAlarm()
	s := newTestSynth(t, DefaultMapping(), a)
	s.Set(Cue{Alarm: true})
	render(s, 100*time.Millisecond)
	s.Set(Cue{})
	render(s, a.Rise) // fades out over one rise time
	l, _ := render(s, 200*time.Millisecond)
	if maxAbs(l) != 0 {
		t.Errorf("alarm still sounds (peak %g) after it was cleared", maxAbs(l))
	}
	s.Set(Cue{Alarm: true})
	l, _ = render(s, 200*time.Millisecond)
	env := envelope(l, testRate, a.FundamentalHz)
	rises, _ := edges(env, testRate, 0.5*maxAbs(env))
	if len(rises) == 0 || math.Abs(rises[0]-(a.Rise/2).Seconds()) > timeTol {
		t.Errorf("restarted alarm rises at %v, want %v", rises, a.Rise/2)
	}
}

func TestClickFree(t *testing.T) {
	// The largest step between samples a steady 880 Hz sine at −12 dBFS
	// makes is 2π·880/48000·0.25 = 0.029; a cue jumping from silence to
	// full must not step much more than that.
	s := newTestSynth(t, DefaultMapping(), DefaultAlarm())
	var prev float32
	buf := make([]float32, 2*480)
	worst := 0.0
	for i, c := range []Cue{{}, {Guide: true, Offset: 1}, {Guide: true, Offset: -1}, {}, {Guide: true, Offset: 0.3}, {Guide: false}} {
		s.Set(c)
		for j := 0; j < 10; j++ {
			s.Fill(buf)
			for k := 0; k < len(buf); k += 2 {
				if i+j+k > 0 {
					worst = math.Max(worst, math.Abs(float64(buf[k]-prev)))
				}
				prev = buf[k]
			}
		}
	}
	if worst > 0.04 {
		t.Errorf("largest sample step %.3f, want ≤ 0.04 (no clicks)", worst)
	}
}

func TestChunkingDoesNotChangeTheSound(t *testing.T) {
	m := DefaultMapping()
	m.Mode = ModePulse
	one := newTestSynth(t, m, DefaultAlarm())
	many := newTestSynth(t, m, DefaultAlarm())
	c := Cue{Guide: true, Offset: 0.7}
	one.Set(c)
	many.Set(c)
	want := make([]float32, 2*9600)
	one.Fill(want)
	got := make([]float32, 0, len(want))
	for _, n := range []int{1, 7, 480, 960, 13, 4800, 3339} {
		b := make([]float32, 2*n)
		many.Fill(b)
		got = append(got, b...)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("sample %d differs: %g in chunks, %g in one go", i, got[i], want[i])
		}
	}
}

func TestValidate(t *testing.T) {
	mod := func(f func(*Mapping)) Mapping { m := DefaultMapping(); f(&m); return m }
	maps := map[string]Mapping{
		"mode":       mod(func(m *Mapping) { m.Mode = "buzz" }),
		"dead band":  mod(func(m *Mapping) { m.DeadBand = 1 }),
		"level > 0":  mod(func(m *Mapping) { m.LevelDBFS = 3 }),
		"min > max":  mod(func(m *Mapping) { m.MinLevelDBFS = -6 }),
		"pitch":      mod(func(m *Mapping) { m.MaxPitchHz = 100 }),
		"pulse rate": mod(func(m *Mapping) { m.MinPulseHz = 0 }),
		"duty":       mod(func(m *Mapping) { m.PulseDuty = 1 }),
		"nan":        mod(func(m *Mapping) { m.PanDBPerUnit = math.NaN() }),
		"ramp":       mod(func(m *Mapping) { m.Ramp = time.Second }),
	}
	for name, m := range maps {
		if err := m.Validate(); !errors.Is(err, ErrBadConfig) {
			t.Errorf("%s: Validate() = %v, want ErrBadConfig", name, err)
		}
	}
	amod := func(f func(*AlarmPattern)) AlarmPattern { a := DefaultAlarm(); f(&a); return a }
	alarms := map[string]AlarmPattern{
		"component above band": amod(func(a *AlarmPattern) { a.Harmonics = append(a.Harmonics, 0.2) }),
		"fundamental below":    amod(func(a *AlarmPattern) { a.FundamentalHz = 400 }),
		"too quiet":            amod(func(a *AlarmPattern) { a.LevelDBFS = -60 }),
		"rise ≥ pulse":         amod(func(a *AlarmPattern) { a.Rise = a.Pulse }),
		"no groups":            amod(func(a *AlarmPattern) { a.Groups = nil }),
		"spacing < rise":       amod(func(a *AlarmPattern) { a.Spacing = a.Rise / 2 }),
	}
	for name, a := range alarms {
		if err := a.Validate(); !errors.Is(err, ErrBadConfig) {
			t.Errorf("%s: Validate() = %v, want ErrBadConfig", name, err)
		}
	}
	if err := DefaultMapping().Validate(); err != nil {
		t.Errorf("default mapping: %v", err)
	}
	if err := DefaultAlarm().Validate(); err != nil {
		t.Errorf("default alarm: %v", err)
	}
	if _, err := NewSynth(1000, DefaultMapping(), DefaultAlarm()); !errors.Is(err, ErrBadConfig) {
		t.Errorf("rate 1000 accepted: %v", err)
	}
}

func TestMappingFromYAML(t *testing.T) {
	m := DefaultMapping()
	doc := "mode: pulse\ndead_band: 0.1\nramp: 8ms\nmax_pulse_hz: 6\n"
	if err := yaml.Unmarshal([]byte(doc), &m); err != nil {
		t.Fatal(err)
	}
	if m.Mode != ModePulse || m.DeadBand != 0.1 || m.Ramp != 8*time.Millisecond || m.MaxPulseHz != 6 || m.MinPitchHz != 440 {
		t.Errorf("decoded %+v", m)
	}
	if err := m.Validate(); err != nil {
		t.Error(err)
	}
	a := DefaultAlarm()
	if err := yaml.Unmarshal([]byte("level_dbfs: -6\nburst_gap: 2s\n"), &a); err != nil {
		t.Fatal(err)
	}
	if a.LevelDBFS != -6 || a.BurstGap != 2*time.Second || a.Validate() != nil {
		t.Errorf("decoded %+v", a)
	}
}
