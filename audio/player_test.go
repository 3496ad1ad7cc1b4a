package audio

import (
	"bytes"
	"context"
	"errors"
	"math"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/hewline/hewline/audio/audiotest"
	"github.com/rs/zerolog"
)

func newTestPlayer(t *testing.T, cfg PlayerConfig, chans ...Channel) (*Player, *bytes.Buffer) {
	t.Helper()
	var logs bytes.Buffer
	l := zerolog.New(&logs)
	cfg.Log = &l
	p, err := NewPlayer(newTestSynth(t, DefaultMapping(), DefaultAlarm()), cfg, chans...)
	if err != nil {
		t.Fatal(err)
	}
	return p, &logs
}

// replay drives p like the pipeline does in replay: one Update per frame
// at 30 frames per second; the alarm is raised from alarmAt on.
func replay(t *testing.T, p *Player, frames int, alarmAt time.Duration) error {
	t.Helper()
	for i := 0; i < frames; i++ {
		ft := time.Duration(i) * time.Second / 30
		c := Cue{Guide: true, Offset: 0.4, Alarm: ft >= alarmAt}
		if err := p.Update(ft, c); err != nil {
			return err
		}
	}
	return nil
}

func TestAdvanceFollowsFrameTimestamps(t *testing.T) {
	path := filepath.Join(t.TempDir(), "replay.wav")
	w, err := NewWAVSink(path, testRate)
	if err != nil {
		t.Fatal(err)
	}
	p, _ := newTestPlayer(t, PlayerConfig{}, Channel{Name: path, Sink: w})
	alarmAt := 1 * time.Second
	if err := replay(t, p, 61, alarmAt); err != nil { // frames 0 .. 2 s
		t.Fatal(err)
	}
	if err := p.Close(); err != nil {
		t.Fatal(err)
	}
	wav, err := audiotest.ReadWAV(path)
	if err != nil {
		t.Fatal(err)
	}
	if n := len(wav.Data[0]); n != 2*testRate {
		t.Errorf("%d frames written for 2 s of replay, want %d", n, 2*testRate)
	}
	// Before the alarm only the guidance tone (≤ −12 dBFS, 440–880 Hz);
	// from the alarm frame on, the alarm's fundamental. The first pulse
	// reaches half amplitude Rise/2 after the frame that raised it.
	a := DefaultAlarm()
	env := envelope(wav.Data[0], testRate, a.FundamentalHz)
	rises, _ := edges(env, testRate, 0.5*maxAbs(env))
	want := alarmAt + a.Rise/2
	if len(rises) == 0 || math.Abs(rises[0]-want.Seconds()) > 0.001 {
		t.Fatalf("alarm rises at %v s, want %v", rises, want)
	}
	// Sample-exact: the file equals a synth given each frame's cue after
	// exactly round(t·rate) frames, up to 16-bit rounding.
	ref := newTestSynth(t, DefaultMapping(), DefaultAlarm())
	var refL []float64
	done := 0
	for i := 0; i <= 60; i++ {
		ft := time.Duration(i) * time.Second / 30
		n := int(math.Round(ft.Seconds()*testRate)) - done
		buf := make([]float32, 2*n)
		ref.Fill(buf)
		l, _ := audiotest.Deinterleave(buf)
		refL = append(refL, l...)
		done += len(l)
		ref.Set(Cue{Guide: true, Offset: 0.4, Alarm: ft >= alarmAt})
	}
	for i, v := range refL {
		if math.Abs(wav.Data[0][i]-v) > 2.0/32768 { // rounding and the 32767/32768 scales
			t.Fatalf("sample %d is %g in the file, %g when rendered at frame times", i, wav.Data[0][i], v)
		}
	}
}

func TestUpdateNeverRewinds(t *testing.T) {
	rec := &audiotest.Recorder{}
	p, _ := newTestPlayer(t, PlayerConfig{}, Channel{Name: "rec", Sink: rec})
	for _, ft := range []time.Duration{0, 100 * time.Millisecond, 50 * time.Millisecond, 100 * time.Millisecond, 101 * time.Millisecond} {
		if err := p.Update(ft, Cue{}); err != nil {
			t.Fatal(err)
		}
	}
	if got, want := len(rec.Samples()), 2*testRate*101/1000; got != want {
		t.Errorf("%d samples, want %d", got, want)
	}
	if p.BufferFrames() != testRate/50 {
		t.Errorf("buffer %d frames, want 20 ms = %d", p.BufferFrames(), testRate/50)
	}
}

