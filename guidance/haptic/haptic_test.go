package haptic_test

import (
	"bytes"
	"errors"
	"flag"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"sync"
	"testing"
	"time"

	"periph.io/x/conn/v3/gpio"
	"periph.io/x/conn/v3/physic"

	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/guidance/haptic"
	"github.com/hewline/hewline/guidance/haptic/haptictest"
)

var update = flag.Bool("update", false, "rewrite golden files under testdata")

type fakeClock struct {
	mu sync.Mutex
	t  time.Time
}

func newClock() *fakeClock { return &fakeClock{t: time.Unix(1_764_650_000, 0)} }

func (c *fakeClock) Now() time.Time { c.mu.Lock(); defer c.mu.Unlock(); return c.t }

func (c *fakeClock) Add(d time.Duration) { c.mu.Lock(); c.t = c.t.Add(d); c.mu.Unlock() }

func guide(o float64) haptic.Cue { return haptic.Cue{Offset: o, Guide: true} }

// TestMapping: quiet in the dead band, the motor on the side to steer
// towards, pulse rate within 1–8 per second (the usual coding range,
// NUREG-0700, see /work/shared/REFERENCES.md) growing with |offset|.
func TestMapping(t *testing.T) {
	tests := map[string]struct {
		cue        haptic.Cue
		side       string // "", "left", "right", "both"
		minR, maxR float64
		minL, maxL haptic.Level
	}{
		"centred":               {guide(0), "", 0, 0, 0, 0},
		"inside dead band":      {guide(0.07), "", 0, 0, 0, 0},
		"inside hysteresis":     {guide(-0.11), "", 0, 0, 0, 0},
		"just right":            {guide(0.13), "right", 1, 1.5, haptic.DefaultMinLevel, 120},
		"half left":             {guide(-0.5), "left", 4, 5, 150, 170},
		"full right":            {guide(1), "right", 8, 8, haptic.DefaultMaxLevel, haptic.DefaultMaxLevel},
		"beyond full clamps":    {guide(-3), "left", 8, 8, haptic.DefaultMaxLevel, haptic.DefaultMaxLevel},
		"not trusted is quiet":  {haptic.Cue{Offset: 0.9}, "", 0, 0, 0, 0},
		"alarm":                 {haptic.Cue{Offset: 0.5, Guide: true, Alarm: true}, "both", 0, 100, haptic.Full, haptic.Full},
		"NaN offset is alarm":   {guide(math.NaN()), "both", 0, 100, haptic.Full, haptic.Full},
		"alarm without guiding": {haptic.Cue{Alarm: true}, "both", 0, 100, haptic.Full, haptic.Full},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			l, r := haptic.NewMapper().Map(tc.cue)
			side := map[[2]bool]string{{true, true}: "", {false, true}: "left", {true, false}: "right", {false, false}: "both"}[[2]bool{l.Silent(), r.Silent()}]
			if side != tc.side {
				t.Fatalf("side %q, want %q (left %+v right %+v)", side, tc.side, l, r)
			}
			p := l
			if l.Silent() {
				p = r
			}
			if side == "" {
				return
			}
			if side != "both" {
				if rate := p.Rate(); rate < tc.minR-1e-9 || rate > tc.maxR+1e-9 {
					t.Errorf("rate %.3f /s, want %.2f–%.2f", rate, tc.minR, tc.maxR)
				}
			}
			if p.Level < tc.minL || p.Level > tc.maxL {
				t.Errorf("level %d, want %d–%d", p.Level, tc.minL, tc.maxL)
			}
		})
	}
}

func TestRateGrowsWithOffset(t *testing.T) {
	m := haptic.NewMapper()
	prevRate, prevLevel := 0.0, haptic.Level(0)
	for o := 0.13; o <= 1.0001; o += 0.01 {
		_, r := m.Map(guide(o))
		if r.Silent() {
			t.Fatalf("offset %.2f silent", o)
		}
		if r.Rate() < prevRate || r.Level < prevLevel {
			t.Fatalf("offset %.2f: rate %.3f level %d fell from %.3f, %d", o, r.Rate(), r.Level, prevRate, prevLevel)
		}
		if r.Rate() < 1-1e-9 || r.Rate() > 8+1e-9 {
			t.Fatalf("offset %.2f: rate %.3f outside 1–8 /s (NUREG-0700 coding range)", o, r.Rate())
		}
		prevRate, prevLevel = r.Rate(), r.Level
	}
}

func TestDeadBandHysteresis(t *testing.T) {
	m := haptic.NewMapper()
	steps := []struct {
		off  float64
		loud bool
	}{
		{0, false}, {0.1, false}, {0.119, false}, // quiet until beyond 0.08+0.04
		{0.13, true}, {0.1, true}, {0.085, true}, // loud until inside 0.08
		{0.07, false}, {0.11, false}, {-0.2, true}, {-0.09, true}, {-0.05, false},
	}
	for i, s := range steps {
		l, r := m.Map(guide(s.off))
		if loud := !(l.Silent() && r.Silent()); loud != s.loud {
			t.Fatalf("step %d offset %v: loud %v, want %v", i, s.off, loud, s.loud)
		}
	}
}

