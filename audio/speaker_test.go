package audio

import (
	"bytes"
	"encoding/binary"
	"errors"
	"io"
	"math"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/hewline/hewline/audio/audiotest"
	"github.com/rs/zerolog"
)

// fakeDevice stands in for the sound library: when drain is set, Play
// starts a reader that takes everything queued (like a card that keeps
// up); err can be injected to play a lost device.
type fakeDevice struct {
	s     *Speaker
	drain bool

	mu     sync.Mutex
	err    error
	got    []byte
	paused bool
	closed bool
	done   chan struct{}
}

func (d *fakeDevice) Err() error { d.mu.Lock(); defer d.mu.Unlock(); return d.err }
func (d *fakeDevice) setErr(err error) {
	d.mu.Lock()
	d.err = err
	d.mu.Unlock()
}
func (d *fakeDevice) Play() {
	if !d.drain {
		return
	}
	d.done = make(chan struct{})
	go func() {
		defer close(d.done)
		b := make([]byte, 4096)
		for {
			n, err := d.s.Read(b)
			d.mu.Lock()
			d.got = append(d.got, b[:n]...)
			d.mu.Unlock()
			if err != nil {
				return
			}
		}
	}()
}
func (d *fakeDevice) Pause()       { d.mu.Lock(); d.paused = true; d.mu.Unlock() }
func (d *fakeDevice) Close() error { d.mu.Lock(); d.closed = true; d.mu.Unlock(); return nil }

func newFakeSpeaker(drain bool, stall time.Duration) (*Speaker, *fakeDevice) {
	d := &fakeDevice{drain: drain}
	s := newSpeaker(d, 960*8, stall)
	d.s = s
	return s, d
}

func TestSpeakerDeliversSamplesInOrder(t *testing.T) {
	s, d := newFakeSpeaker(true, time.Second)
	var want []float32
	for i := 0; i < 50; i++ {
		buf := make([]float32, 2*960)
		for j := range buf {
			buf[j] = float32(math.Sin(float64(i*len(buf) + j)))
		}
		want = append(want, buf...)
		if err := s.Write(buf); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	<-d.done
	if !d.closed || !d.paused {
		t.Errorf("closed %v paused %v, want both", d.closed, d.paused)
	}
	// Whatever the device took is a prefix of what was written, in order
	// (Close drops the unplayed tail).
	got := d.got
	if len(got) == 0 || len(got)%4 != 0 {
		t.Fatalf("device got %d bytes", len(got))
	}
	for i := 0; i < len(got)/4; i++ {
		if v := math.Float32frombits(binary.LittleEndian.Uint32(got[4*i:])); v != want[i] {
			t.Fatalf("sample %d: device got %g, wrote %g", i, v, want[i])
		}
	}
	if n, err := s.Read(make([]byte, 8)); n != 0 || err != io.EOF {
		t.Errorf("Read after Close = %d, %v; want io.EOF", n, err)
	}
}

func TestSpeakerFailures(t *testing.T) {
	t.Run("device reports an error", func(t *testing.T) {
		s, d := newFakeSpeaker(true, time.Second)
		buf := make([]float32, 2*960)
		if err := s.Write(buf); err != nil {
			t.Fatal(err)
		}
		d.setErr(errors.New("ALSA error at snd_pcm_writei: No such device"))
		err := s.Write(buf)
		if !errors.Is(err, ErrDeviceLost) || !strings.Contains(err.Error(), "No such device") {
			t.Fatalf("Write = %v, want ErrDeviceLost with the device's message", err)
		}
		d.setErr(nil) // the failure sticks
		if err := s.Write(buf); !errors.Is(err, ErrDeviceLost) {
			t.Errorf("after a failure: Write = %v", err)
		}
		s.Close()
	})
	t.Run("device stops taking samples", func(t *testing.T) {
		s, _ := newFakeSpeaker(false, 30*time.Millisecond)
		buf := make([]float32, 2*960)
		if err := s.Write(buf); err != nil { // fits the queue
			t.Fatal(err)
		}
		if err := s.Write(buf); !errors.Is(err, ErrDeviceLost) {
			t.Fatalf("Write to a stalled device = %v, want ErrDeviceLost", err)
		}
	})
	t.Run("halt releases a blocked write", func(t *testing.T) {
		s, d := newFakeSpeaker(false, time.Minute)
		buf := make([]float32, 2*960)
		s.Write(buf)
		done := make(chan error)
		go func() { done <- s.Write(buf) }()
		time.Sleep(20 * time.Millisecond)
		s.Halt()
		if err := <-done; err != nil {
			t.Errorf("blocked Write after Halt = %v, want nil", err)
		}
		if !d.paused {
			t.Error("device not paused after Halt")
		}
	})
}

func TestLostSpeakerAlarmGoesOnInWAV(t *testing.T) {
	spk, dev := newFakeSpeaker(true, time.Second)
	wav := &audiotest.Recorder{}
	var logs bytes.Buffer
	l := zerolog.New(&logs)
	p, err := NewPlayer(newTestSynth(t, DefaultMapping(), DefaultAlarm()), PlayerConfig{Log: &l},
		Channel{Name: "speaker", Sink: spk, Alarm: true}, Channel{Name: "audit.wav", Sink: wav})
	if err != nil {
		t.Fatal(err)
	}
	p.Set(Cue{Alarm: true})
	if err := p.Advance(300 * time.Millisecond); err != nil {
		t.Fatal(err)
	}
	dev.setErr(errors.New("ALSA error: device unplugged"))
	if err := p.Advance(time.Second); err != nil {
		t.Fatal(err)
	}
	if got := p.Channels(true); len(got) != 0 {
		t.Errorf("alarm channels left %v, want none", got)
	}
	if !strings.Contains(logs.String(), "device unplugged") || !strings.Contains(logs.String(), "ALARM CHANNEL LOST") {
		t.Errorf("log %q lacks the loss", logs.String())
	}
	left, _ := audiotest.Deinterleave(wav.Samples())
	if len(left) != testRate {
		t.Fatalf("WAV got %d frames, want %d", len(left), testRate)
	}
	if peak := maxAbs(left[testRate/2:]); peak < 0.5 {
		t.Errorf("WAV peak %.2f after the speaker was lost, want the alarm", peak)
	}
	p.Close()
}
