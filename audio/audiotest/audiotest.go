// Package audiotest has fakes and helpers for testing code that drives
// hewline's audio: sinks that record or fail on demand, a WAV reader and a
// detector for when a sound starts.
package audiotest

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"os"
	"sync"
	"time"
)

// Recorder is a sink that keeps every sample written to it.
type Recorder struct {
	mu      sync.Mutex
	samples []float32
	halted  bool
	closed  bool
}

// Write copies samples (it does not retain the slice).
func (r *Recorder) Write(samples []float32) error {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.closed {
		return errors.New("audiotest: write after close")
	}
	if !r.halted {
		r.samples = append(r.samples, samples...)
	}
	return nil
}

// Halt discards later writes.
func (r *Recorder) Halt() error {
	r.mu.Lock()
	r.halted = true
	r.mu.Unlock()
	return nil
}

// Close marks the recorder closed.
func (r *Recorder) Close() error {
	r.mu.Lock()
	r.closed = true
	r.mu.Unlock()
	return nil
}

// Samples returns a copy of the interleaved samples recorded so far.
func (r *Recorder) Samples() []float32 {
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]float32(nil), r.samples...)
}

// Halted and Closed report what was called.
func (r *Recorder) Halted() bool { r.mu.Lock(); defer r.mu.Unlock(); return r.halted }
func (r *Recorder) Closed() bool { r.mu.Lock(); defer r.mu.Unlock(); return r.closed }

// ErrInjected is what a FailingSink returns.
var ErrInjected = errors.New("audiotest: injected sink failure")

// FailingSink records like a Recorder until AfterSamples interleaved
// samples were accepted, then fails every Write with ErrInjected (a
// speaker lost mid-run).
type FailingSink struct {
	Recorder
	AfterSamples int
	n            int
	failed       bool
}

// Write records or fails.
func (f *FailingSink) Write(samples []float32) error {
	f.mu.Lock()
	if f.failed || f.n+len(samples) > f.AfterSamples {
		f.failed = true
		f.mu.Unlock()
		return ErrInjected
	}
	f.n += len(samples)
	f.mu.Unlock()
	return f.Recorder.Write(samples)
}

// Failed reports whether the sink has started failing.
func (f *FailingSink) Failed() bool { f.mu.Lock(); defer f.mu.Unlock(); return f.failed }

// WAV is a decoded 16-bit PCM WAV file.
type WAV struct {
	Rate     int
	Channels int
	// Data holds one slice per channel, scaled to ±1.
	Data [][]float64
}

// ReadWAV decodes a canonical 16-bit PCM WAV file (what audio.WAVSink
// writes). It checks the RIFF sizes against the file's length.
func ReadWAV(path string) (*WAV, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("audiotest: %w", err)
	}
	le := binary.LittleEndian
	if len(b) < 44 || string(b[0:4]) != "RIFF" || string(b[8:12]) != "WAVE" {
		return nil, fmt.Errorf("audiotest: %s: not a RIFF/WAVE file", path)
	}
	if int(le.Uint32(b[4:])) != len(b)-8 {
		return nil, fmt.Errorf("audiotest: %s: RIFF size %d, file has %d", path, le.Uint32(b[4:]), len(b)-8)
	}
	w := &WAV{}
	for off := 12; off+8 <= len(b); {
		id, size := string(b[off:off+4]), int(le.Uint32(b[off+4:]))
		body := b[off+8:]
		if size > len(body) {
			return nil, fmt.Errorf("audiotest: %s: chunk %q of %d bytes overruns the file", path, id, size)
		}
		body = body[:size]
		switch id {
		case "fmt ":
			if size < 16 || le.Uint16(body[0:]) != 1 || le.Uint16(body[14:]) != 16 {
				return nil, fmt.Errorf("audiotest: %s: not 16-bit PCM", path)
			}
			w.Channels = int(le.Uint16(body[2:]))
			w.Rate = int(le.Uint32(body[4:]))
		case "data":
			if w.Channels == 0 {
				return nil, fmt.Errorf("audiotest: %s: data before fmt", path)
			}
			frames := size / (2 * w.Channels)
			w.Data = make([][]float64, w.Channels)
			for c := range w.Data {
				w.Data[c] = make([]float64, frames)
			}
			for i := 0; i < frames; i++ {
				for c := 0; c < w.Channels; c++ {
					w.Data[c][i] = float64(int16(le.Uint16(body[2*(i*w.Channels+c):]))) / 32768
				}
			}
			return w, nil
		}
		off += 8 + size + size%2
	}
	return nil, fmt.Errorf("audiotest: %s: no data chunk", path)
}

// Deinterleave splits interleaved stereo float32 samples into left and
// right.
func Deinterleave(s []float32) (l, r []float64) {
	l = make([]float64, len(s)/2)
	r = make([]float64, len(s)/2)
	for i := range l {
		l[i], r[i] = float64(s[2*i]), float64(s[2*i+1])
	}
	return l, r
}

// Onset returns when x (rate samples per second) first has a window of
// length win whose RMS level is at least thresholdDBFS (dB relative to a
// full-scale square wave: 0 dBFS RMS = 1.0), searched in steps of win/4.
// The time returned is the start of that window; ok is false if x never
// gets that loud.
func Onset(x []float64, rate int, win time.Duration, thresholdDBFS float64) (t time.Duration, ok bool) {
	n := int(win.Seconds() * float64(rate))
	if n < 1 {
		n = 1
	}
	step := max(1, n/4)
	thr := math.Pow(10, thresholdDBFS/20)
	for i := 0; i+n <= len(x); i += step {
		if RMS(x[i:i+n]) >= thr {
			return time.Duration(float64(i) / float64(rate) * float64(time.Second)), true
		}
	}
	return 0, false
}

// RMS is the root mean square of x.
func RMS(x []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	s := 0.0
	for _, v := range x {
		s += v * v
	}
	return math.Sqrt(s / float64(len(x)))
}