// TestAlarmDistinct: the alarm differs from every guidance pattern in
// three ways an operator can feel: both motors at once, grouped pulses
// (a rhythm, not an even train), and a level above any guidance level.
func TestAlarmDistinct(t *testing.T) {
	m := haptic.NewMapper()
	al, ar := m.Map(haptic.Cue{Alarm: true})
	if al.Silent() || ar.Silent() || al.Burst < 2 {
		t.Fatalf("alarm %+v %+v: want both motors in bursts", al, ar)
	}
	for o := -1.0; o <= 1.0001; o += 0.005 {
		l, r := m.Map(guide(o))
		if !l.Silent() && !r.Silent() {
			t.Fatalf("offset %.3f drives both motors like the alarm", o)
		}
		for _, p := range []haptic.Pattern{l, r} {
			if p.Silent() {
				continue
			}
			if p.Burst > 1 || p.Gap > 0 {
				t.Fatalf("offset %.3f: guidance in bursts %+v", o, p)
			}
			if p.Level >= al.Level {
				t.Fatalf("offset %.3f: guidance level %d not below alarm %d", o, p.Level, al.Level)
			}
		}
	}
	// The alarm pulse and spacing lie in the high-priority burst ranges of
	// IEC 60601-1-8 (pulse 75–200 ms, spacing 50–125 ms; from memory).
	if al.On < 75*time.Millisecond || al.On > 200*time.Millisecond || al.Off < 50*time.Millisecond || al.Off > 125*time.Millisecond {
		t.Errorf("alarm pulse %v spacing %v outside IEC 60601-1-8 burst ranges", al.On, al.Off)
	}
}

func TestPatternAt(t *testing.T) {
	ms := time.Millisecond
	train := haptic.Pattern{Level: 150, On: 100 * ms, Off: 150 * ms}
	tests := map[string]struct {
		p    haptic.Pattern
		at   time.Duration
		want haptic.Level
	}{
		"train start":         {train, 0, 150},
		"train end of on":     {train, 99 * ms, 150},
		"train off":           {train, 100 * ms, 0},
		"train next pulse":    {train, 250 * ms, 150},
		"alarm first pulse":   {haptic.AlarmPattern, 40 * ms, 255},
		"alarm first spacing": {haptic.AlarmPattern, 100 * ms, 0},
		"alarm second pulse":  {haptic.AlarmPattern, 150 * ms, 255},
		"alarm third pulse":   {haptic.AlarmPattern, 359 * ms, 255},
		"alarm gap":           {haptic.AlarmPattern, 500 * ms, 0},
		"alarm next burst":    {haptic.AlarmPattern, 780 * ms, 255},
		"steady":              {haptic.Pattern{Level: 90, On: time.Second}, 5 * time.Second, 90},
		"silent":              {haptic.Pattern{}, 0, 0},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			if got := tc.p.At(tc.at); got != tc.want {
				t.Errorf("At(%v) = %d, want %d", tc.at, got, tc.want)
			}
		})
	}
	if got := haptic.AlarmPattern.Period(); got != 780*ms {
		t.Errorf("alarm period %v, want 780 ms", got)
	}
}

func TestNormalize(t *testing.T) {
	tests := map[string]struct{ off, scale, want float64 }{
		"half":      {160, 320, 0.5},
		"clamp":     {-900, 320, -1},
		"bad scale": {10, 0, math.NaN()},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			got := haptic.Normalize(tc.off, tc.scale)
			if !(got == tc.want || math.IsNaN(got) && math.IsNaN(tc.want)) {
				t.Errorf("Normalize = %v, want %v", got, tc.want)
			}
		})
	}
}

// play runs v in 10 ms ticks up to (not including) d and returns the rising edges per motor.
func play(t *testing.T, c *fakeClock, v *haptic.Vibrator, f *haptictest.Fake, d time.Duration) (left, right int) {
	t.Helper()
	start := len(f.Records())
	for el := haptic.DefaultTick; el < d; el += haptic.DefaultTick {
		c.Add(haptic.DefaultTick)
		if err := v.Tick(); err != nil {
			t.Fatal(err)
		}
	}
	recs := f.Records()
	var pl, pr haptic.Level
	if start > 0 {
		pl, pr = recs[start-1].Left, recs[start-1].Right
	}
	for _, r := range recs[start:] {
		if r.Left > 0 && pl == 0 {
			left++
		}
		if r.Right > 0 && pr == 0 {
			right++
		}
		pl, pr = r.Left, r.Right
	}
	return left, right
}