func TestChannelFailure(t *testing.T) {
	fail := 2 * testRate / 2 // the fake speaker dies after 0.5 s
	cases := map[string]struct {
		require      bool
		otherIsAlarm bool
		wantErr      bool
		wantMsg      string
	}{
		"speaker lost, vibration band left": {require: true, otherIsAlarm: true, wantMsg: "continuing on the remaining channels"},
		"last alarm channel lost, required": {require: true, wantErr: true, wantMsg: "NO ALARM CHANNEL LEFT"},
		"last alarm channel lost, optional": {require: false, wantMsg: "NO ALARM CHANNEL LEFT"},
	}
	for name, tc := range cases {
		t.Run(name, func(t *testing.T) {
			speaker := &audiotest.FailingSink{AfterSamples: fail}
			other := &audiotest.Recorder{}
			p, logs := newTestPlayer(t, PlayerConfig{RequireAlarm: true},
				Channel{Name: "speaker", Sink: speaker, Alarm: true},
				Channel{Name: "other", Sink: other, Alarm: tc.otherIsAlarm})
			p.require = tc.require
			err := replay(t, p, 61, 200*time.Millisecond)
			if tc.wantErr {
				var nac *NoAlarmChannelError
				if !errors.Is(err, ErrNoAlarmChannel) || !errors.As(err, &nac) || nac.ExitCode() != 3 ||
					!errors.Is(err, audiotest.ErrInjected) || nac.Channel != "speaker" {
					t.Fatalf("err = %v, want a NoAlarmChannelError for the speaker with exit code 3", err)
				}
			} else if err != nil {
				t.Fatalf("err = %v, want the player to carry on", err)
			}
			if !speaker.Failed() || !speaker.Halted() || !speaker.Closed() {
				t.Errorf("failed speaker: failed %v halted %v closed %v; want all", speaker.Failed(), speaker.Halted(), speaker.Closed())
			}
			log := logs.String()
			if !strings.Contains(log, `"level":"error"`) || !strings.Contains(log, tc.wantMsg) || !strings.Contains(log, `"channel":"speaker"`) {
				t.Errorf("log %q lacks an error naming the speaker and %q", log, tc.wantMsg)
			}
			// The alarm goes on sounding on the other channel after the
			// speaker died at 0.5 s (the 2nd burst group starts at 0.96 s).
			l, _ := audiotest.Deinterleave(other.Samples())
			if tc.wantErr {
				if len(l) > testRate*6/10 {
					t.Errorf("player went on rendering %d frames after the fatal loss", len(l))
				}
				return
			}
			if len(l) != 2*testRate {
				t.Fatalf("other channel got %d frames, want %d", len(l), 2*testRate)
			}
			late := l[testRate : 2*testRate]
			if got := bandEnergy(late, testRate, 500, 2500); maxAbs(late) < 0.5 || got < 0.95 {
				t.Errorf("after the speaker failed: peak %.2f, %.0f %% in the alarm band; want the alarm", maxAbs(late), 100*got)
			}
		})
	}
}

func TestAlarmWithoutChannelIsLogged(t *testing.T) {
	p, logs := newTestPlayer(t, PlayerConfig{}, Channel{Name: "audit", Sink: &NullSink{}})
	p.Set(Cue{Alarm: true})
	if !strings.Contains(logs.String(), "NO ALARM CHANNEL WORKS") {
		t.Errorf("log %q: want an error that the alarm cannot be heard", logs.String())
	}
}

func TestNewPlayerWantsAnAlarmChannel(t *testing.T) {
	s := newTestSynth(t, DefaultMapping(), DefaultAlarm())
	_, err := NewPlayer(s, PlayerConfig{RequireAlarm: true}, Channel{Name: "audit", Sink: &NullSink{}})
	var nac *NoAlarmChannelError
	if !errors.As(err, &nac) || !errors.Is(err, ErrNoAlarmChannel) {
		t.Errorf("err = %v, want ErrNoAlarmChannel", err)
	}
	if _, err := NewPlayer(s, PlayerConfig{Buffer: 50 * time.Millisecond}); !errors.Is(err, ErrBadConfig) {
		t.Errorf("50 ms buffer: err = %v, want ErrBadConfig", err)
	}
}

func TestHalt(t *testing.T) {
	rec := &audiotest.Recorder{}
	p, _ := newTestPlayer(t, PlayerConfig{}, Channel{Name: "rec", Sink: rec, Alarm: true})
	p.Set(Cue{Alarm: true})
	if err := p.Advance(100 * time.Millisecond); err != nil {
		t.Fatal(err)
	}
	n := len(rec.Samples())
	if err := p.Halt(); err != nil {
		t.Fatal(err)
	}
	if err := p.Advance(time.Second); err != nil {
		t.Fatal(err)
	}
	if !rec.Halted() || len(rec.Samples()) != n {
		t.Errorf("after Halt: halted %v, %d more samples", rec.Halted(), len(rec.Samples())-n)
	}
	if err := p.Run(context.Background()); err != nil {
		t.Errorf("Run after Halt: %v", err)
	}
}

// fakeClock advances only when slept on, and ends the run at stop.
type fakeClock struct {
	now    time.Time
	stop   time.Time
	cancel func()
	slept  time.Duration
}

func (c *fakeClock) Now() time.Time { return c.now }
func (c *fakeClock) Sleep(d time.Duration) {
	c.now = c.now.Add(d)
	c.slept += d
	if !c.now.Before(c.stop) {
		c.cancel()
	}
}

func TestRunPacedByClock(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	start := time.Date(2026, 1, 1, 6, 0, 0, 0, time.UTC)
	clk := &fakeClock{now: start, stop: start.Add(time.Second), cancel: cancel}
	rec := &audiotest.Recorder{}
	p, _ := newTestPlayer(t, PlayerConfig{Clock: clk}, Channel{Name: "rec", Sink: rec})
	if err := p.Run(ctx); err != nil {
		t.Fatal(err)
	}
	// One second of clock time, rendered leadBuffers of 20 ms ahead plus
	// the 200 ppm slack (0.2 ms).
	got := len(rec.Samples()) / 2
	if want := testRate + leadBuffers*testRate/50; got < want || got > want+testRate/50 {
		t.Errorf("%d frames in 1 s of clock time, want %d", got, want)
	}
}

func TestRunStopsOnLostAlarmChannel(t *testing.T) {
	clk := &fakeClock{now: time.Unix(0, 0), stop: time.Unix(60, 0), cancel: func() {}}
	p, _ := newTestPlayer(t, PlayerConfig{Clock: clk, RequireAlarm: true},
		Channel{Name: "speaker", Sink: &audiotest.FailingSink{AfterSamples: testRate}, Alarm: true},
		Channel{Name: "audit", Sink: &NullSink{}})
	if err := p.Run(context.Background()); !errors.Is(err, ErrNoAlarmChannel) {
		t.Fatalf("Run = %v, want ErrNoAlarmChannel", err)
	}
	if got := p.Channels(false); len(got) != 1 || got[0] != "audit" {
		t.Errorf("channels left %v, want [audit]", got)
	}
}

// slowSink advances the fake clock on every Write, like a card that takes
// each 20 ms buffer in 30 ms.
type slowSink struct {
	audiotest.Recorder
	clk *fakeClock
}

func (s *slowSink) Write(b []float32) error {
	s.clk.Sleep(time.Duration(len(b)/2) * time.Second / testRate * 3 / 2)
	return s.Recorder.Write(b)
}

func TestRunFollowsABlockingSink(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	start := time.Unix(0, 0)
	clk := &fakeClock{now: start, stop: start.Add(3 * time.Second), cancel: cancel}
	sink := &slowSink{clk: clk}
	p, _ := newTestPlayer(t, PlayerConfig{Clock: clk}, Channel{Name: "slow card", Sink: sink, Alarm: true})
	if err := p.Run(ctx); err != nil {
		t.Fatal(err)
	}
	// The sink alone sets the pace: 2 s of audio in 3 s, no burst to catch
	// up with the clock, and no extra sleeping.
	if got := p.Rendered(); got < 1990*time.Millisecond || got > 2010*time.Millisecond {
		t.Errorf("rendered %v in 3 s at the slow sink's pace, want 2 s", got)
	}
	if want := 3 * time.Second; clk.slept > want+30*time.Millisecond {
		t.Errorf("clock slept %v in total; only the sink should have", clk.slept)
	}
}