func TestVibratorPlays(t *testing.T) {
	tests := map[string]struct {
		cue               haptic.Cue
		wantLeft, wantRgt int // pulses in 3 s
	}{
		"full right 8/s":   {guide(1), 0, 24},
		"full left 8/s":    {guide(-1), 24, 0},
		"centred silent":   {guide(0), 0, 0},
		"alarm both sides": {haptic.Cue{Alarm: true}, 12, 12}, // 3 pulses per 780 ms: 11.5 in 3 s, started at once
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			c := newClock()
			f := &haptictest.Fake{Now: c.Now}
			v := haptic.NewVibrator(f, haptic.NewMapper(), c.Now)
			if err := v.Cue(tc.cue); err != nil {
				t.Fatal(err)
			}
			l0, r0 := f.Levels()
			l, r := play(t, c, v, f, 3*time.Second)
			if l0 > 0 {
				l++
			}
			if r0 > 0 {
				r++
			}
			if l != tc.wantLeft || r != tc.wantRgt {
				t.Errorf("pulses left %d right %d, want %d, %d", l, r, tc.wantLeft, tc.wantRgt)
			}
		})
	}
}

func TestVibratorKeepsPhaseOnRateChange(t *testing.T) {
	c := newClock()
	f := &haptictest.Fake{Now: c.Now}
	v := haptic.NewVibrator(f, haptic.NewMapper(), c.Now)
	v.Cue(guide(0.5))
	play(t, c, v, f, 50*time.Millisecond) // inside the first pulse
	v.Cue(guide(0.55))                    // small change: no new pulse
	if _, r := play(t, c, v, f, 50*time.Millisecond); r != 0 {
		t.Errorf("a small rate change started %d new pulses at once", r)
	}
	// Alarm interrupts guidance at once with both motors.
	if err := v.Cue(haptic.Cue{Alarm: true}); err != nil {
		t.Fatal(err)
	}
	if l, r := f.Levels(); l != haptic.Full || r != haptic.Full {
		t.Errorf("alarm levels %d, %d right after the cue, want full", l, r)
	}
}

func TestVibratorHaltImmediately(t *testing.T) {
	c := newClock()
	f := &haptictest.Fake{Now: c.Now}
	v := haptic.NewVibrator(f, haptic.NewMapper(), c.Now)
	if err := v.Cue(haptic.Cue{Alarm: true}); err != nil {
		t.Fatal(err)
	}
	c.Add(20 * time.Millisecond) // mid-pulse
	if err := v.Halt(); err != nil {
		t.Fatal(err)
	}
	recs := f.Records()
	last := recs[len(recs)-1]
	if !last.Halt || last.Left != 0 || last.Right != 0 || !last.At.Equal(c.Now()) {
		t.Fatalf("last record %+v, want a halt at once", last)
	}
	n := len(recs)
	c.Add(time.Second)
	if err := v.Tick(); !errors.Is(err, haptic.ErrHalted) {
		t.Errorf("Tick after Halt = %v", err)
	}
	if err := v.Cue(guide(1)); !errors.Is(err, haptic.ErrHalted) {
		t.Errorf("Cue after Halt = %v", err)
	}
	if len(f.Records()) != n {
		t.Error("halted vibrator still drives the motors")
	}
	if err := v.Close(); err != nil {
		t.Fatal(err)
	}
	if !f.Closed() {
		t.Error("Close did not close the driver")
	}
}

func TestVibratorRefreshAndErrors(t *testing.T) {
	c := newClock()
	f := &haptictest.Fake{Now: c.Now}
	v := haptic.NewVibrator(f, haptic.NewMapper(), c.Now)
	v.Cue(guide(0)) // quiet: 0, 0 once, then refreshed every 200 ms
	play(t, c, v, f, time.Second)
	if n := len(f.Records()); n != 5 {
		t.Errorf("%d records for 1 s of silence, want 5 (at 0, 200, 400, 600, 800 ms)", n)
	}
	f.Err = errors.New("bus gone")
	c.Add(time.Second)
	if err := v.Tick(); err == nil {
		t.Error("driver failure hidden")
	}
}

func TestSerialGolden(t *testing.T) {
	var buf bytes.Buffer
	s := haptic.NewSerialWriter(&buf)
	for _, lv := range [][2]haptic.Level{{0, 0}, {128, 0}, {0, 255}, {7, 42}, {100, 9}} {
		if err := s.Set(lv[0], lv[1]); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.Halt(); err != nil {
		t.Fatal(err)
	}
	if err := s.Set(1, 1); !errors.Is(err, haptic.ErrHalted) {
		t.Errorf("Set after Halt = %v", err)
	}
	// A vibrator's alarm start and halt over the same protocol.
	c := newClock()
	v := haptic.NewVibrator(haptic.NewSerialWriter(&buf), haptic.NewMapper(), c.Now)
	v.Cue(haptic.Cue{Alarm: true})
	for i := 0; i < 16; i++ {
		c.Add(10 * time.Millisecond)
		v.Tick()
	}
	v.Halt()
	golden := filepath.Join("testdata", "serial_protocol.golden")
	if *update {
		if err := os.WriteFile(golden, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(buf.Bytes(), want) {
		t.Errorf("serial bytes\n%q\nwant\n%q", buf.Bytes(), want)
	}
}

type fakePin struct {
	level  gpio.Level
	duty   gpio.Duty
	freq   physic.Frequency
	halted bool
}

func (p *fakePin) Out(l gpio.Level) error { p.level, p.duty = l, 0; return nil }
func (p *fakePin) PWM(d gpio.Duty, f physic.Frequency) error {
	p.duty, p.freq = d, f
	return nil
}
func (p *fakePin) Halt() error { p.halted = true; return nil }

func TestGPIO(t *testing.T) {
	t.Run("on off", func(t *testing.T) {
		l, r := &fakePin{}, &fakePin{}
		g := haptic.NewGPIOPins(l, r, false)
		if err := g.Set(30, 0); err != nil {
			t.Fatal(err)
		}
		if l.level != gpio.High || r.level != gpio.Low {
			t.Errorf("levels %v %v, want High Low", l.level, r.level)
		}
		if err := g.Halt(); err != nil || l.level != gpio.Low || r.level != gpio.Low {
			t.Errorf("after Halt: %v, %v %v", err, l.level, r.level)
		}
		if err := g.Set(255, 255); !errors.Is(err, haptic.ErrHalted) || l.level != gpio.Low {
			t.Errorf("Set after Halt = %v, pin %v", err, l.level)
		}
		if err := g.Close(); err != nil || !l.halted || !r.halted {
			t.Errorf("Close = %v, pins released %v %v", err, l.halted, r.halted)
		}
	})
	t.Run("pwm", func(t *testing.T) {
		l, r := &fakePin{}, &fakePin{}
		g := haptic.NewGPIOPins(l, r, true)
		if err := g.Set(255, 51); err != nil {
			t.Fatal(err)
		}
		if l.duty != gpio.DutyMax || r.duty != gpio.DutyMax/5 || l.freq != haptic.DefaultPWMFrequency {
			t.Errorf("duties %v %v at %v, want 100%% and 20%%", l.duty, r.duty, l.freq)
		}
	})
}

func TestOpenMissingHardware(t *testing.T) {
	_, err := haptic.OpenGPIO("HEWLINE_NO_PIN_L", "HEWLINE_NO_PIN_R", false)
	if err == nil {
		t.Error("opened GPIO pins that do not exist")
	}
	if runtime.GOOS == "linux" && !errors.Is(err, haptic.ErrPinNotFound) {
		t.Errorf("OpenGPIO = %v, want ErrPinNotFound", err)
	}
	if _, err := haptic.OpenSerial("/dev/hewline-no-such-tty", 115200); err == nil {
		t.Error("opened a serial port that does not exist")
	}
}

func BenchmarkVibratorTick(b *testing.B) {
	c := newClock()
	v := haptic.NewVibrator(discard{}, haptic.NewMapper(), c.Now)
	v.Cue(guide(0.6))
	b.ReportAllocs()
	for b.Loop() {
		c.Add(time.Millisecond)
		if err := v.Tick(); err != nil {
			b.Fatal(err)
		}
	}
}

type discard struct{}

func (discard) Set(l, r haptic.Level) error { return nil }
func (discard) Halt() error                 { return nil }
func (discard) Close() error                { return nil }

func TestCueFrom(t *testing.T) {
	tests := map[string]struct {
		e     guidance.Estimate
		side  string
		alarm bool
	}{
		"holding right": {guidance.Estimate{State: guidance.Holding, Tracking: true, OffsetPx: 200}, "right", false},
		"holding left":  {guidance.Estimate{State: guidance.Holding, Tracking: true, OffsetPx: -200}, "left", false},
		"seeking quiet": {guidance.Estimate{State: guidance.Seeking, OffsetPx: 200}, "", false},
		"lost alarms":   {guidance.Estimate{State: guidance.Lost, Alarm: true, OffsetPx: 200}, "both", true},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			c := haptic.CueFrom(guidance.Decide(tc.e), 320)
			if c.Alarm != tc.alarm {
				t.Fatalf("cue %+v", c)
			}
			l, r := haptic.NewMapper().Map(c)
			side := map[[2]bool]string{{true, true}: "", {false, true}: "left", {true, false}: "right", {false, false}: "both"}[[2]bool{l.Silent(), r.Silent()}]
			if side != tc.side {
				t.Errorf("side %q, want %q", side, tc.side)
			}
		})
	}
}
